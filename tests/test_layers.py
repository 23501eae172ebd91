"""The data flow runs one way: every import of the package points down the flow.

Every import is read from the source (also those inside functions), and each
module's stage must be at or above the stage of what it imports.
Source: the project's module map (``DEVELOPERS.md``, "Layout"); common practice
(a layered architecture without back-edges).
"""

from __future__ import annotations

import ast
from pathlib import Path

import stimplan

ROOT = Path(stimplan.__file__).parent
PLUGIN = ROOT.parent / "plugins" / "stimplan_napari"

#: Stages from the bottom of the flow up. Modules of one stage may import each other.
STAGES = [
    {
        "errors",
        "ranges",
        "validate",
        "grid",
        "io_images",
        "atomic",
        "cautions",
        "batch",
        "reuse",
        "__version__",
    },
    {"optics"},
    {"acuity"},
    {"holography", "metrics", "baseline"},
    {"implant"},
    {"stimuli"},
    {"exposure"},
    {"comparison", "legibility", "gain", "budget", "tolerance"},
    {"sequence"},
    {"plan"},
    {"present"},
    {"scenarios", "demo"},
    {"cli"},
]
STAGE = {name: k for k, names in enumerate(STAGES) for name in names}
GUI = ("qtpy", "PyQt5", "PyQt6", "PySide2", "PySide6", "napari", "magicgui", "vispy")


def _imports(path: Path, module: str, is_pkg: bool):
    pkg = module.split(".") if is_pkg else module.split(".")[:-1]
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.Import):
            for a in node.names:
                yield node.lineno, a.name
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = pkg[: len(pkg) - node.level + 1]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            if node.module is None or target == "stimplan":
                for a in node.names:
                    yield node.lineno, f"{target}.{a.name}"
            else:
                yield node.lineno, target


def _modules(root: Path, prefix: str):
    for path in sorted(root.rglob("*.py")):
        rel = path.relative_to(root).with_suffix("").parts
        is_pkg = rel[-1] == "__init__"
        parts = (prefix,) + (rel[:-1] if is_pkg else rel)
        yield path, ".".join(parts), is_pkg


def _stage_of(module: str) -> str:
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else "stimplan"


def test_every_import_points_down_the_flow():
    back = []
    for path, module, is_pkg in _modules(ROOT, "stimplan"):
        here = _stage_of(module)
        if here == "stimplan":
            continue  # the package's front door re-exports a few names
        assert here in STAGE, f"{module}: stage {here!r} is not in the module map"
        for line, target in _imports(path, module, is_pkg):
            top = target.split(".")[0]
            assert top not in GUI, f"{module}:{line} imports {target} (Qt and napari: plugins/)"
            if top == "stimplan_napari":
                # the command's `preview` opens the viewer; the plugin never imports the CLI
                assert module == "stimplan.cli", f"{module}:{line} imports the plugin"
                continue
            if top != "stimplan":
                continue
            there = _stage_of(target)
            if there == "stimplan":
                continue
            if STAGE[there] > STAGE[here]:
                back.append(f"{module}:{line} imports {target}")
    assert not back, "imports up the flow:\n" + "\n".join(back)


def test_the_plugin_uses_the_public_core_only():
    private = []
    for path, module, is_pkg in _modules(PLUGIN, "stimplan_napari"):
        for line, target in _imports(path, module, is_pkg):
            parts = target.split(".")
            if parts[0] == "stimplan" and any(p.startswith("_") for p in parts[1:]):
                private.append(f"{module}:{line} imports {target}")
            assert target != "stimplan.cli", f"{module}:{line} imports the CLI"
    assert not private, "private modules used by the plugin:\n" + "\n".join(private)


def _module_graph():
    """Every module of the package and the plugin, with the project's modules it imports."""
    modules = dict()
    for root, prefix in ((ROOT, "stimplan"), (PLUGIN, "stimplan_napari")):
        for path, module, is_pkg in _modules(root, prefix):
            modules[module] = (path, is_pkg)
    graph = {}
    for module, (path, is_pkg) in modules.items():
        targets = set()
        for _, target in _imports(path, module, is_pkg):
            # ``from pkg import name`` is recorded as ``pkg.name``: a module if one is named so
            while target and target not in modules:
                target = target.rpartition(".")[0]
            if target and target != module:
                targets.add(target)
        graph[module] = targets
    return graph


def test_no_import_circles_also_inside_functions():
    # common practice: an import graph without cycles (Tarjan's strongly connected
    # components; a component of more than one module is a circle)
    graph = _module_graph()
    index, low, stack, on, circles = {}, {}, [], set(), []

    def visit(v):
        index[v] = low[v] = len(index)
        stack.append(v)
        on.add(v)
        for w in graph[v]:
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                circles.append(sorted(comp))

    for v in graph:
        if v not in index:
            visit(v)
    assert not circles, f"import circles: {circles}"


def test_no_private_name_is_imported_from_another_module():
    # common practice (PEP 8, "Public and internal interfaces"): a leading underscore
    # is internal to its module; the plugin's own underscored modules are its internals
    found = []
    for root, prefix in ((ROOT, "stimplan"), (PLUGIN, "stimplan_napari")):
        for path, module, _ in _modules(root, prefix):
            for node in ast.walk(ast.parse(path.read_text())):
                if not isinstance(node, ast.ImportFrom):
                    continue
                mod = node.module or ""
                if node.level == 0 and not mod.startswith(("stimplan", "stimplan_napari")):
                    continue
                core = mod.startswith("stimplan.") or (prefix == "stimplan" and node.level)
                if core and any(part.startswith("_") for part in mod.split(".")):
                    found.append(f"{module}:{node.lineno} imports {mod}")
                for alias in node.names:
                    if alias.name.startswith("_") and not alias.name.startswith("__"):
                        found.append(f"{module}:{node.lineno} imports {mod}.{alias.name}")
    assert not found, "private names used across modules:\n" + "\n".join(found)


def test_files_and_classes_stay_small():
    # Source: the project's code rules (DEVELOPERS.md: one file, one idea, under 800
    # lines; no class over 250 lines)
    big = []
    for path, module, _ in _modules(ROOT, "stimplan"):
        lines = path.read_text().count("\n")
        if lines > 800:
            big.append(f"{module}: {lines} lines")
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, ast.ClassDef) and node.end_lineno - node.lineno + 1 > 250:
                big.append(f"{module}.{node.name}: {node.end_lineno - node.lineno + 1} lines")
    assert not big, "\n".join(big)
