"""The engine's layer rule, checked on its import statements (DEVELOPERS.md, Architecture).

Each subpackage of ``engine/`` is a layer; a module may import its own layer and those
below, never one above; the engine never imports Streamlit or the dashboard; and no
modules import each other in a circle. Imports inside functions count too (they are
how a circle hides); imports under ``if TYPE_CHECKING:`` count for the layer rule but
not for circles, since they never run.
"""

from __future__ import annotations

import ast
from pathlib import Path

ENGINE = Path(__file__).resolve().parent.parent / "engine"
# Bottom to top; top-level modules of engine/ (cli, api, __init__, __main__) sit above all.
LAYERS = ("base", "physics", "curves", "library", "selection", "output")
TOP = len(LAYERS)
FORBIDDEN = ("streamlit", "dashboard")


def _module_name(path: Path, root: Path) -> str:
    parts = list(path.relative_to(root.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _layer(module: str) -> int:
    parts = module.split(".")
    if len(parts) >= 3 or (len(parts) == 2 and parts[1] in LAYERS):
        return LAYERS.index(parts[1]) if parts[1] in LAYERS else TOP
    return TOP


def _imports(tree: ast.Module, module: str):
    """(candidate modules, line, under TYPE_CHECKING) for every import in the tree; the
    first candidate that is a module of the package is the one imported."""
    guarded: set[int] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test):
            guarded |= {id(n) for n in ast.walk(node)}
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                yield [alias.name], node.lineno, id(node) in guarded
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = module.split(".")[: -node.level] if node.level else []
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            # "from engine.physics import mount" may name a module or a name in one
            names = [f"{target}.{alias.name}" for alias in node.names]
            yield [*names, target], node.lineno, id(node) in guarded


def layer_violations(root: Path) -> list[str]:
    """Every breach of the layer rule in the package at ``root``, one line each."""
    package = root.name
    modules = {_module_name(p, root): p for p in sorted(root.rglob("*.py"))}
    problems: list[str] = []
    graph: dict[str, set[str]] = {m: set() for m in modules}
    for module, path in modules.items():
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        here = _layer(module)
        where = f"{path.relative_to(root.parent)}"
        for candidates, line, type_only in _imports(tree, module):
            head = candidates[-1].split(".")[0]
            if head in FORBIDDEN:
                problems.append(f"{where}:{line}: the engine imports {candidates[-1]}")
                continue
            targets = [c for c in candidates if c in modules]
            if head != package or not targets:
                continue
            target = targets[0]
            there = _layer(target)
            if there > here:
                problems.append(
                    f"{where}:{line}: layer {_name(here)} imports {target} "
                    f"from the higher layer {_name(there)}"
                )
            if not type_only and target != module and not module.startswith(target + "."):
                graph[module].add(target)
    problems += [f"import circle: {' -> '.join(c)}" for c in _circles(graph)]
    return problems


def _name(layer: int) -> str:
    return LAYERS[layer] if layer < TOP else "top"


def _circles(graph: dict[str, set[str]]) -> list[list[str]]:
    """One cycle per strongly connected group of modules that import each other."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph[v]):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            group = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                group.append(w)
                if w == v:
                    break
            if len(group) > 1:
                found.append(sorted(group) + [sorted(group)[0]])

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return found


def test_the_engine_keeps_its_layers():
    assert layer_violations(ENGINE) == []


def _tree(tmp_path: Path, files: dict[str, str]) -> Path:
    root = tmp_path / "engine"
    for name, text in files.items():
        path = root / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text)
    for folder in [root, *[p for p in root.rglob("*") if p.is_dir()]]:
        (folder / "__init__.py").touch()
    return root


def test_the_check_catches_a_lower_layer_importing_a_higher_one(tmp_path):
    root = _tree(
        tmp_path,
        {
            "physics/shift.py": "def f():\n    from engine.selection.ranking import rank\n",
            "selection/ranking.py": "from engine.physics.shift import f\n",
        },
    )
    problems = layer_violations(root)
    assert problems == [
        "engine/physics/shift.py:2: layer physics imports engine.selection.ranking "
        "from the higher layer selection",
        "import circle: engine.physics.shift -> engine.selection.ranking -> engine.physics.shift",
    ]


def test_the_check_catches_streamlit_and_circles_within_a_layer(tmp_path):
    root = _tree(
        tmp_path,
        {
            "output/report.py": "import streamlit as st\nfrom engine.output import rows\n",
            "output/rows.py": "from engine.output.report import x\n",
            "output/fine.py": "from typing import TYPE_CHECKING\n"
            "if TYPE_CHECKING:\n    from engine.output.rows import y\n",
        },
    )
    assert layer_violations(root) == [
        "engine/output/report.py:1: the engine imports streamlit",
        "import circle: engine.output.report -> engine.output.rows -> engine.output.report",
    ]


def test_a_relative_import_counts_like_an_absolute_one(tmp_path):
    root = _tree(tmp_path, {"base/units.py": "from ..curves import bank\n", "curves/bank.py": ""})
    assert layer_violations(root) == [
        "engine/base/units.py:1: layer base imports engine.curves.bank from the higher layer curves"
    ]
