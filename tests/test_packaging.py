"""Packaging: everything read at run time ships in the wheel, and an installed wheel works.

The slow test builds the wheel from this checkout, installs it (not editable) into a fresh
virtual environment with ``--no-index`` from the wheelhouse (tests/install_support.py) and
runs ``tenure demo``, ``study``, ``memo --sign`` and ``verify`` from it, outside the checkout.
"""

from __future__ import annotations

import json
import re
import subprocess
import sys
import tomllib
import venv
import zipfile
from fnmatch import fnmatch
from pathlib import Path

import pytest
from install_support import (
    ROOT,
    build_wheel,
    exercise_tenure,
    fill_wheelhouse,
    offline_env,
    runtime_requirements,
    session_env,
    venv_bin,
)

PYPROJECT = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))


def _packaged(package: str, relative: str) -> bool:
    """Whether package-data ships ``relative`` (a path inside ``package``'s folder)."""
    folder, _, name = relative.rpartition("/")
    owner = ".".join(filter(None, [package, *folder.split("/")]))
    data = PYPROJECT["tool"]["setuptools"]["package-data"].get(owner, [])
    return any(fnmatch(name, pattern) for pattern in data)


def test_every_resource_file_is_package_data() -> None:
    # common practice, no source: a file read at run time that the wheel leaves out breaks
    # every installation that is not the source checkout (issue 15).
    resources = ROOT / "resources"
    files = [p.relative_to(resources).as_posix() for p in resources.rglob("*")
             if p.is_file() and "__pycache__" not in p.parts and p.suffix != ".py"]
    runtime = [f for f in files if not f.startswith("screenshots/")]
    assert {"demo/fleet.json", "memo/cautions.txt", "icons/tenure.png"} <= set(runtime)
    assert [f for f in runtime if not _packaged("resources", f)] == []
    assert not any(_packaged("resources", f) for f in files if f.startswith("screenshots/"))
    assert _packaged("desktop_app", "demo_fallback.json")


def test_no_code_finds_resources_next_to_the_source() -> None:
    # Resources are read with importlib.resources; a path built from __file__ to the
    # top-level resources/ folder works only in the checkout.
    pattern = re.compile(r"__file__.*resources|parents?\[?\d?\]?.*/ *\"resources\"")
    offenders = [str(p.relative_to(ROOT)) for folder in ("core", "desktop_app")
                 for p in (ROOT / folder).rglob("*.py")
                 if pattern.search(p.read_text(encoding="utf-8"))]
    assert offenders == []


def test_runtime_and_test_dependencies_are_apart() -> None:
    runtime = {re.split(r"[<>=!~ ;\[]", r)[0].lower() for r in PYPROJECT["project"]["dependencies"]}
    extras = PYPROJECT["project"]["optional-dependencies"]
    for tool in ("pytest", "pytest-qt", "hypothesis", "ruff", "pyinstaller"):
        assert tool not in runtime
    assert any(r.startswith("pytest") for r in extras["test"])
    assert any(r.lower().startswith("pyinstaller") for r in extras["bundle"])


@pytest.mark.slow
def test_wheel_installs_and_runs_outside_the_checkout(tmp_path: Path) -> None:
    wheel = build_wheel(tmp_path / "dist")
    names = zipfile.ZipFile(wheel).namelist()
    for needed in ("resources/__init__.py", "resources/demo/fleet.json",
                   "resources/demo/cost_history.csv", "resources/demo/resale_quotes.csv",
                   "resources/memo/cautions.txt", "resources/icons/tenure.png",
                   "desktop_app/demo_fallback.json", "core/cli.py"):
        assert needed in names
    assert not [n for n in names if n.startswith(("tests/", "resources/screenshots/"))]

    house = fill_wheelhouse(runtime_requirements())
    env_dir = tmp_path / "venv"
    venv.EnvBuilder(with_pip=False).create(env_dir)
    python = venv_bin(env_dir, "python")
    # the suite's pip installs into the new environment (--python): no ensurepip, and
    # --no-compile, to keep a slow test from being slower than it needs to be
    pip = [sys.executable, "-m", "pip", "--python", str(python)]
    done = subprocess.run([*pip, "install", "-q", "--no-compile", "--no-index",
                           "--find-links", str(house), str(wheel)],
                          capture_output=True, text=True, env=offline_env(), cwd=tmp_path)
    assert done.returncode == 0, done.stdout + done.stderr
    # the runtime environment holds no test tools
    listed = subprocess.run([*pip, "list", "--format=json"],
                            capture_output=True, text=True, env=offline_env(), check=True)
    installed = {re.sub(r"[-_.]+", "-", p["name"]).lower() for p in json.loads(listed.stdout)}
    assert "tenure" in installed and "pyside6-essentials" in installed
    assert not installed & {"pytest", "pytest-qt", "hypothesis", "ruff", "pyinstaller"}

    home = tmp_path / "home"
    exercise_tenure([str(venv_bin(env_dir, "tenure"))], tmp_path / "work", session_env(home))
    # the installed package, not this checkout, answered
    where = subprocess.run([str(python), "-c", "import resources, core; "
                            "print(resources.__file__); print(core.__file__)"],
                           capture_output=True, text=True, cwd=tmp_path, check=True)
    assert str(ROOT) not in where.stdout and str(env_dir) in where.stdout


def test_window_icon_is_read_from_the_package(qapp) -> None:
    from desktop_app.app import window_icon

    icon = window_icon()
    assert not icon.isNull() and icon.availableSizes()[0].width() == 128
