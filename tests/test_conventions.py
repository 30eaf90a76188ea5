"""Meta-tests that hold the whole package to the project's conventions."""

from __future__ import annotations

import ast
import importlib
import subprocess
import sys
import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_every_package_is_listed_in_pyproject():
    listed = set(tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["setuptools"]["packages"])
    found = {".".join(p.parent.relative_to(ROOT).parts) for p in (ROOT / "rfmeas").rglob("__init__.py")}
    missing = found - listed
    assert not missing, f"add these packages to pyproject.toml [tool.setuptools] packages: {sorted(missing)}"


def test_command_modules_register_and_keep_heavy_imports_inside_functions():
    from rfmeas.commands import COMMAND_MODULES

    heavy = {"numpy", "scipy", "skrf", "matplotlib", "pyvisa", "jinja2"}
    for name in COMMAND_MODULES:
        module = importlib.import_module(f"rfmeas.commands.{name}")
        assert callable(getattr(module, "register", None)), f"rfmeas.commands.{name} lacks register(app)"
        tree = ast.parse(Path(module.__file__).read_text())
        for node in tree.body:  # module level only
            if isinstance(node, (ast.Import, ast.ImportFrom)):
                names = [a.name for a in node.names] if isinstance(node, ast.Import) else [node.module or ""]
                for n in names:
                    assert n.split(".")[0] not in heavy, f"{name}: heavy import '{n}' at module level"


def test_help_does_not_import_heavy_modules():
    code = ("import sys; from rfmeas.cli import app; "
            "print(','.join(m for m in ('numpy','scipy','skrf','matplotlib','pyvisa') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT, check=True)
    assert out.stdout.strip() == "", f"importing the CLI pulled in: {out.stdout.strip()}"


def test_public_results_have_to_dict():
    import dataclasses

    import rfmeas.analysis
    import rfmeas.fit.result
    import rfmeas.measurement.sweep

    for module in (rfmeas.analysis, rfmeas.fit.result, rfmeas.measurement.sweep):
        for obj in vars(module).values():
            if isinstance(obj, type) and dataclasses.is_dataclass(obj) and obj.__module__ == module.__name__:
                assert hasattr(obj, "to_dict"), f"{module.__name__}.{obj.__name__} lacks to_dict()"
                assert obj.__dataclass_params__.frozen, f"{module.__name__}.{obj.__name__} is not frozen"
