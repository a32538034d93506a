"""Faults: a full disk, read-only files, leftovers of killed processes, passphrase files.

What must hold (docs/method.md §7, §15): a save that cannot complete says why in
words ("disk full", "read-only") and leaves the previous state; temporary files
of killed processes are removed at the next start; nothing prints a traceback.
The full disk is this process's file-size limit (RLIMIT_FSIZE, POSIX
setrlimit(2); SIGXFSZ ignored so write(2) fails with EFBIG), set in a child
process so the test runner is unaffected.
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
from pathlib import Path

import pytest

from core.cli import main
from core.estimates import Alternative, MarketValues, OperatingCosts, Study
from core.workbook import (
    Workbook,
    WorkbookError,
    WorkbookReadOnly,
    autosave,
    find_recovery,
    write_problem,
)
from tests.workbook_support import digest, pump_workbook

ROOT = Path(__file__).resolve().parents[1]
POSIX = pytest.mark.skipif(os.name != "posix", reason="setrlimit and setuid are POSIX")


def _study(price: float = 9000.0) -> Study:
    d = Alternative("Old pump", "defender", price, 4, MarketValues(decline_rate=0.2),
                    OperatingCosts(first=3000.0, gradient=400.0))
    c = Alternative("New pump", "challenger", 21000.0, 10, MarketValues(decline_rate=0.15),
                    OperatingCosts(first=1200.0))
    return Study("Millbrook cooling water pump", 0.08, d, (c,))


@pytest.fixture()
def book(tmp_path: Path) -> Path:
    return pump_workbook(tmp_path / "plant.tenure", _study())


def _child(code: str, *args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-c", code, *args], capture_output=True, text=True,
                          cwd=ROOT, env={**os.environ, "PYTHONPATH": str(ROOT)}, timeout=120)


CHILD_FULL = """
import resource, signal, sys
from pathlib import Path
from core.workbook import Workbook, HistoryRow
book = Path(sys.argv[1])
signal.signal(signal.SIGXFSZ, signal.SIG_IGN)  # write(2) then fails with EFBIG
limit = book.stat().st_size + 16384
resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))
wb = Workbook.open(book, write=True)
rows = [HistoryRow("P-7", 1 + j % 40, float(j), source="x" * 40) for j in range(30000)]
try:
    wb.add_history(rows)
except Exception as exc:
    print(type(exc).__name__ + ": " + str(exc))
# the edits are still in memory: save them elsewhere once there is room
print("kept", len(rows), "history", len(wb.history("P-7")))
"""


@POSIX
def test_disk_full_mid_save_says_so_and_keeps_the_previous_state(book: Path) -> None:
    before = digest(book)
    proc = _child(CHILD_FULL, str(book))
    assert proc.returncode == 0, proc.stderr
    first, second = proc.stdout.splitlines()
    assert first.startswith("WorkbookError: ") and "disk full: the save did not happen" in first
    assert "cannot rollback" not in proc.stdout + proc.stderr
    assert second == "kept 30000 history 0"
    assert proc.stderr == ""
    assert digest(book) == before
    with Workbook.open(book, write=True) as wb:
        assert wb.integrity_check() == "ok" and wb.years("P-7") == [2025]


CHILD_EXPORT_FULL = """
import resource, signal, sys
from core.cli import main
signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
resource.setrlimit(resource.RLIMIT_FSIZE, (300, 300))
sys.exit(main(["export", sys.argv[1], "-o", sys.argv[2]]))
"""


@POSIX
@pytest.mark.parametrize("suffix", [".xlsx", ".csv"])
def test_export_on_a_full_disk_leaves_nothing_behind(book: Path, tmp_path: Path,
                                                      suffix: str) -> None:
    out = tmp_path / "out" / f"tables{suffix}"
    out.parent.mkdir()
    out.write_bytes(b"previous")
    proc = _child(CHILD_EXPORT_FULL, str(book), str(out))
    assert proc.returncode == 2
    assert proc.stderr.count("\n") == 1 and proc.stderr.startswith(f"error: {out}: disk full")
    assert "Exception ignored" not in proc.stderr and "Traceback" not in proc.stderr
    assert sorted(p.name for p in out.parent.iterdir()) == [out.name]
    assert out.read_bytes() == b"previous"


def test_leftover_part_files_of_a_killed_export_are_removed_by_the_next(book: Path,
                                                                        tmp_path: Path) -> None:
    out = tmp_path / "tables.csv"
    dead = int(subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                              capture_output=True, text=True).stdout)
    (tmp_path / f"tables.csv.{dead}.part").write_text("half")
    (tmp_path / "tables.csv.part").write_text("half, from an older Tenure")
    (tmp_path / f"other.csv.{dead}.part").write_text("not ours to remove")
    assert main(["export", str(book), "-o", str(out)]) == 0
    names = sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(("tables", "other")))
    assert names == [f"other.csv.{dead}.part", "tables.csv"]


def test_recovery_temp_files_of_killed_autosaves_are_removed_at_the_next_start(book: Path) -> None:
    dead = int(subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                              capture_output=True, text=True).stdout)
    for pid in (dead, dead + 100000):  # pids of processes that are gone
        (book.parent / f"{book.name}.recovery.tmp{pid}").write_bytes(b"\0" * 4096)
    live = book.parent / f"{book.name}.recovery.tmp{os.getppid()}"  # a live process's: kept
    live.write_bytes(b"\0")
    assert find_recovery(book) is None
    assert sorted(p.name for p in book.parent.iterdir() if ".tmp" in p.name) == [live.name]
    (book.parent / f"{book.name}.recovery.tmp{dead}").write_bytes(b"\0")
    with Workbook.open(book, write=True) as wb:
        autosave(wb)
    assert sorted(p.name for p in book.parent.iterdir() if ".tmp" in p.name) == [live.name]


CHILD_READ_ONLY = """
import os, sys
import core.fsutil
from core.workbook import Workbook, WorkbookReadOnly  # imported first: nobody may not read them
os.setgid(65534); os.setuid(65534)  # nobody: file permissions apply again
try:
    Workbook.open(sys.argv[1], write=True)
