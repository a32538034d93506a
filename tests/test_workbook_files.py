"""Workbook files: schema migrations, refusal of bad files, the writer lock, crash safety, recovery.

Sources: "SQLite file format documentation" (header layout: magic at 0, page size at 16,
application_id at 68, page count at 28), "common practice, no source" (lock files with
pid and host, atomic replace), "hand calculation" for the expected states.
"""

from __future__ import annotations

import json
import os
import signal
import socket
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest

from core.estimates import Alternative, MarketValues, OperatingCosts, Study
from core.workbook import (
    APPLICATION_ID,
    SCHEMA_VERSION,
    Asset,
    HistoryRow,
    Site,
    Workbook,
    WorkbookError,
    WorkbookInUse,
    autosave,
    check_file,
    discard_recovery,
    find_recovery,
    lock_path,
    recovery_path,
    restore_recovery,
)
from core.workbook import schema as schema_mod
from tests.workbook_support import digest, pump_workbook

ROOT = Path(__file__).resolve().parent.parent


def study(price: float = 9000.0, title: str = "Millbrook — P-7 pump") -> Study:
    d = Alternative("Old pump", "defender", price, 4, MarketValues(decline_rate=0.2),
                    OperatingCosts(first=6000.0, gradient=400.0))
    c = Alternative("New pump", "challenger", 18000.0, 12, MarketValues(decline_rate=0.15),
                    OperatingCosts(first=4000.0, gradient=150.0))
    return Study(title, 0.1, d, (c,))


def siblings(path: Path) -> set[str]:
    return {p.name for p in path.parent.iterdir()}


@pytest.fixture()
def book(tmp_path: Path) -> Path:
    return pump_workbook(tmp_path / "plant.tenure", study())


def run_child(code: str, *args: str, wait: bool = True) -> subprocess.Popen | subprocess.CompletedProcess:
    cmd = [sys.executable, "-c", code, *args]
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    if wait:
        return subprocess.run(cmd, capture_output=True, text=True, env=env, timeout=120)
    return subprocess.Popen(cmd, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE)


def old_workbook(path: Path, schema: int) -> tuple[Workbook, str]:
    """A workbook written at an older ``schema``, still open: site Millbrook, pump P-7 with its
    2025 study and one signed-memo row; returns it and the study's fingerprint."""
    wb = Workbook.create(path, company="Harrowgate", schema=schema)
    assert wb.schema_version == schema
    wb.add_site(Site("Millbrook"))
    wb.add_asset(Asset("P-7", "Cooling water pump", "Millbrook", "pump"))
    fp = wb.save_study("P-7", 2025, study())
    wb.record_memo("P-7", 2025, fp, "A. Signer", "memo.pdf", "2025-04-01T10:00:00+00:00")
    return wb, fp


# --------------------------------------------------------------------------- schema
def test_new_workbook_carries_version_and_application_id(book: Path) -> None:
    # SQLite file format: application_id is the big-endian integer at byte 68
    head = book.read_bytes()[:100]
    assert int.from_bytes(head[68:72], "big") == APPLICATION_ID
    conn = sqlite3.connect(book)
    assert conn.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION == 4
    assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    conn.close()
    assert check_file(book) == SCHEMA_VERSION


def test_migration_from_v1_keeps_data_and_adds_v2(tmp_path: Path) -> None:
    p = tmp_path / "old.tenure"
    wb, _ = old_workbook(p, schema=1)
    wb.add_history([HistoryRow("P-7", 1, 6100.0)])
    wb.close()
    assert sqlite3.connect(p).execute("PRAGMA user_version").fetchone()[0] == 1
    before = digest(p)
    with Workbook.open(p) as ro:  # read-only: readable as v1, file untouched
        assert ro.schema_version == 1 and ro.fits("P-7") == []
        assert ro.memos()[0].title == "" and ro.study("P-7") == study()
    assert digest(p) == before
    with Workbook.open(p, write=True) as wb:
        assert wb.schema_version == SCHEMA_VERSION
        assert wb.asset("P-7").notes == ""
        assert wb.memos()[0].title == "Millbrook — P-7 pump"  # filled by the migration
        assert wb.study("P-7", 2025) == study() and len(wb.history("P-7")) == 1
        wb.save_fit("P-7", 2025, {"quantity": "operating_costs", "model": "arithmetic",
                                  "params": {"first": 1.0, "gradient": 2.0}})
        assert wb.fits("P-7", 2025)[0]["params"]["gradient"] == 2.0
        assert wb.integrity_check() == "ok"
    assert sqlite3.connect(p).execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION


