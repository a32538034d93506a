"""Helpers for the tests that install Tenure the way a site does (wheel, offline kit, bundle).

Not a test module. The slow tests build a wheel or a kit, install it somewhere fresh and
run the installed ``tenure`` (never the source tree) through :func:`exercise_tenure`.

Wheels come from a wheelhouse in pip's cache folder (``<pip cache>/tenure-wheelhouse``,
or ``TENURE_WHEELHOUSE``): filled once with ``pip download`` (which reads pip's own HTTP
cache), then used with ``--no-index --find-links``, so the tests run offline once it holds
what they need.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import tomllib
from collections.abc import Sequence
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

# The README's example study (invented figures).
STUDY = {"format": "tenure-study", "version": 1,
         "title": "Line 3 air compressor", "marr": 0.09, "study_period": None,
         "defender": {"name": "Compressor C-3", "market_value": 42000, "max_life": 5,
                      "market_values": {"decline_rate": 0.18},
                      "operating_costs": {"first": 14500, "gradient": 2800},
                      "extra_costs": [{"year": 2, "amount": 9000, "label": "airend rebuild"}]},
         "challengers": [{"name": "Screw unit 90 kW", "first_cost": 96000, "max_life": 10,
                          "market_values": {"values": [70000, 55000, 45000, 37000, 30000,
                                                       24000, 19000, 15000, 12000, 10000]},
                          "operating_costs": {"first": 5200, "growth": 0.04}}]}


def pip_cache_dir() -> Path:
    """pip's cache folder (PIP_CACHE_DIR, else the platform's user cache folder for pip)."""
    if os.environ.get("PIP_CACHE_DIR"):
        return Path(os.environ["PIP_CACHE_DIR"])
    from platformdirs import user_cache_dir

    return Path(user_cache_dir("pip", appauthor=False))


def wheelhouse() -> Path:
    tag = f"py{sys.version_info[0]}{sys.version_info[1]}-{sys.platform}"
    folder = Path(os.environ.get("TENURE_WHEELHOUSE") or pip_cache_dir() / "tenure-wheelhouse")
    folder = folder / tag
    folder.mkdir(parents=True, exist_ok=True)
    return folder


def runtime_requirements() -> list[str]:
    project = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["project"]
    return list(project["dependencies"])


def build_requirements() -> list[str]:
    pyproject = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    return list(pyproject["build-system"]["requires"])


def offline_env(extra: dict[str, str] | None = None) -> dict[str, str]:
    """The environment for an offline pip: no pip configuration files or PIP_* variables
    (this machine's own pip settings may name local wheel folders), no proxy."""
    env = {k: v for k, v in os.environ.items()
           if not k.startswith("PIP_") and k.lower() not in {"http_proxy", "https_proxy"}}
    env["PIP_CONFIG_FILE"] = os.devnull
    env["PIP_DISABLE_PIP_VERSION_CHECK"] = "1"
    env.update(extra or {})
    return env


def fill_wheelhouse(requirements: Sequence[str]) -> Path:
    """Make sure the wheelhouse holds binary wheels for ``requirements`` on this Python.

    First an offline check (``--no-index``); only if something is missing, ``pip download``
    (served from pip's HTTP cache where it can be).
    """
    house = wheelhouse()
    base = [sys.executable, "-m", "pip", "download", "-q", "--only-binary=:all:", "-d", str(house)]
    offline = subprocess.run([*base, "--no-index", "--find-links", str(house), *requirements],
                             capture_output=True, text=True, env=offline_env())
    if offline.returncode != 0:
        subprocess.run([*base, *requirements], check=True, capture_output=True, text=True)
    return house


def load_installer(name: str):
    """A module of installer/ (build_kit, build_bundle), imported from its file."""
    import importlib.util

    folder = str(ROOT / "installer")
    if folder not in sys.path:
        sys.path.insert(0, folder)  # build_bundle imports build_kit
    spec = importlib.util.spec_from_file_location(name, ROOT / "installer" / f"{name}.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def build_wheel(out: Path) -> Path:
    """Tenure's wheel, built from this checkout offline (build requirements from the wheelhouse)."""
    house = fill_wheelhouse(build_requirements())
    return load_installer("build_kit").build_wheel(out, ["--no-index", "--find-links", str(house)])


def venv_bin(venv: Path, name: str) -> Path:
    if os.name == "nt":
        return venv / "Scripts" / (name + ".exe")
    return venv / "bin" / name


def session_env(home: Path, extra: dict[str, str] | None = None) -> dict[str, str]:
    """A clean user environment in ``home``: its own settings, data, state and log folders."""
    env = {k: v for k, v in os.environ.items()
           if not k.startswith(("PYTHON", "PIP_", "VIRTUAL_ENV", "XDG_"))}
    env.update({"HOME": str(home), "USERPROFILE": str(home),
                "XDG_CONFIG_HOME": str(home / ".config"),
                "XDG_DATA_HOME": str(home / ".local" / "share"),
                "XDG_STATE_HOME": str(home / ".local" / "state"),
                "XDG_CACHE_HOME": str(home / ".cache"),
                "TENURE_STATE_DIR": str(home / "state"),
                "QT_QPA_PLATFORM": "offscreen"})
    env.update(extra or {})
    return env


def run(cmd: Sequence[str], cwd: Path, env: dict[str, str], wrapper: Sequence[str] = (),
        timeout: float = 300) -> subprocess.CompletedProcess[str]:
    return subprocess.run([*wrapper, *cmd], cwd=cwd, env=env, capture_output=True, text=True,
                          timeout=timeout)


def exercise_tenure(tenure: Sequence[str], work: Path, env: dict[str, str],
                    wrapper: Sequence[str] = (), window_seconds: float | None = None) -> None:
    """Run what a site does with a fresh installation, asserting each step.

    ``tenure demo``, ``tenure study`` (workbook and study file), ``tenure identity new``,
    ``tenure memo --sign`` and ``tenure verify``; with ``window_seconds``, also the window
    (offscreen) for that long: it must still be running when it is stopped.
    ``work`` must not be the checkout, so nothing is imported from the source tree.
    """
    assert ROOT not in (work, *work.parents)
    work.mkdir(parents=True, exist_ok=True)

    def ok(*args: str) -> str:
        done = run([*tenure, *args], work, env, wrapper)
        assert done.returncode == 0, f"tenure {' '.join(args)}: rc {done.returncode}\n" \
                                     f"{done.stdout}\n{done.stderr}"
        assert "Traceback" not in done.stderr
        return done.stdout

    assert "Harrowgate" in ok("demo", "demo.tenure")
    assert "Kestrel Road" in ok("study", "demo.tenure")
    (work / "study.json").write_text(json.dumps(STUDY), encoding="utf-8")
    text = ok("study", "study.json")
    assert "Compressor C-3" in text and "Screw unit 90 kW" in text
    (work / "pass.txt").write_text("site passphrase 42\n", encoding="utf-8")
    ok("identity", "new", "--name", "Site Engineer", "--out", "id.p12",
       "--passphrase-file", "pass.txt")
    ok("memo", "study.json", "-o", "memo.pdf", "--sign", "id.p12", "--passphrase-file", "pass.txt")
    assert (work / "memo.pdf").read_bytes()[:5] == b"%PDF-"
    # an identity nobody has trusted proves nothing: intact, but exit 1 (docs/method.md §8)
    untrusted = run([*tenure, "verify", "memo.pdf"], work, env, wrapper)
    assert untrusted.returncode == 1 and "not trusted" in untrusted.stdout + untrusted.stderr
    ok("identity", "show", "id.p12", "--passphrase-file", "pass.txt", "--cert-out", "cert.pem")
    verified = ok("verify", "memo.pdf", "--trust", "cert.pem")
    assert "Site Engineer" in verified
    tampered = bytearray((work / "memo.pdf").read_bytes())
    middle = len(tampered) // 3
    tampered[middle] = (tampered[middle] + 1) % 256
    (work / "tampered.pdf").write_bytes(bytes(tampered))
    assert run([*tenure, "verify", "tampered.pdf"], work, env, wrapper).returncode in (1, 2)
    if window_seconds is not None:
        proc = subprocess.Popen([*wrapper, *tenure], cwd=work, env=env, stdout=subprocess.PIPE,
                                stderr=subprocess.PIPE, text=True)
        try:
            proc.wait(timeout=window_seconds)
        except subprocess.TimeoutExpired:
            proc.terminate()
            out, err = proc.communicate(timeout=30)
            assert "Traceback" not in err, err
        else:
            out, err = proc.communicate()
            raise AssertionError(f"the window exited early (rc {proc.returncode}): {out}\n{err}")


def no_network_wrapper() -> tuple[list[str], str]:
    """A command prefix that runs a program with no network, and how.

    ``unshare -n`` (a new network namespace holding only a loopback that is down) where
    it works (root on Linux); else no namespace, but every proxy variable points at a
    closed local port, so pip or anything else that tried the network would fail.
    """
    unshare = shutil.which("unshare")
    if unshare:
        probe = subprocess.run([unshare, "-n", sys.executable, "-c",
                                "import socket; print([n for _, n in socket.if_nameindex()])"],
                               capture_output=True, text=True)
        if probe.returncode == 0 and probe.stdout.strip() == "['lo']":
            return [unshare, "-n"], "netns"
    return [], "proxy"


def no_network_env(env: dict[str, str], how: str) -> dict[str, str]:
    if how == "netns":
        return env
    dead = "http://127.0.0.1:9"
    return {**env, "http_proxy": dead, "https_proxy": dead, "HTTP_PROXY": dead,
            "HTTPS_PROXY": dead, "no_proxy": "", "NO_PROXY": ""}


def base_python() -> str:
    """The interpreter behind this (virtual) environment: what a site's python3 would be."""
    candidates = [Path(sys.base_prefix) / "bin" / f"python{sys.version_info[0]}.{sys.version_info[1]}",
                  Path(sys.base_prefix) / "python.exe", Path(sys._base_executable)]
    return str(next(p for p in candidates if p.exists()))
