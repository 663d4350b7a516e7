"""The import graph of `opspace/`: no circle, and no private name crosses a
sub-package boundary.

Read from the source with `ast` (every import statement, the ones inside
functions included), so an import hidden in a function to dodge a circle is
still a circle here.  Graph facts only (no numerical reference applies).
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1] / "opspace"


def _module_name(path):
    parts = list(path.relative_to(ROOT.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _modules():
    """Every module of the package; a compiled one (`_kernel`) has no imports to read."""
    found = {_module_name(p): p for p in ROOT.rglob("*.py")}
    for ext in ROOT.rglob("*.so"):
        found.setdefault(_module_name(ext.with_name(ext.name.split(".")[0] + ".py")), None)
    return found


def _is_package(name, modules):
    return modules[name] is not None and modules[name].name == "__init__.py"


def _resolve(importer, node, modules):
    """(module imported, names imported from it) pairs of one import statement."""
    if isinstance(node, ast.Import):
        return [(a.name, []) for a in node.names if a.name.split(".")[0] == "opspace"]
    base = node.module or ""
    if node.level:
        anchor = importer.split(".")
        if not _is_package(importer, modules):
            anchor = anchor[:-1]
        anchor = anchor[:len(anchor) - node.level + 1]
        base = ".".join(anchor + ([base] if base else []))
    if base.split(".")[0] != "opspace":
        return []
    out = []
    for alias in node.names:
        sub = f"{base}.{alias.name}"
        out.append((sub, []) if sub in modules else (base, [alias.name]))
    return out


def _edges():
    modules = _modules()
    edges = {}
    for name, path in modules.items():
        if path is None:
            continue
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, (ast.Import, ast.ImportFrom)):
                for target, names in _resolve(name, node, modules):
                    if target in modules and target != name:
                        edges.setdefault(name, []).append((target, names))
    return modules, edges


def _sub_package(name, modules):
    """The sub-package a module belongs to ("opspace" for the top-level modules)."""
    parts = name.split(".")
    return ".".join(parts[:2]) if len(parts) > 2 or (
        len(parts) == 2 and _is_package(name, modules)) else "opspace"


def test_the_import_graph_has_no_circle():
    modules, edges = _edges()
    state, circles = {}, []

    def visit(node, stack):
        state[node] = "open"
        for target, _ in edges.get(node, []):
            if state.get(target) == "open":
                circles.append(stack[stack.index(target):] + [target])
            elif target not in state:
                visit(target, stack + [target])
        state[node] = "done"

    for name in sorted(modules):
        if name not in state:
            visit(name, [name])
    assert circles == [], "import circles: " + "; ".join(" -> ".join(c) for c in circles)


def test_no_private_name_crosses_a_sub_package():
    """A `_`-prefixed module or name is used only inside the sub-package that
    owns it (the top-level `opspace._x` modules belong to the whole package)."""
    modules, edges = _edges()
    crossings = []
    for importer, targets in edges.items():
        own = _sub_package(importer, modules)
        for target, names in targets:
            owner = _sub_package(target, modules)
            if owner == own or owner == "opspace":
                continue
            private = [p for p in target.split(".") if p.startswith("_") and p != "__init__"]
            private += [n for n in names if n.startswith("_")]
            if private:
                crossings.append(f"{importer} imports {', '.join(private)} from {target}")
    assert crossings == [], "\n".join(crossings)


@pytest.mark.parametrize("package", ["control", "description", "dynamics", "plots", "report",
                                     "simulation", "sizing", "stability", "sweep", "trajectory"])
def test_no_public_name_shadows_a_module(package):
    import importlib

    pkg = importlib.import_module(f"opspace.{package}")
    sub = {p.stem for p in (ROOT / package).glob("*.py")}
    shadowed = sorted(n for n in pkg.__all__ if n in sub)
    assert shadowed == [], f"opspace.{package}: names that shadow a module: {shadowed}"


def test_every_import_inside_the_package_resolves():
    """Imports inside functions too (they run late, so a renamed module would
    otherwise fail only when that path runs)."""
    import importlib

    modules, missing = _modules(), []
    for name, path in modules.items():
        if path is None:
            continue
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if not isinstance(node, (ast.Import, ast.ImportFrom)):
                continue
            for target, names in _resolve(name, node, modules):
                try:
                    module = importlib.import_module(target)
                except ImportError as exc:
                    missing.append(f"{name}: {target} ({exc})")
                    continue
                missing += [f"{name}: {target}.{n}" for n in names if not hasattr(module, n)]
    assert missing == [], "\n".join(missing)