except WorkbookReadOnly as exc:
    print("refused:", exc)
with Workbook.open(sys.argv[1]) as wb:
    print("read:", wb.years("P-7"))
"""


@POSIX
def test_read_only_workbook_is_refused_for_writing_with_the_reason(tmp_path: Path) -> None:
    import shutil

    root = os.getuid() == 0  # root writes any file: the check runs as "nobody" in a child
    folder = Path(tempfile.mkdtemp()) if root else tmp_path
    try:
        os.chmod(folder, 0o755)
        book = folder / "plant.tenure"
        pump_workbook(book, _study())
        os.chmod(book, 0o444)
        before = digest(book)
        if root:
            proc = _child(CHILD_READ_ONLY, str(book))
            assert proc.returncode == 0, proc.stderr
            assert "refused: " in proc.stdout and "read-only: the file is read-only" in proc.stdout
            assert "read: [2025]" in proc.stdout
        else:
            with pytest.raises(WorkbookReadOnly, match="read-only: the file is read-only"):
                Workbook.open(book, write=True)
        assert digest(book) == before and not (folder / "plant.tenure.lock").exists()
    finally:
        if root:
            shutil.rmtree(folder, ignore_errors=True)


def test_write_problem_names_the_folder(tmp_path: Path, monkeypatch) -> None:
    p = tmp_path / "plant.tenure"
    p.write_bytes(b"x")
    assert write_problem(p) is None
    monkeypatch.setattr(os, "access", lambda *a, **k: False)
    assert "folder is read-only" in write_problem(p)
    monkeypatch.undo()
    with pytest.raises(WorkbookError):
        Workbook.open(tmp_path / "missing.tenure", write=True)


def test_passphrase_file_readable_by_others_is_warned_about(tmp_path: Path, capsys) -> None:
    pw = tmp_path / "pass.txt"
    pw.write_bytes(b"kestrel-road-2026\n")
    os.chmod(pw, 0o644)
    out = tmp_path / "id.p12"
    assert main(["identity", "new", "--name", "Dana Whitfield", "--out", str(out),
                 "--passphrase-file", str(pw)]) == 0
    err = capsys.readouterr().err
    assert err.startswith("warning: ") and "can be read by everyone on this computer" in err
    assert f"chmod 600 {pw}" in err
    assert oct(out.stat().st_mode & 0o777) == "0o600"  # the key file itself stays private
    os.chmod(pw, 0o600)
    assert main(["identity", "show", str(out), "--passphrase-file", str(pw)]) == 0
    assert capsys.readouterr().err == ""
    # a refusal stays one line even with the warning pending
    os.chmod(pw, 0o640)
    assert main(["identity", "new", "--name", "X", "--out", str(out),
                 "--passphrase-file", str(pw)]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: --out:") and err.count("\n") == 1
