"""The house rules of the layout (DEVELOPERS.md, "Architecture"), checked on the code
itself: imports point one way through the layers, the physics knows no circuit, no
module outside the circuit plug-ins names a plug-in's slot, no module reaches into
another's private names, and no module grows past what one reader can hold."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

from tests.conftest import ROOT

PKG = ROOT / "partpick"

# units/series/yamlsrc <- catalog/spec <- physics <- circuits <- search/verify/tolerance
# <- pipeline <- export <- cli: a module may import its own layer and the ones below.
LAYERS = [
    ("partpick", "partpick.errors", "partpick.units", "partpick.series", "partpick.yamlsrc", "partpick.fileio",
     "partpick.starter", "partpick.cache"),
    ("partpick.catalog", "partpick.catalog_read", "partpick.actives", "partpick.spec", "partpick.stock",
     "partpick.derating"),
    ("partpick.physics",),
    ("partpick.circuits",),
    ("partpick.search", "partpick.verify", "partpick.points", "partpick.tolerance", "partpick.bom", "partpick.pricing",
     "partpick.rank", "partpick.sensitivity"),
    ("partpick.pipeline", "partpick.refusal", "partpick.relaxation", "partpick.opening", "partpick.swap",
     "partpick.tradeoff", "partpick.inputs"),
    ("partpick.export",),
    ("partpick.cli", "partpick.__main__"),
]


def _modules() -> dict[str, Path]:
    out = {}
    for path in sorted(PKG.rglob("*.py")):
        parts = list(path.relative_to(ROOT).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts = parts[:-1]
        out[".".join(parts)] = path
    return out


MODULES = _modules()


def _layer(module: str) -> int:
    best, level = -1, None
    for i, names in enumerate(LAYERS):
        for name in names:
            if (module == name or module.startswith(name + ".")) and len(name) > best:
                best, level = len(name), i
    assert level is not None, f"{module} belongs to no layer: add it to LAYERS (and to DEVELOPERS.md)"
    return level


def _imports(path: Path):
    """(imported module, imported names, line) for every partpick import, also inside functions."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("partpick"):
            yield node.module, [a.name for a in node.names], node.lineno
        elif isinstance(node, ast.Import):
            for a in node.names:
                if a.name.startswith("partpick"):
                    yield a.name, [], node.lineno


def test_imports_point_down_the_layers():
    wrong = []
    for mod, path in MODULES.items():
        for target, names, line in _imports(path):
            # 'from partpick.x import y' may import the submodule partpick.x.y
            for t in [target] + [f"{target}.{n}" for n in names if f"{target}.{n}" in MODULES]:
                if _layer(t) > _layer(mod):
                    wrong.append(f"{path.relative_to(ROOT)}:{line} imports {t}")
    assert not wrong, "imports against the layers:\n" + "\n".join(wrong)


def test_physics_imports_no_circuit_and_no_export():
    for mod, path in MODULES.items():
        if mod.startswith("partpick.physics"):
            for target, _, line in _imports(path):
                assert not target.startswith(("partpick.circuits", "partpick.export")), f"{mod}:{line} {target}"


def test_no_private_names_across_modules():
    wrong = []
    for mod, path in MODULES.items():
        for target, names, line in _imports(path):
            if target != mod:
                wrong += [f"{path.relative_to(ROOT)}:{line} {target}.{n}" for n in names
                          if n.startswith("_") and not n.startswith("__")]  # dunders (__version__) are public
    assert not wrong, "\n".join(wrong)


def test_module_sizes():
    for mod, path in MODULES.items():
        lines = len(path.read_text(encoding="utf-8").splitlines())
        if mod == "partpick.units":
            continue
        assert lines <= 600, f"{mod} has {lines} lines"
    assert len((PKG / "cli.py").read_text(encoding="utf-8").splitlines()) < 350


def _plugin_roles() -> set[str]:
    """Every slot of every topology, and the passive slots of every amplitude control
    (their active part's role, 'limiter', is also the word for the regime in which a
    control sets the amplitude)."""
    from partpick.circuits import CONTROLS, TOPOLOGIES

    roles = {s.role for t in TOPOLOGIES.values() for s in t.slots}
    return roles | {s.role for c in CONTROLS.values() for s in c.slots if s.dim}


def _code_words(path: Path):
    """String constants (not docstrings) and identifiers of a module, with their lines."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    docstrings = set()
    for node in ast.walk(tree):
        if isinstance(node, (ast.Module, ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)) and node.body:
            first = node.body[0]
            if isinstance(first, ast.Expr) and isinstance(first.value, ast.Constant):
                docstrings.add(id(first.value))
    for node in ast.walk(tree):
        if isinstance(node, ast.Constant) and isinstance(node.value, str) and id(node) not in docstrings:
            yield node.value, node.lineno
        elif isinstance(node, ast.Name):
            yield node.id, node.lineno
        elif isinstance(node, ast.Attribute):
            yield node.attr, node.lineno
        elif isinstance(node, ast.arg):
            yield node.arg, node.lineno
        elif isinstance(node, ast.keyword) and node.arg:
            yield node.arg, node.lineno


def test_no_plugin_slot_named_outside_the_circuits():
    """Only the plug-ins know their slots (for the Wien bridge rs, cs, rp, cp, rg, rf;
    for the diode limiter rd): the pipeline, the search, verification and the outputs
    take them from the plug-ins."""
    roles = _plugin_roles()
    assert {"rs", "cs", "rp", "cp", "rf", "rg", "rd"} <= roles
    wrong = []
    for mod, path in MODULES.items():
        if mod.startswith("partpick.circuits"):
            continue
        for word, line in _code_words(path):
            if word in roles:
                wrong.append(f"{path.relative_to(ROOT)}:{line} '{word}'")
    assert not wrong, "plug-in slots named outside partpick/circuits:\n" + "\n".join(wrong)


def test_import_partpick_stays_light():
    import subprocess
    import sys

    code = ("import sys, partpick, partpick.cli; "
            "print(','.join(m for m in ('ortools', 'matplotlib', 'schemdraw') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT, check=True)
    assert out.stdout.strip() == ""


@pytest.mark.parametrize("name", ["partpick.circuits", "partpick.search.enumerate", "partpick.pipeline"])
def test_layers_cover_every_module(name):
    assert name in MODULES and _layer(name) >= 0
