"""core/ imports only downward: no import cycle, module level or inside functions.

Source: the Python standard library (``ast``) parses every module of core/; a cycle in the
graph of "module A imports module B" (any import statement anywhere in A, a package's
``__init__`` counted for every import of something inside it, except A's own enclosing
packages, which Python has always started before A) fails the test.
"""

from __future__ import annotations

import ast
from pathlib import Path

CORE = Path(__file__).resolve().parent.parent / "core"


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(CORE.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _graph() -> dict[str, set[str]]:
    modules = {_module_name(p): p for p in CORE.rglob("*.py")}
    graph: dict[str, set[str]] = {name: set() for name in modules}

    def resolve(target: str) -> set[str]:
        """``target`` and the packages it runs on import, where they are core modules."""
        out = set()
        parts = target.split(".")
        for k in range(1, len(parts) + 1):
            name = ".".join(parts[:k])
            if name in modules:
                out.add(name)
        return out

    for name, path in modules.items():
        package = name if path.name == "__init__.py" else name.rpartition(".")[0]
        parts = name.split(".")
        enclosing = {".".join(parts[:k]) for k in range(1, len(parts))}
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            targets: list[str] = []
            if isinstance(node, ast.Import):
                targets = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom):
                base = node.module or ""
                if node.level:
                    anchor = package.split(".")
                    anchor = anchor[:len(anchor) - (node.level - 1)]
                    base = ".".join(anchor + ([base] if base else []))
                targets = [base] + [f"{base}.{a.name}" for a in node.names]
            for target in targets:
                if target == "core" or target.startswith("core."):
                    graph[name] |= resolve(target) - {name, "core"} - enclosing
    return graph


def _cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Every strongly connected component with more than one module (Tarjan)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    out: list[list[str]] = []
    counter = [0]

    def visit(v: str) -> None:
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph[v]):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            component = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                component.append(w)
                if w == v:
                    break
            if len(component) > 1:
                out.append(sorted(component))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return out


def test_core_has_no_import_cycle() -> None:
    assert _cycles(_graph()) == []


def test_the_checker_finds_a_cycle() -> None:
    # hand-made graph: a -> b -> c -> a is one cycle; d stands alone
    assert _cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]


def test_layers_point_downward() -> None:
    # The kernels and the decision rules import no orchestration, analysis or output module.
    graph = _graph()
    low = {"core.factors", "core.cashflows", "core.annual_worth", "core.depreciation",
           "core.aftertax", "core.inflation", "core.decision", "core.results", "core.text"}
    high = {"core.study", "core.batch", "core.fleet", "core.risk", "core.risk.analysis",
            "core.risk.engine", "core.jsonout", "core.report", "core.export", "core.cli",
            "core.memo.render"}
    for name in low:
        assert not graph[name] & high, (name, graph[name] & high)


def test_one_study_run_loads_no_heavy_library(tmp_path) -> None:
    # The closed-form replacement value needs no root finder: `tenure study --json` on one
    # study without uncertainty starts without scipy, pandas, reportlab or the workbook.
    import json
    import subprocess
    import sys

    from conftest import document

    path = tmp_path / "one.json"
    path.write_text(json.dumps(document()), encoding="utf-8")
    code = ("import io, sys, contextlib\nfrom core.cli import main\n"
            "with contextlib.redirect_stdout(io.StringIO()):\n"
            f"    assert main(['study', {str(path)!r}, '--json']) == 0\n"
            "print(sorted(m for m in ('scipy', 'pandas', 'reportlab', 'cryptography', "
            "'core.workbook') if m in sys.modules))")
    run = subprocess.run([sys.executable, "-c", code], cwd=CORE.parent, capture_output=True,
                         text=True, timeout=300)
    assert run.returncode == 0, run.stderr
    assert run.stdout.strip() == "[]"
