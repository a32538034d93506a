"""Seeded fuzz run of the study reader: every file gives a result or exactly one ``error:`` line.

    python benchmarks/fuzz_studyfile.py [--files 10000] [--cli 200] [--seed 18]

Mutates valid study files (hostile numbers, over-long integers, lone surrogates,
control characters, duplicate keys, unknown keys, deleted keys, flipped bits,
truncation, deep nesting, random JSON), runs each in-process through
``core.studyfile.load_study_file`` and ``core.study.run_study`` with every
warning turned into an error, then a sample through ``python -m core.cli study``
and prints the counts. Exit 1 when any internal error, multi-line error,
warning or accepted duplicate key was seen.
"""

from __future__ import annotations

import argparse
import copy
import json
import random
import subprocess
import sys
import tempfile
import time
import traceback
import warnings
from collections import Counter
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from core.errors import StudyError, error_line  # noqa: E402
from core.study import run_study  # noqa: E402
from core.studyfile import load_study_file  # noqa: E402

DEFENDER = {"name": "Old press", "market_value": 20000, "max_life": 4,
            "market_values": {"decline_rate": 0.3},
            "operating_costs": {"first": 9000, "gradient": 2500},
            "extra_costs": [{"year": 2, "amount": 4000, "label": "overhaul"}]}
CHALLENGER = {"name": "New press", "first_cost": 60000, "max_life": 8,
              "market_values": {"values": [50000, 42000, 35000, 29000, 24000, 20000, 17000,
                                           14000]},
              "operating_costs": {"first": 3000, "growth": 0.05}}
BASES = [
    {"title": "Kestrel Road press line", "marr": 0.1, "defender": DEFENDER,
     "challengers": [CHALLENGER]},
    {"title": "Millbrook pump", "marr": 0.08, "study_period": 6, "defender": DEFENDER,
     "challengers": [CHALLENGER, {**CHALLENGER, "name": "Rebuilt press", "first_cost": 30000}]},
    {"title": "Ouseburn Yard forklift", "marr": 0.04, "tax": {"rate": 0.25, "after_tax_marr": 0.06},
     "inflation": {"rate": 0.03, "estimates": "then-current"},
     "defender": {**DEFENDER, "depreciation": {"method": "straight_line", "basis": 40000,
                                               "years": 8, "age": 3}},
     "challengers": [{**CHALLENGER, "depreciation": {"method": "macrs", "class": 7}}]},
]
HOSTILE = ["1e308", "-1e308", "1e309", "NaN", "-Infinity", "1" + "0" * 5000, "-" + "9" * 4301,
           "1" + "0" * 400, "123456789012345678901234567890", "1e12", "1000000000001", "2.5",
           "-1", "-0.9999999", "0", "101", "1e-320", "true", "null", '"\\ud800"',
           '"a\\nerror: forged"', '"\\u001b[31mred"', '"\\u202eevil"', '""', "[]", "{}",
           '[1e308, 1e308, 1e308, 1e308, 1e308, 1e308, 1e308, 1e308]', '{"values": [1e308]}',
           '{"first": 1e300, "growth": 1e30}', '"' + "x" * 10000 + '"', "0.999999999",
           "1.0000000001", "-1e12", "4.9e-324"]


def _leaf_paths(obj, path=()):
    if isinstance(obj, dict):
        for k, v in obj.items():
            yield (*path, k)
            yield from _leaf_paths(v, (*path, k))
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            yield (*path, i)
            yield from _leaf_paths(v, (*path, i))


def _set(doc, path, value):
    node = doc
    for key in path[:-1]:
        node = node[key]
    node[path[-1]] = value


def mutate(rng: random.Random) -> tuple[bytes, bool]:
    """One fuzzed file; True when it holds a duplicated key by construction."""
    base = {"format": "tenure-study", "version": 1, **copy.deepcopy(rng.choice(BASES))}
    if rng.random() < 0.1:
        base = {"format": "tenure-study", "version": 1,
                "studies": [copy.deepcopy(b) for b in rng.sample(BASES, 2)]}
    kind = rng.choices(["hostile", "many", "numbers", "duplicate", "unknown", "delete", "bits",
                        "truncate", "nest", "random"], [30, 8, 20, 12, 5, 5, 8, 5, 2, 5])[0]
    paths = list(_leaf_paths(base))
    if kind == "numbers":  # numbers anywhere in (and just past) their physical bounds
        numeric = [p for p in paths if type(_get(base, p)) in (int, float)]
        for path in rng.sample(numeric, rng.randint(1, min(6, len(numeric)))):
            _set(base, path, rng.choice([
                rng.uniform(-1e12, 1e12), 10 ** rng.uniform(-6, 12), rng.uniform(-0.999, 1.0),
                rng.choice([-0.999999, 0.0, 1.0, 1e12, -1e12, 100, 101, 1e-300]),
                rng.randint(1, 100)]))
        return json.dumps(base).encode("utf-8"), False
    if kind in ("hostile", "many"):
        marks = {}
        for n in range(1 if kind == "hostile" else rng.randint(2, 6)):
            marker = f"@@{n}@@"
            _set(base, rng.choice(paths), marker)
            marks[json.dumps(marker)] = rng.choice(HOSTILE)
            paths = list(_leaf_paths(base))
        text = json.dumps(base)
        for marker, literal in marks.items():
            text = text.replace(marker, literal, 1)
        return text.encode("utf-8"), False
    if kind == "duplicate":
        objects = [p for p in paths if isinstance(_get(base, p), dict)] or [()]
        where = rng.choice(objects + [()])
        obj = _get(base, where)
        key = rng.choice(list(obj)) if obj else "title"
        marker = "@@dup@@"
        obj[marker] = 0
        text = json.dumps(base)
        value = rng.choice(['"other"', "0.5", "1", "999", "null", json.dumps(obj.get(key))])
        text = text.replace(f'"{marker}": 0', f'{json.dumps(key)}: {value}', 1)
        return text.encode("utf-8"), True
    if kind == "unknown":
        objects = [p for p in paths if isinstance(_get(base, p), dict)] + [()]
        _get(base, rng.choice(objects))[rng.choice(["x\nerror: forged", "\x1b[2J", "note",
                                                    "\u202e", "marr "])] = 1
        return json.dumps(base).encode("utf-8"), False
    if kind == "delete":
        path = rng.choice(paths)
        parent = _get(base, path[:-1])
        del parent[path[-1]]
        return json.dumps(base).encode("utf-8"), False
    raw = bytearray(json.dumps(base, ensure_ascii=rng.random() < 0.5).encode("utf-8"))
    if kind == "bits":
        for _ in range(rng.randint(1, 4)):
            i = rng.randrange(len(raw))
            raw[i] ^= 1 << rng.randrange(8)
        return bytes(raw), False
    if kind == "truncate":
        return bytes(raw[:rng.randrange(len(raw))]), False
    if kind == "nest":
        depth = rng.choice([50, 1000, 100000])
        return (b"[" * depth + b"]" * depth) if rng.random() < 0.5 else (
            b'{"a":' * depth + b"1" + b"}" * depth), False
    return bytes(rng.randrange(256) for _ in range(rng.randint(0, 200))), False


