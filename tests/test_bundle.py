"""The standalone bundle (installer/build_bundle.py): built here, run with no Python and no network.

The slow test builds the PyInstaller one-folder bundle for this platform, then runs
``tenure demo/study/memo --sign/verify`` and the window (offscreen) from it with an empty
PATH (so no Python can be found), no PYTHON* variables, and no network.
"""

from __future__ import annotations

import sys
from pathlib import Path

import pytest
from install_support import (
    exercise_tenure,
    fill_wheelhouse,
    load_installer,
    no_network_env,
    no_network_wrapper,
    runtime_requirements,
    session_env,
)


@pytest.mark.slow
@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="the proof runs on Linux")
def test_bundle_runs_without_python_or_network(tmp_path: Path) -> None:
    house = fill_wheelhouse([*runtime_requirements(), "pyinstaller>=6.6"])
    build_bundle = load_installer("build_bundle")
    bundle = build_bundle.build_bundle(tmp_path / "dist", ["--find-links", str(house)])
    tenure = bundle / "tenure"
    assert tenure.is_file()
    files = {p.relative_to(bundle).as_posix() for p in bundle.rglob("*") if p.is_file()}
    # every resource, and Qt's platform plugins (xcb for a desktop, offscreen for tests)
    for needed in ("resources/demo/fleet.json", "resources/demo/cost_history.csv",
                   "resources/memo/cautions.txt", "resources/icons/tenure.png",
                   "desktop_app/demo_fallback.json"):
        assert any(f.endswith(needed) for f in files), needed
    for plugin in ("libqxcb.so", "libqoffscreen.so"):
        assert any(f.endswith(f"platforms/{plugin}") for f in files), plugin

    wrapper, how = no_network_wrapper()
    empty = tmp_path / "empty-path"
    empty.mkdir()
    env = no_network_env(session_env(tmp_path / "home"), how)
    env["PATH"] = str(empty)  # no python3 (nor anything else) to be found
    exercise_tenure([str(tenure)], tmp_path / "work", env, wrapper, window_seconds=8)
