"""The import layering of the package: no module imports a higher layer.

The layers follow the data flow (DEVELOPERS.md, "Layers"): files are read, sweeps and
measurement sets are built, the fit runs, its result is judged, and only then is anything
kept, shown or driven. A module may import its own layer and the layers below it.
"""

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "rfmeas"

# lowest first; a module's layer is that of its longest listed prefix
LAYERS = [
    ("rfmeas", "rfmeas.errors", "rfmeas.units", "rfmeas.labels", "rfmeas.usertext", "rfmeas.limits", "rfmeas.data"),
    ("rfmeas.io",),
    ("rfmeas.model",),
    ("rfmeas.magnetics",),
    ("rfmeas.measurement",),
    ("rfmeas.fit",),
    ("rfmeas.judge",),
    ("rfmeas.analysis",),
    ("rfmeas.history", "rfmeas.present", "rfmeas.instruments"),
    ("rfmeas.commands",),
    ("rfmeas.cli",),
]


def layer_of(module: str) -> int:
    best, level = -1, None
    for i, prefixes in enumerate(LAYERS):
        for p in prefixes:
            if (module == p or module.startswith(p + ".")) and len(p) > best:
                best, level = len(p), i
    assert level is not None, f"{module} is in no layer: add it to LAYERS"
    return level


def module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def imports_of(path: Path):
    tree = ast.parse(path.read_text(encoding="utf-8"))
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            assert node.level == 0, f"{path}: relative import (the package uses absolute imports)"
            if node.module and node.module.startswith("rfmeas"):
                names = [node.module + "." + a.name for a in node.names]
                yield node.lineno, node.module, names
        elif isinstance(node, ast.Import):
            for a in node.names:
                if a.name.startswith("rfmeas"):
                    yield node.lineno, a.name, [a.name]


def _target(module: str, names: list[str]) -> list[str]:
    # `from rfmeas import x` names a submodule x when one exists
    out = []
    for full in names:
        candidate = PACKAGE.parent / Path(*full.split("."))
        out.append(full if candidate.with_suffix(".py").exists() or candidate.is_dir() else module)
    return out


def violations(paths) -> list[str]:
    found = []
    for path in paths:
        me = module_name(path)
        mine = layer_of(me)
        for lineno, module, names in imports_of(path):
            for target in _target(module, names):
                if layer_of(target) > mine:
                    found.append(f"{path.relative_to(ROOT)}:{lineno}: {me} (layer {mine}) imports "
                                 f"{target} (layer {layer_of(target)})")
    return found


def test_no_module_imports_a_higher_layer():
    assert violations(sorted(PACKAGE.rglob("*.py"))) == []


def test_io_imports_no_domain_module():
    bad = []
    for path in sorted((PACKAGE / "io").rglob("*.py")):
        for lineno, module, names in imports_of(path):
            for target in _target(module, names):
                if layer_of(target) > layer_of("rfmeas.io"):
                    bad.append(f"{path.name}:{lineno}: {target}")
    assert bad == []


def test_the_check_can_fail(tmp_path):
    # a made-up low-layer module importing the fit must be reported
    fake = PACKAGE / "io" / "_layer_probe_for_test.py"
    fake.write_text("from rfmeas.fit.solver import fit_sweeps\n", encoding="utf-8")
    try:
        found = violations([fake])
    finally:
        fake.unlink()
    assert len(found) == 1 and "rfmeas.fit.solver" in found[0]


@pytest.mark.parametrize("module,layer", [("rfmeas.errors", 0), ("rfmeas.io.touchstone", 1),
                                          ("rfmeas.fit.solver", 5), ("rfmeas.cli", 10)])
def test_layer_lookup(module, layer):
    assert layer_of(module) == layer


# The fit's internal coordinates and its problem object stay inside rfmeas/fit/ (issue 15): results,
# figures and plots use rfmeas.fit.propagation and Sweep.predict instead.
FIT_INTERNALS = ("to_internal", "to_physical", "SweepProblem", "internal_bounds")


def fit_internal_uses(paths) -> list[str]:
    found = []
    for path in paths:
        if module_name(path).startswith("rfmeas.fit"):
            continue
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            names = []
            if isinstance(node, ast.ImportFrom) and (node.module or "").startswith("rfmeas"):
                names = [a.name for a in node.names]
            elif isinstance(node, ast.Attribute):
                names = [node.attr]
            for name in names:
                if name in FIT_INTERNALS:
                    found.append(f"{path.relative_to(ROOT)}:{node.lineno}: {name}")
    return found


def test_fit_internals_stay_inside_the_fit():
    assert fit_internal_uses(sorted(PACKAGE.rglob("*.py"))) == []


def test_the_fit_internals_check_can_fail():
    fake = PACKAGE / "judge" / "_internals_probe_for_test.py"
    fake.write_text("from rfmeas.fit.solver import fit_sweeps, to_physical\n"
                    "import rfmeas.fit.solver as s\nx = s.SweepProblem\n", encoding="utf-8")
    try:
        found = fit_internal_uses([fake])
    finally:
        fake.unlink()
    assert len(found) == 2 and "to_physical" in found[0] and "SweepProblem" in found[1]