def test_migration_from_v3_adds_the_role_and_certificate_of_each_memo_row(tmp_path: Path) -> None:
    # schema 4 (docs/method.md §8): a later signature is its own register row with its role
    p = tmp_path / "v3.tenure"
    wb, fp = old_workbook(p, schema=3)
    assert (wb.memos()[0].role, wb.memos()[0].certificate_sha256) == ("", "")
    wb.close()
    before = digest(p)
    with Workbook.open(p) as ro:  # read-only: readable as v3, file untouched
        assert ro.schema_version == 3 and ro.memos()[0].signer == "A. Signer"
    assert digest(p) == before
    with Workbook.open(p, write=True) as wb:
        assert wb.schema_version == 4
        old = wb.memos()[0]
        assert (old.signer, old.role, old.certificate_sha256) == ("A. Signer", "", "")
        wb.record_memo("P-7", 2025, fp, "B. Reviewer", "memo.pdf", "2025-04-02T09:00:00+00:00",
                       role="reviewed", certificate_sha256="ab" * 32)
        new = wb.memos()[1]
        assert (new.signer, new.role, new.certificate_sha256) == ("B. Reviewer", "reviewed",
                                                                   "ab" * 32)
        assert wb.integrity_check() == "ok"
    assert sqlite3.connect(p).execute("PRAGMA user_version").fetchone()[0] == 4