def _get(doc, path):
    node = doc
    for key in path:
        node = node[key]
    return node


def in_process(raw: bytes, folder: Path) -> str:
    """'result', 'refused', 'multi-line' or 'internal: ...' for one file."""
    path = folder / "fuzz.json"
    path.write_bytes(raw)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        try:
            studies = load_study_file(path)
            for study in studies:
                run_study(study)
        except StudyError as exc:
            line = error_line(exc)
            if "\n" in line or "\r" in line:
                return "multi-line"
            try:
                line.encode("utf-8")
            except UnicodeEncodeError:
                return "internal: unencodable error line"
            return "refused"
        except Exception as exc:  # noqa: BLE001 - what the fuzz is looking for
            tb = traceback.extract_tb(exc.__traceback__)[-1]
            return f"internal: {type(exc).__name__} at {Path(tb.filename).name}:{tb.lineno}"
    return "result"


CLI_EXAMPLES: dict[str, str] = {}


def through_cli(raw: bytes, folder: Path) -> str:
    path = folder / "cli.json"
    path.write_bytes(raw)
    proc = subprocess.run([sys.executable, "-W", "default", "-m", "core.cli", "study", str(path)],
                          cwd=ROOT, capture_output=True, timeout=300)
    err = proc.stderr.decode("utf-8", "replace")
    if proc.returncode == 0:
        return "result" if not err else "warning output"
    if proc.returncode != 2 or "unexpected internal error" in err or "Traceback" in err:
        CLI_EXAMPLES.setdefault(f"exit {proc.returncode}", err[-400:])
        return "internal"
    if err.count("\n") != 1 or not err.startswith("error: "):
        return "multi-line"
    return "refused"


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--files", type=int, default=10000)
    ap.add_argument("--cli", type=int, default=200, help="how many go through the CLI too")
    ap.add_argument("--seed", type=int, default=18)
    args = ap.parse_args()
    rng = random.Random(args.seed)
    counts: Counter[str] = Counter()
    cli: Counter[str] = Counter()
    dup_files = dup_accepted = 0
    examples: dict[str, str] = {}
    every = max(1, args.files // max(1, args.cli)) if args.cli else 0
    start = time.perf_counter()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        for n in range(args.files):
            raw, dup = mutate(rng)
            outcome = in_process(raw, folder)
            counts[outcome.split(":")[0]] += 1
            if outcome.startswith(("internal", "multi")):
                examples.setdefault(outcome, raw[:300].decode("utf-8", "replace"))
            if dup:
                dup_files += 1
                dup_accepted += outcome == "result"
            if every and n % every == 0:
                cli[through_cli(raw, folder).split(":")[0]] += 1
    took = time.perf_counter() - start
    print(f"fuzz_studyfile: seed {args.seed}, {args.files} files in-process, "
          f"{sum(cli.values())} through 'python -m core.cli study' ({took:.0f} s)")
    print(f"  in-process: {counts['result']} results, {counts['refused']} one-line refusals, "
          f"{counts['internal']} internal errors, {counts['multi-line']} multi-line errors")
    print(f"  duplicate keys: {dup_files} files, {dup_accepted} accepted")
    print(f"  CLI: {cli['result']} results, {cli['refused']} one-line refusals, "
          f"{cli['internal']} internal errors, {cli['multi-line']} multi-line errors, "
          f"{cli['warning output']} with warning output")
    for outcome, text in examples.items():
        print(f"  example {outcome}: {text[:200]!r}")
    for outcome, text in CLI_EXAMPLES.items():
        print(f"  CLI example ({outcome}): {text!r}")
    bad = (counts["internal"] + counts["multi-line"] + dup_accepted + cli["internal"]
           + cli["multi-line"] + cli["warning output"])
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
