"""Hostile input: every refusal is one clean line (docs/method.md §6, §15).

Exit 2 and exactly one line ``error: <where>: <what>`` on stderr for overflowing
numbers, lone surrogates, over-long integers, control characters, duplicate
keys, absurd magnitudes and damaged workbooks; never "unexpected internal
error", never a warning line. The bounds themselves are our own rule
(common practice, no source); the 4,300-digit limit is CPython's
``sys.get_int_max_str_digits()`` default.
"""

from __future__ import annotations

import copy
import json
import subprocess
import sys
import warnings
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from core.cli import main
from core.errors import StudyError, error_line, escape_text
from core.studyfile import MAX_AMOUNT, load_study_file, loads_json
from tests.conftest import document
from tests.workbook_support import digest

ROOT = Path(__file__).resolve().parents[1]


def _run(capsys, tmp_path: Path, text: str, *args: str) -> tuple[int, str, str]:
    path = tmp_path / "study.json"
    path.write_text(text, encoding="utf-8", errors="surrogatepass")
    rc = main(["study", str(path), *args])
    out, err = capsys.readouterr()
    return rc, out, err


def _one_line(err: str) -> None:
    assert err.startswith("error: ") and err.count("\n") == 1, err
    assert "unexpected internal error" not in err and "Traceback" not in err
    assert all(ch == "\n" or ord(ch) >= 0x20 for ch in err)


def _doc_with(path: list, value) -> dict:
    doc = document()
    node = doc
    for key in path[:-1]:
        node = node[key]
    node[path[-1]] = value
    return doc


@pytest.mark.parametrize(("path", "literal", "where", "words"), [
    (["defender", "market_value"], "1e308", "$.defender.market_value", "largest amount"),
    (["challengers", 0, "first_cost"], "1e300", "$.challengers[0].first_cost", "largest amount"),
    (["defender", "operating_costs", "gradient"], "-1e13", "$.defender.operating_costs.gradient",
     "largest amount"),
    # longer than CPython's 4,300-digit int limit: written by hand (str(int) would refuse)
    (["challengers", 0, "operating_costs", "first"], "1" + "0" * 5000,
     "$.challengers[0].operating_costs.first", "5001 digits"),
    (["defender", "max_life"], "-" + "9" * 4400, "$.defender.max_life", "4400 digits"),
    (["marr"], "2.5", "$.marr", "100 % a year"),
    (["challengers", 0, "operating_costs"], '{"first": 100, "growth": 1e30}',
     "$.challengers[0].operating_costs.growth", "100 % a year"),
])
def test_absurd_numbers_are_refused_with_the_bound(capsys, tmp_path, path, literal, where, words):
    text = json.dumps(_doc_with(path, "__BIG__")).replace('"__BIG__"', literal)
    rc, _, err = _run(capsys, tmp_path, text)
    assert rc == 2
    _one_line(err)
    assert err.startswith(f"error: {where}: ") and words in err