def test_failed_migration_leaves_v1(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    p = tmp_path / "old.tenure"
    Workbook.create(p, schema=1).close()

    def broken(conn: sqlite3.Connection) -> None:
        conn.execute("CREATE TABLE fits (x)")
        raise RuntimeError("migration bug")

    monkeypatch.setitem(schema_mod.MIGRATIONS, 1, broken)
    with pytest.raises(RuntimeError):
        Workbook.open(p, write=True)
    conn = sqlite3.connect(p)
    assert conn.execute("PRAGMA user_version").fetchone()[0] == 1
    assert conn.execute("SELECT count(*) FROM sqlite_master WHERE name='fits'").fetchone()[0] == 0
    conn.close()
    assert not lock_path(p).exists()


def test_every_version_has_a_migration() -> None:
    assert sorted(schema_mod.MIGRATIONS) == list(range(1, SCHEMA_VERSION))


# --------------------------------------------------------------------------- refusals
def _damage_btree(p: Path) -> None:
    # overwrite the cell area at the end of page 2 (a b-tree page of the schema)
    data = bytearray(p.read_bytes())
    page = int.from_bytes(data[16:18], "big")
    data[2 * page - 600:2 * page] = b"\xa5" * 600
    data[page:page + 12] = b"\x0d\xff\xff\xff\xff\xff\xff\xff\xff\xff\xff\xff"
    p.write_bytes(bytes(data))


def _foreign(p: Path) -> None:
    p.unlink()
    c = sqlite3.connect(p)
    c.execute("CREATE TABLE photos (id INTEGER PRIMARY KEY, name TEXT)")
    c.commit()
    c.close()


def _newer(p: Path) -> None:
    c = sqlite3.connect(p)
    c.execute("PRAGMA user_version = 99")
    c.commit()
    c.close()


@pytest.mark.parametrize("spoil, why", [
    (lambda p: p.write_bytes(b""), "empty"),
    (lambda p: p.write_bytes(b"name,cost\nA,1\n"), "not an SQLite database"),
    (lambda p: p.write_bytes(p.read_bytes()[:60]), "truncated"),
    (lambda p: p.write_bytes(p.read_bytes()[:5000]), "truncated"),
    (lambda p: p.write_bytes(p.read_bytes()[:8192]), "truncated"),
    (_foreign, "another program"),
    (_damage_btree, "damaged"),
    (_newer, "newer Tenure"),
])
def test_bad_files_refused_and_left_byte_identical(book: Path, spoil, why: str) -> None:
    spoil(book)
    before, names = digest(book), siblings(book)
    for write in (False, True):
        with pytest.raises(WorkbookError, match=why) as err:
            Workbook.open(book, write=write)
        assert str(err.value).startswith(f"{book}: ")
        assert digest(book) == before and siblings(book) == names  # no lock, no journal


def test_cli_truncated_workbook_exits_2_with_one_error_line(book: Path) -> None:
    book.write_bytes(book.read_bytes()[:5000])
    before = digest(book)
    proc = subprocess.run([sys.executable, "-m", "core.cli", "study", str(book)],
                          capture_output=True, text=True, cwd=ROOT, timeout=60)
    assert proc.returncode == 2
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith(f"error: {book}: not a Tenure workbook (")
    assert proc.stdout == "" and digest(book) == before


def test_missing_file_is_an_error(tmp_path: Path) -> None:
    with pytest.raises(WorkbookError, match="no such file"):
        Workbook.open(tmp_path / "none.tenure")


# --------------------------------------------------------------------------- lock
def test_second_writer_in_process_is_refused(book: Path) -> None:
    with Workbook.open(book, write=True) as first:
        with pytest.raises(WorkbookInUse, match=f"in use: open for writing by process {os.getpid()}"):
            Workbook.open(book, write=True)
        with Workbook.open(book) as reader:  # readers are welcome
            assert reader.years("P-7") == [2025]
        first.save_study("P-7", 2026, study(8000.0))
    assert not lock_path(book).exists()
    with Workbook.open(book, write=True) as again:
        assert again.years("P-7") == [2025, 2026]


CHILD_OPEN = """
import sys
from core.workbook import Workbook, WorkbookInUse
try:
    Workbook.open(sys.argv[1], write=True)
except WorkbookInUse as exc:
    print("error:", exc)
    sys.exit(2)
print("opened")
"""


def test_second_writer_in_another_process_is_refused(book: Path) -> None:
    with Workbook.open(book, write=True):
        proc = run_child(CHILD_OPEN, str(book))
        assert proc.returncode == 2, proc.stderr
        assert "in use: open for writing by process" in proc.stdout
    proc = run_child(CHILD_OPEN, str(book))
    assert proc.returncode == 0 and "opened" in proc.stdout


def test_stale_lock_of_dead_process_is_taken_over(book: Path) -> None:
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True).stdout.strip()
    lock_path(book).write_text(json.dumps({"pid": int(dead), "host": socket.gethostname(),
                                           "time": "2026-01-01T00:00:00+00:00"}))
    with Workbook.open(book, write=True) as wb:
        assert json.loads(lock_path(book).read_text())["pid"] == os.getpid()
        assert wb.writable
    assert not lock_path(book).exists()


def test_lock_from_another_host_is_respected(book: Path) -> None:
    lock_path(book).write_text(json.dumps({"pid": 1, "host": "other-" + socket.gethostname(),
                                           "time": "2026-01-01T00:00:00+00:00"}))
    with pytest.raises(WorkbookInUse, match="on other-"):
        Workbook.open(book, write=True)
    assert lock_path(book).exists()


@pytest.mark.parametrize("content", ["", "{half", "null", json.dumps(
    {"pid": 1, "host": socket.gethostname(), "time": "2026-01-01T00:00:00+00:00"})])
def test_lock_file_without_an_os_lock_never_blocks(book: Path, content: str) -> None:
    # an empty or half-written lock file, or one naming a live but unrelated process (pid 1,
    # e.g. after a reboot): nobody holds the OS lock, so the workbook opens at once
    lock_path(book).write_text(content)
    with Workbook.open(book, write=True) as wb:
        assert wb.writable
        assert json.loads(lock_path(book).read_text())["pid"] == os.getpid()
    assert not lock_path(book).exists()


