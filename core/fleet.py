"""Many replacement studies at once (a fleet) for the CLI: a thin layer over ``run_studies``.

A fleet is a batch of studies: ``core.study.run_studies`` computes every study of it in
one numpy pass (``core.batch`` stacks them), through the same path as a single study, so
``run_fleet(studies)[k]`` is ``run_study(studies[k])`` bit for bit.
"""

from __future__ import annotations

import gc
import json
import os
import sys
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import Any, TypeVar

from core.errors import StudyError
from core.estimates import Study
from core.jsonout import dumps_compact, study_jsons
from core.results import StudyResult
from core.study import run_studies
from core.studyfile import FORMAT, VERSION, loads_json, parse_study

#: Fleets at least this large are split over two processes where fork() is available.
PARALLEL_MIN = 1000


def run_fleet(studies: Sequence[Study]) -> list[StudyResult]:
    """``run_studies(studies)``."""
    return run_studies(studies)


def run_fleet_json(studies: Sequence[Study]) -> list[dict[str, Any]]:
    """``[study_json(r) for r in run_studies(studies)]`` (docs/method.md §6 objects), the
    arrays of the whole fleet rounded in one pass (``study_jsons``)."""
    return study_jsons(run_studies(studies))


@contextmanager
def _collector_paused() -> Iterator[None]:
    """Pause the cyclic garbage collector: a fleet allocates millions of small objects (the
    rounded figures) and holds no reference cycles, and every collection would walk them."""
    was = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was:
            gc.enable()


def fleet_json_text(studies: Sequence[Study], processes: int | None = None) -> str:
    """The §6 objects of ``studies`` as compact JSON texts joined by ",\\n", in order.

    On Linux with two or more CPUs and at least ``PARALLEL_MIN`` studies, the second half
    is computed in a second process (``_split_work``) while this process computes the first
    half.  Any trouble in the second process falls back to computing that half here, so the
    result never depends on it.

    >>> from core.estimates import Alternative, MarketValues, OperatingCosts, Study
    >>> d = Alternative("Old", "defender", 10.0, 1, MarketValues(values=(5.0,)),
    ...                 OperatingCosts(values=(2.0,)))
    >>> c = Alternative("New", "challenger", 20.0, 1, MarketValues(values=(15.0,)),
    ...                 OperatingCosts(values=(1.0,)))
    >>> text = fleet_json_text([Study("A", 0.0, d, (c,)), Study("B", 0.0, d, (c,))], processes=2)
    >>> [json.loads(line.rstrip(","))["title"] for line in text.split("\\n")]
    ['A', 'B']
    """
    with _collector_paused():
        return _fleet_json_text(studies, processes)


def _fleet_json_text(studies: Sequence[Study], processes: int | None) -> str:
    if processes is None:
        processes = 2 if (len(studies) >= PARALLEL_MIN and sys.platform.startswith("linux")
                          and (os.cpu_count() or 1) >= 2) else 1
    if processes < 2 or len(studies) < 2 or not hasattr(os, "fork"):
        return ",\n".join(dumps_compact(d) for d in run_fleet_json(studies))
    half = (len(studies) + 1) // 2
    head, tail = studies[:half], studies[half:]

    def child() -> bytes:
        return ",\n".join(dumps_compact(d) for d in run_fleet_json(tail)).encode("utf-8")

    first, data = _split_work(child, lambda: ",\n".join(dumps_compact(d) for d in run_fleet_json(head)))
    second = data.decode("utf-8") if data is not None else child().decode("utf-8")
    return first + ",\n" + second


T = TypeVar("T")

#: The work of the second process, set just before the pool forks it (the forked worker
#: inherits the parsed studies instead of receiving them pickled).
_CHILD_WORK: Callable[[], bytes] | None = None


def _child_work() -> bytes:
    assert _CHILD_WORK is not None
    return _CHILD_WORK()


