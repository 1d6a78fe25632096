"""The package's layers, read from its source with ``ast`` (no import is executed).

The folders of ``lintools/`` are layers; a module may import from its own folder and from
folders of a lower layer only, never up and never sideways into a folder of the same
layer.  Across folders only public names travel (no ``_name`` imported from another
folder), every import of the package by itself is relative (so a copy under another
name works, see test_vendoring.py), and no module imports itself back through others
(no cycle, counting imports inside functions too: they are dependencies as much as the
ones at the top).  Source: the design contract of the one-house layout (common practice
for layered packages).
"""

from __future__ import annotations

import ast
from pathlib import Path

import lintools

ROOT = Path(lintools.__file__).resolve().parent

#: folder -> layer; a folder may import from a strictly lower layer (and from itself)
LAYERS = {
    "support": 0,
    "engine": 1,
    "splitting": 1,
    "models": 2,
    "blocks": 3,
    "metrics": 3,
    "exchange": 4,
    "document": 5,  # the sign-off document: charts, SVG and PNG renderers, the HTML page
    "cli": 6,
    "": 7,  # the top: lintools/__init__.py and __main__.py re-export and start
}


def _modules() -> dict[str, Path]:
    out = {}
    for path in sorted(ROOT.rglob("*.py")):
        parts = list(path.relative_to(ROOT).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts = parts[:-1]
        out[".".join(parts)] = path
    return out


MODULES = _modules()


def _folder(module: str) -> str:
    path = MODULES[module]
    rel = path.relative_to(ROOT)
    return rel.parts[0] if len(rel.parts) > 1 else ""


def _imports(module: str):
    """(line, imported module, name or None, absolute?) for every import of the package."""
    path = MODULES[module]
    is_init = path.name == "__init__.py"
    here = module.split(".") if is_init else module.split(".")[:-1]
    here = [p for p in here if p]
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name == "lintools" or alias.name.startswith("lintools."):
                    yield node.lineno, alias.name[len("lintools."):], None, True
        elif isinstance(node, ast.ImportFrom):
            if node.level == 0:
                if node.module != "lintools" and not (node.module or "").startswith("lintools."):
                    continue
                target, absolute = node.module[len("lintools."):] if "." in node.module else "", True
            else:
                base = here[: len(here) - (node.level - 1)] if node.level > 1 else here
                if node.level - 1 > len(here):
                    raise AssertionError(f"{module}: line {node.lineno} goes above the package")
                target, absolute = ".".join(base + ([node.module] if node.module else [])), False
            for alias in node.names:
                sub = f"{target}.{alias.name}" if target else alias.name
                if sub in MODULES:
                    yield node.lineno, sub, None, absolute
                else:
                    yield node.lineno, target, alias.name, absolute


def _graph() -> dict[str, set[str]]:
    return {m: {t for _, t, _, _ in _imports(m) if t != m} for m in MODULES}


def test_the_scan_sees_the_package():
    """The test reads every module (a scan of nothing would pass every rule below)."""
    assert len(MODULES) >= 60
    assert set(LAYERS) == {_folder(m) for m in MODULES}, "a new folder needs its layer in LAYERS"
    assert sum(len(v) for v in _graph().values()) >= 200


def test_no_module_imports_the_package_by_its_name():
    bad = [f"{m}:{line}" for m in MODULES for line, _, _, absolute in _imports(m) if absolute]
    assert not bad, "imports of 'lintools' by name (use relative imports): " + ", ".join(bad)


def test_imports_go_down_the_layers_only():
    bad = []
    for m in MODULES:
        mine = _folder(m)
        for line, target, _, _ in _imports(m):
            theirs = _folder(target)
            if theirs != mine and not LAYERS[theirs] < LAYERS[mine]:
                bad.append(f"{m}:{line} ({mine or 'top'}, layer {LAYERS[mine]}) imports {target} "
                           f"({theirs or 'top'}, layer {LAYERS[theirs]})")
    assert not bad, "\n".join(bad)


def test_no_private_name_crosses_a_folder():
    bad = []
    for m in MODULES:
        for line, target, name, _ in _imports(m):
            if _folder(target) == _folder(m):
                continue
            leaf = name if name is not None else target.rpartition(".")[2]
            if leaf.startswith("_") and not (leaf.startswith("__") and leaf.endswith("__")):
                bad.append(f"{m}:{line} takes {target}{'.' + name if name else ''}")
    assert not bad, "\n".join(bad)


def test_no_import_cycle():
    graph = _graph()
    state: dict[str, int] = {}
    cycles = []

    def visit(m, stack):
        state[m] = 1
        stack.append(m)
        for t in sorted(graph[m]):
            if t not in MODULES:
                continue
            if state.get(t) == 1:
                cycles.append(" -> ".join(stack[stack.index(t):] + [t]))
            elif t not in state:
                visit(t, stack)
        stack.pop()
        state[m] = 2

    for m in sorted(MODULES):
        if m not in state:
            visit(m, [])
    assert not cycles, "\n".join(cycles)


def test_the_rules_catch_what_they_forbid(tmp_path):
    """Each rule fails on a package that breaks it (so the tests above can fail)."""
    fake = tmp_path / "lintools"
    (fake / "support").mkdir(parents=True)
    (fake / "models").mkdir()
    (fake / "__init__.py").write_text("from .models.fit import run\n")
    (fake / "support" / "__init__.py").write_text("")
    (fake / "models" / "__init__.py").write_text("")
    (fake / "support" / "low.py").write_text("from ..models.fit import run\nimport lintools.models.fit as f\n")
    (fake / "models" / "fit.py").write_text("from ..support.low import _hidden\ndef run(): pass\n")
    global ROOT, MODULES
    saved_root, saved_modules = ROOT, MODULES
    ROOT = fake.resolve()
    try:
        MODULES = _modules()
        for rule in (test_no_module_imports_the_package_by_its_name, test_imports_go_down_the_layers_only,
                     test_no_private_name_crosses_a_folder, test_no_import_cycle):
            try:
                rule()
            except AssertionError:
                continue
            raise AssertionError(f"{rule.__name__} passed a package that breaks it")
    finally:
        ROOT, MODULES = saved_root, saved_modules