CHILD_HOLD = """
import sys, time, pathlib
from core.workbook import Workbook
wb = Workbook.open(sys.argv[1], write=True)
pathlib.Path(sys.argv[2]).write_text("ready")
time.sleep(60)
"""


@pytest.mark.skipif(not hasattr(signal, "SIGKILL"), reason="needs SIGKILL")
def test_lock_of_a_killed_writer_vanishes_with_it(book: Path, tmp_path: Path) -> None:
    ready = tmp_path / "ready"
    child = run_child(CHILD_HOLD, str(book), str(ready), wait=False)
    try:
        deadline = time.time() + 60
        while not ready.exists():
            assert child.poll() is None and time.time() < deadline
            time.sleep(0.05)
        with pytest.raises(WorkbookInUse, match=f"by process {child.pid} on "):
            Workbook.open(book, write=True)
        lock_path(book).write_text("")  # even an emptied lock file does not let us in
        with pytest.raises(WorkbookInUse):
            Workbook.open(book, write=True, break_lock=True)  # a live writer is never broken
    finally:
        child.send_signal(signal.SIGKILL)
        child.wait(30)
    assert lock_path(book).exists()
    with Workbook.open(book, write=True) as wb:
        assert wb.writable


def _race_worker(book: str, rounds: int, barrier, wins, me: int) -> None:
    for r in range(rounds):
        barrier.wait()
        try:
            wb = Workbook.open(book, write=True)
        except WorkbookInUse:
            wb = None
        if wb is not None:
            wins[2 * r + me] = 1
        barrier.wait()  # both have tried while the winner still holds it
        if wb is not None:
            wb.close()
        barrier.wait()


@pytest.mark.slow
@pytest.mark.skipif(sys.platform == "win32", reason="uses fork")
def test_two_process_races_never_make_two_writers(book: Path) -> None:
    import multiprocessing as mp

    rounds = 100
    ctx = mp.get_context("fork")
    barrier = ctx.Barrier(3)
    wins = ctx.Array("b", 2 * rounds)
    procs = [ctx.Process(target=_race_worker, args=(str(book), rounds, barrier, wins, k))
             for k in (0, 1)]
    for p in procs:
        p.start()
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True).stdout.strip()
    leftovers = ["", json.dumps({"pid": int(dead), "host": socket.gethostname(), "time": "t"})]
    for r in range(rounds):
        # what the old takeover raced on: a stale lock left by a dead writer, or an empty one
        if r % 3:
            lock_path(book).write_text(leftovers[r % 2])
        barrier.wait()
        barrier.wait()
        barrier.wait()
    for p in procs:
        p.join(60)
        assert p.exitcode == 0
    per_round = [wins[2 * r] + wins[2 * r + 1] for r in range(rounds)]
    assert per_round.count(2) == 0  # never two writers at once
    assert per_round.count(1) == rounds  # and never locked out: someone always wins


# --------------------------------------------------------------------------- crashes
CHILD_EXIT = """
import os, sys
from core.estimates import Alternative, MarketValues, OperatingCosts, Study
from core.workbook import Workbook, HistoryRow
wb = Workbook.open(sys.argv[1], write=True)
d = Alternative("Old pump", "defender", 1.0, 4, MarketValues(decline_rate=0.2),
                OperatingCosts(first=1.0))
with wb.transaction():
    s = wb.study("P-7")
    wb.save_study("P-7", 2025, Study("changed", 0.2, d, s.challengers))
    wb.save_study("P-7", 2026, s)
    wb.add_history([HistoryRow("P-7", 1, 5.0)])
    os._exit(9)  # the process dies in the middle of the save
"""

CHILD_KILL = """
import sys, time, pathlib
from core.workbook import Workbook, HistoryRow
wb = Workbook.open(sys.argv[1], write=True)
wb._conn.execute("PRAGMA cache_size = 8")  # force dirty pages into the file before commit
with wb.transaction():
    wb._conn.execute("DELETE FROM studies")
    wb.add_history([HistoryRow("P-7", 1 + j % 40, float(j)) for j in range(60000)])
    pathlib.Path(sys.argv[2]).write_text("ready")
    time.sleep(60)
"""