def _split_work(child: Callable[[], bytes], parent: Callable[[], T]) -> tuple[T, bytes | None]:
    """Run ``child`` in a second process (``concurrent.futures``, forked) while this one runs
    ``parent``.

    Returns the parent's result and the child's bytes, or None when the child failed (the
    caller then does that half itself).  Measured with benchmarks/bench_engine.py: on a
    fleet of 5,000 studies the second process still shortens the run (see DEVELOPERS.md).
    """
    # Imported here: only a large fleet needs them, and a one-study run starts faster without.
    from concurrent.futures import ProcessPoolExecutor
    from multiprocessing import get_context

    global _CHILD_WORK
    _CHILD_WORK = child
    try:
        with ProcessPoolExecutor(max_workers=1, mp_context=get_context("fork")) as pool:
            future = pool.submit(_child_work)
            result = parent()
            try:
                data: bytes | None = future.result()
            except Exception:  # noqa: BLE001 - the caller redoes this half
                data = None
    finally:
        _CHILD_WORK = None
    return result, data


def _parse_items(items: list[Any], start: int) -> list[Study]:
    return [parse_study(obj, f"$.studies[{k}]") for k, obj in enumerate(items, start=start)]


def study_file_json_text(path: str | os.PathLike[str]) -> str | None:
    """Parse, run and write a large multi-study JSON file in two processes; None otherwise.

    Returns None (the caller then takes the ordinary path, which reports any problem) unless
    ``path`` is a readable UTF-8 study JSON file of the form {"format", "version",
    "studies": [...]} with at least ``PARALLEL_MIN`` studies, on Linux with two or more CPUs.
    Then a forked child parses and computes the second half while this process does the
    first; refusals come out exactly as ``parse_study_document`` gives them (the first bad
    study in file order, then a repeated title).
    """
    if not (sys.platform.startswith("linux") and hasattr(os, "fork")
            and (os.cpu_count() or 1) >= 2):
        return None
    with _collector_paused():
        return _study_file_json_text(Path(path))


def _study_file_json_text(file: Path) -> str | None:
    try:
        if file.suffix.lower() == ".tenure" or not file.is_file():
            return None
        raw = file.read_bytes()
        if raw.startswith(b"SQLite format 3\x00"):
            return None
        obj = loads_json(raw.decode("utf-8-sig"))  # strict: duplicate keys refused
    except (OSError, ValueError, RecursionError, StudyError):
        return None
    if not (isinstance(obj, dict) and set(obj) == {"format", "version", "studies"}
            and obj["format"] == FORMAT and type(obj["version"]) is int
            and obj["version"] == VERSION and isinstance(obj["studies"], list)
            and len(obj["studies"]) >= PARALLEL_MIN):
        return None
    items = obj["studies"]
    half = (len(items) + 1) // 2

    def child() -> bytes:  # parse and run the tail: E+error, or titles NUL text
        try:
            tail = _parse_items(items[half:], half)
        except StudyError as exc:
            return b"E" + json.dumps([exc.path, exc.message]).encode("utf-8")
        return (b"1" + json.dumps([s.title for s in tail]).encode("utf-8") + b"\0"
                + ",\n".join(dumps_compact(d) for d in run_fleet_json(tail)).encode("utf-8"))

    def parent() -> tuple[list[Study], str]:
        head = _parse_items(items[:half], 0)
        return head, ",\n".join(dumps_compact(d) for d in run_fleet_json(head))

    (head, first), data = _split_work(child, parent)
    if data is not None and data[:1] == b"E":
        where, message = json.loads(data[1:].decode("utf-8"))
        raise StudyError(where, message)
    if data is not None and data[:1] == b"1":
        titles_raw, _, text = data[1:].partition(b"\0")
        tail_titles = json.loads(titles_raw.decode("utf-8"))
        second = text.decode("utf-8")
    else:
        tail = _parse_items(items[half:], half)
        tail_titles = [s.title for s in tail]
        second = ",\n".join(dumps_compact(d) for d in run_fleet_json(tail))
    seen: set[str] = set()
    for k, title in enumerate([s.title for s in head] + tail_titles):
        if title in seen:
            raise StudyError(f"$.studies[{k}].title", f"'{title}' is used twice")
        seen.add(title)
    return first + ",\n" + second
