"""The package layout reads as the data flow: imports point down the flow only, no cycles.

Read from the source (AST), so a lazy import inside a function counts like a top-level one.
The order is the one DEVELOPERS.md's module map documents.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[2] / "checker"

#: Stage -> rank. A module may import its own stage and stages of lower rank only.
RANKS = {
    "model": 0,
    "upstream": 0,
    "dsp": 1,
    "io": 2,
    "meters": 3,
    "analysis": 4,
    "profile": 5,
    "judge": 6,
    "stems": 7,
    "run": 8,
    "report": 9,
    "cli": 10,
    "": 11,  # the package root (public API) and __main__
}


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(PACKAGE.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _stage(module: str) -> str:
    parts = module.split(".")
    if len(parts) == 1 or parts[1] == "__main__":
        return ""
    return parts[1]


def _imports(path: Path) -> list[tuple[int, str]]:
    """(line, imported checker module) for every import of the project's own code."""
    tree = ast.parse(path.read_text(), filename=str(path))
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [(node.lineno, a.name) for a in node.names if a.name.startswith("checker")]
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            if node.module == "checker" or node.module.startswith("checker."):
                for alias in node.names:
                    sub = f"{node.module}.{alias.name}"
                    target = (
                        sub
                        if (PACKAGE.parent / sub.replace(".", "/")).exists()
                        or (PACKAGE.parent / (sub.replace(".", "/") + ".py")).exists()
                        else node.module
                    )
                    found.append((node.lineno, target))
        elif isinstance(node, ast.ImportFrom) and node.level:
            found.append((node.lineno, f"relative import level {node.level}"))
    return found


def _all_modules() -> dict[str, Path]:
    return {_module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}


def test_every_stage_is_known():
    stages = {_stage(m) for m in _all_modules()}
    assert stages <= set(RANKS), f"stages without a rank: {sorted(stages - set(RANKS))}"


def test_no_relative_imports():
    bad = [
        f"{m} line {line}"
        for m, p in _all_modules().items()
        for line, t in _imports(p)
        if t.startswith("relative")
    ]
    assert not bad, "use absolute imports: " + ", ".join(bad)


def test_imports_point_down_the_flow():
    bad = []
    for module, path in _all_modules().items():
        own = RANKS[_stage(module)]
        for line, target in _imports(path):
            if RANKS[_stage(target)] > own:
                bad.append(f"{module}:{line} imports {target} (stage '{_stage(target)}' is later)")
    assert not bad, "\n".join(bad)


def _graph() -> dict[str, set[str]]:
    modules = _all_modules()
    graph: dict[str, set[str]] = {}
    for module, path in modules.items():
        targets = set()
        for _, t in _imports(path):
            # importing checker.a.b also runs checker.a's __init__
            parts = t.split(".")
            for i in range(2, len(parts) + 1):
                name = ".".join(parts[:i])
                if name in modules and name != module:
                    targets.add(name)
        graph[module] = targets
    return graph


def test_no_import_cycles():
    graph = _graph()
    state: dict[str, int] = {}
    cycles = []

    def visit(node: str, stack: list[str]) -> None:
        state[node] = 1
        for nxt in sorted(graph.get(node, ())):
            if nxt.startswith(node + ".") or node.startswith(nxt + "."):
                continue  # a package and its own modules
            if state.get(nxt) == 1:
                cycles.append(" -> ".join(stack[stack.index(nxt) :] + [nxt]))
            elif nxt not in state:
                visit(nxt, stack + [nxt])
        state[node] = 2

    for m in sorted(graph):
        if m not in state and m != "checker":
            visit(m, [m])
    assert not cycles, "import cycles:\n" + "\n".join(cycles)


@pytest.mark.parametrize("stage", sorted(s for s in RANKS if s and s != "upstream"))
def test_every_stage_says_what_it_owns(stage):
    init = PACKAGE / stage / "__init__.py"
    doc = ast.get_docstring(ast.parse(init.read_text())) or ""
    assert "May import" in doc or "may import" in doc, f"{init}: say what the stage may import"


def test_the_checker_import_does_not_load_a_stage_twice_named():
    # the flat module names of the old layout are gone (a stale .pyc must not shadow them)
    flat = [
        p.name for p in PACKAGE.glob("*.py") if p.stem not in ("__init__", "__main__", "upstream")
    ]
    assert not flat, f"modules outside a stage: {flat}"