def _assert_previous_state(book: Path) -> None:
    assert check_file(book) == SCHEMA_VERSION
    with Workbook.open(book, write=True) as wb:  # the dead writer's lock is stale
        assert wb.years("P-7") == [2025] and wb.study("P-7") == study()
        assert wb.history("P-7") == []
        assert wb.integrity_check() == "ok"


def test_crash_mid_save_keeps_previous_state(book: Path) -> None:
    proc = run_child(CHILD_EXIT, str(book))
    assert proc.returncode == 9, proc.stderr
    assert lock_path(book).exists()  # left behind by the dead process
    _assert_previous_state(book)


@pytest.mark.skipif(not hasattr(signal, "SIGKILL"), reason="needs SIGKILL")
def test_sigkill_mid_transaction_with_hot_journal_keeps_previous_state(book: Path,
                                                                       tmp_path: Path) -> None:
    ready = tmp_path / "ready"
    child = run_child(CHILD_KILL, str(book), str(ready), wait=False)
    try:
        deadline = time.time() + 90
        while not ready.exists():
            assert child.poll() is None, child.stderr.read().decode()
            assert time.time() < deadline
            time.sleep(0.05)
        size_during = book.stat().st_size
        journal = book.with_name(book.name + "-journal")
        assert journal.exists() and journal.stat().st_size > 0
    finally:
        child.send_signal(signal.SIGKILL)
        child.wait(30)
    assert size_during > 0
    _assert_previous_state(book)
    assert not book.with_name(book.name + "-journal").exists()


# --------------------------------------------------------------------------- recovery
def test_autosave_find_restore_discard(book: Path) -> None:
    assert find_recovery(book) is None
    with Workbook.open(book, write=True) as wb:
        rec = autosave(wb, pending={("P-7", 2026): study(7000.0)})
        assert rec == recovery_path(book) and find_recovery(book) == rec
        assert not [n for n in siblings(book) if ".tmp" in n]
        assert wb.years("P-7") == [2025]  # the workbook itself is unchanged
    with Workbook.open(rec) as copy:
        assert copy.years("P-7") == [2025, 2026] and copy.study("P-7").defender.price == 7000.0
        assert copy.meta()["recovery_of"] == str(book.resolve())
    restore_recovery(book)
    assert find_recovery(book) is None
    with Workbook.open(book) as wb:
        assert wb.years("P-7") == [2025, 2026] and "recovery_of" not in wb.meta()
    with Workbook.open(book, write=True) as wb:
        autosave(wb)
    discard_recovery(book)
    discard_recovery(book)  # twice is fine
    assert find_recovery(book) is None


def test_damaged_recovery_is_not_offered(book: Path) -> None:
    with Workbook.open(book) as wb:
        rec = autosave(wb)
    rec.write_bytes(rec.read_bytes()[:3000])
    assert find_recovery(book) is None
    with pytest.raises(WorkbookError, match="no intact recovery"):
        restore_recovery(book)


def test_break_lock_after_confirmation(book: Path) -> None:
    lock_path(book).write_text(json.dumps({"pid": 1, "host": "elsewhere", "time": "t"}))
    with pytest.raises(WorkbookInUse):
        Workbook.open(book, write=True)
    with Workbook.open(book, write=True, break_lock=True) as wb:
        assert json.loads(lock_path(book).read_text())["pid"] == os.getpid()
        assert wb.writable


def test_a_filesystem_without_locks_is_one_clear_refusal(book: Path, monkeypatch) -> None:
    import errno

    from core.workbook import files

    def no_locks(fd: int) -> bool:
        raise OSError(errno.ENOLCK, "No locks available")

    monkeypatch.setattr(files, "_os_lock", no_locks)
    with pytest.raises(WorkbookError, match="cannot lock it for writing \\(No locks available\\)"):
        Workbook.open(book, write=True)