def test_overflowing_market_values_give_no_warning_lines(tmp_path):
    doc = _doc_with(["defender", "market_values"], {"values": [1e308, 1e308, 1e308]})
    path = tmp_path / "huge.json"
    path.write_text(json.dumps(doc), encoding="utf-8")
    proc = subprocess.run([sys.executable, "-W", "default", "-m", "core.cli", "study", str(path)],
                          cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert proc.returncode == 2
    assert proc.stderr.count("\n") == 1 and "Warning" not in proc.stderr
    assert proc.stderr.startswith("error: $.defender.market_values.values[0]: ")
    assert f"{MAX_AMOUNT:,.0f}" in proc.stderr


def test_the_largest_accepted_amounts_and_rates_compute_without_warnings():
    from core.study import run_study

    doc = document()
    doc["marr"] = 1.0
    doc["defender"]["market_value"] = MAX_AMOUNT
    doc["challengers"][0].update(first_cost=MAX_AMOUNT, max_life=100)
    doc["challengers"][0]["operating_costs"] = {"first": MAX_AMOUNT, "growth": 1.0}
    doc["inflation"] = {"rate": 1.0, "estimates": "then-current"}
    (study,) = load_from_text(json.dumps(doc))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        result = run_study(study)
    assert result.recommendation.action in ("keep", "replace")


def load_from_text(text: str):
    from core.studyfile import loads_study_document

    return loads_study_document(text)


@pytest.mark.parametrize(("key", "name"), [
    ("name", "Pump\ud800"),            # lone surrogate
    ("name", "Pump\nerror: forged"),    # a second error line
    ("name", "Pump\x1b[2J"),            # terminal escape
])
def test_bad_text_in_names_is_one_escaped_line(capsys, tmp_path, key, name):
    doc = document()
    doc["defender"][key] = name
    rc, _, err = _run(capsys, tmp_path, json.dumps(doc))  # ensure_ascii: \ud800 escaped in JSON
    assert rc == 2
    _one_line(err)
    assert err.startswith("error: $.defender.name: ")


def test_control_characters_in_keys_are_escaped(capsys, tmp_path):
    doc = document()
    doc["defender"]["x\nerror: $.marr: forged\x1b[31m"] = 1
    rc, _, err = _run(capsys, tmp_path, json.dumps(doc))
    assert rc == 2
    _one_line(err)
    assert "x\\nerror: $.marr: forged\\x1b[31m" in err


def test_text_output_escapes_invisible_marks(capsys, tmp_path):
    doc = document()
    doc["challengers"][0]["name"] = "New press \u202eevil"
    rc, out, _ = _run(capsys, tmp_path, json.dumps(doc))
    assert rc == 0
    assert "\u202e" not in out and "New press \\u202eevil" in out


@pytest.mark.parametrize(("text", "where"), [
    ('{"format": "tenure-study", "format": "tenure-study", "version": 1}', "$.format"),
    (json.dumps(document())[:-1] + ', "marr": 0.5}', "$.marr"),
    (json.dumps(document()).replace('"max_life": 3,', '"max_life": 3, "max_life": 30,'),
     "$.defender.max_life"),
    ('{"studies": [{}, {"a": 1, "b": {"c": [1, {"d": 1, "d": 2}]}}]}',
     "$.studies[1].b.c[1].d"),
])
def test_duplicate_keys_are_refused_with_their_path(capsys, tmp_path, text, where):
    rc, _, err = _run(capsys, tmp_path, text)
    assert rc == 2
    _one_line(err)
    assert err.startswith(f"error: {where}: given twice")


def test_duplicate_keys_refused_in_every_json_reader(tmp_path):
    with pytest.raises(StudyError, match=r"^x\.a: given twice"):
        loads_json('{"a": 1, "a": 1}', "x")
    # the memo attachment and the workbook's stored studies use the same reader
    from core.memo import verify

    assert verify._attachment_fingerprint(b'{"format": 1, "format": 1}')[2].startswith(
        "the attached study does not load: attachment.format: given twice")


def test_a_flipped_bit_in_a_workbook_text_column_names_table_and_row(capsys, tmp_path):
    from core.workbook import Asset, Site, Workbook

    book = tmp_path / "plant.tenure"
    with Workbook.create(book, company="Harrowgate Fabrication Ltd.") as wb:
        wb.add_site(Site("Millbrook"))
        wb.add_asset(Asset("P-1", "Feed pump", "Millbrook"))
        wb.add_asset(Asset("P-7", "Cooling water pump", "Millbrook"))
    data = bytearray(book.read_bytes())
    i = data.find(b"Cooling water")
    data[i + 3] ^= 0x80  # one flipped bit: 'l' (0x6c) -> 0xec, a broken UTF-8 sequence
    book.write_bytes(bytes(data))
    before = digest(book)
    for argv in (["study", str(book)], ["study", str(book), "--json"]):
        assert main(argv) == 2
        err = capsys.readouterr().err
        _one_line(err)
        assert "table assets, row 2 (tag P-7), column description is not valid UTF-8" in err
    assert digest(book) == before


def test_escape_text_is_one_line_for_every_character():
    every = "".join(chr(c) for c in range(0, 0x3000))
    line = escape_text(every)
    assert "\n" not in line and "\r" not in line and "\x1b" not in line
    line.encode("utf-8")  # no lone surrogate survives
    assert error_line(StudyError("$.a\nb", "c\rd")) == "error: $.a\\nb: c\\rd"


# ------------------------------------------------------------------ property tests
# text with control characters, bidi marks and lone surrogates among ordinary letters
_text = st.text(st.characters(exclude_categories=()) | st.characters(
    min_codepoint=0xD800, max_codepoint=0xDFFF, exclude_categories=()) | st.sampled_from(
    "\n\r\x1b\x00\x7f\u202e\u2028\ufeff"), max_size=12)
_json = st.recursive(
    st.none() | st.booleans() | st.integers() | st.floats() | _text,
    lambda children: st.lists(children, max_size=4) | st.dictionaries(_text, children,
                                                                      max_size=4),
    max_leaves=12)


def _leaves(obj, path=()):
    if isinstance(obj, dict):
        for k, v in obj.items():
            yield from _leaves(v, (*path, k))
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            yield from _leaves(v, (*path, i))
    yield path


def _check_reader(raw: bytes, tmp_path: Path) -> None:
    """The study reader (and the engine on what it accepts): a result, or one error line."""
    from core.study import run_study

    path = tmp_path / "fuzz.json"
    path.write_bytes(raw)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        try:
            studies = load_study_file(path)
        except StudyError as exc:
            line = error_line(exc)
            assert "\n" not in line and "\r" not in line
            line.encode("utf-8")
            return
        for study in studies:
            if study.uncertainty is None:
                run_study(study)


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.binary(max_size=300))
def test_any_bytes_give_a_result_or_one_error_line(tmp_path, raw):
    _check_reader(raw, tmp_path)


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(_json)
def test_any_json_document_gives_a_result_or_one_error_line(tmp_path, obj):
    _check_reader(json.dumps(obj).encode("utf-8", "surrogatepass"), tmp_path)


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.data())
def test_a_valid_study_with_one_value_replaced_gives_a_result_or_one_error_line(tmp_path, data):
    doc = document()
    doc["challengers"][0]["extra_costs"] = [{"year": 2, "amount": 500, "label": "overhaul"}]
    paths = [p for p in _leaves(doc) if p]
    path = data.draw(st.sampled_from(paths))
    value = data.draw(_json | st.floats(min_value=-1e308, max_value=1e308)
                      | st.sampled_from([1e308, -1e308, 1e12, 1.0000001e12, 0.999999, 1.0, -0.9999]))
    mutated = copy.deepcopy(doc)
    node = mutated
    for key in path[:-1]:
        node = node[key]
    node[path[-1]] = value
    _check_reader(json.dumps(mutated).encode("utf-8", "surrogatepass"), tmp_path)
