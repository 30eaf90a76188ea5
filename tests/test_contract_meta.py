"""Conventions of the contract across the whole package (docs/DESIGN.md, "Conventions"):
every command that produces results offers --json, and every public frozen result
dataclass has to_dict(). Both found by introspection, so a new command or result is covered."""

from __future__ import annotations

import dataclasses
import importlib
import inspect
import pkgutil

import pytest
import typer.main

import rfmeas
from rfmeas.cli import app
from rfmeas.commands import COMMAND_MODULES

# Commands that produce no results of their own, each with the reason.
NO_JSON = {
    "demo": "a walkthrough of the bundled samples: it writes each set's JSON as a file into --out",
}

# Public frozen dataclasses that are not results, each with the reason.
NOT_RESULTS = {
    "rfmeas.fit.solver.FitOutcome": "the solver's internal outcome; it reaches JSON only through FitResult.to_dict()",
    "rfmeas.instruments.simulation.Wiring": "a setting of the instrument simulator (an input, not a result)",
    "rfmeas.instruments.simulation.SimFaults": "faults staged by the instrument simulator (an input, not a result)",
    "rfmeas.model.termination.Termination": "a value (open, short, ohms), not a result: its JSON value is a scalar, to_json()",
}


def _commands(typer_app=app) -> dict:
    """name -> click command, sub-groups flattened ('group sub')."""
    found = {}

    def walk(group, prefix=""):
        for name, command in group.commands.items():
            if hasattr(command, "commands"):
                walk(command, f"{prefix}{name} ")
            else:
                found[prefix + name] = command

    walk(typer.main.get_command(typer_app))
    return found


def _has_json(command) -> bool:
    return any("--json" in p.opts for p in command.params)


def _lacking_to_dict(classes: dict) -> list[str]:
    return [name for name, cls in classes.items()
            if name not in NOT_RESULTS and not callable(getattr(cls, "to_dict", None))]


def _frozen_dataclasses() -> dict:
    """'module.Class' -> class, for every public frozen dataclass defined in the package."""
    found = {}
    for info in pkgutil.walk_packages(rfmeas.__path__, "rfmeas."):
        module = importlib.import_module(info.name)
        for name, cls in vars(module).items():
            if (inspect.isclass(cls) and cls.__module__ == module.__name__ and not name.startswith("_")
                    and dataclasses.is_dataclass(cls) and cls.__dataclass_params__.frozen):
                found[f"{module.__name__}.{name}"] = cls
    return found


def test_every_command_module_registers_a_command():
    registered = {c.callback.__module__ for c in _commands().values()}
    assert {f"rfmeas.commands.{m}" for m in COMMAND_MODULES} <= registered


@pytest.mark.parametrize("name", sorted(_commands()))
def test_every_result_command_offers_json(name):
    command = _commands()[name]
    has_json = _has_json(command)
    if name in NO_JSON:
        assert not has_json, f"'{name}' now offers --json: remove it from NO_JSON"
    else:
        assert has_json, f"'rfmeas {name}' produces results but has no --json option"


def test_exceptions_name_real_commands_and_classes():
    """A stale exception would hide nothing, but would mislead: keep the lists exact."""
    assert set(NO_JSON) <= set(_commands())
    assert set(NOT_RESULTS) <= set(_frozen_dataclasses())


def test_the_package_has_results_to_check():
    """The walk finds the results the JSON contract is built from (guards an empty walk)."""
    found = _frozen_dataclasses()
    for name in ("rfmeas.analysis.Analysis", "rfmeas.fit.result.FitResult", "rfmeas.fit.result.Estimate",
                 "rfmeas.judge.design.DesignCheck", "rfmeas.judge.design.Verdict", "rfmeas.fit.core_spectrum.CoreAnalysis"):
        assert name in found


def test_every_public_frozen_result_has_to_dict():
    lacking = _lacking_to_dict(_frozen_dataclasses())
    assert lacking == [], f"frozen results without to_dict(): {lacking}"


def test_the_checks_can_fail():
    """A command without --json and a frozen result without to_dict() are both caught."""
    probe = typer.Typer()

    @probe.command("with-json")
    def _with(json_output: bool = typer.Option(False, "--json")):
        pass

    @probe.command("without-json")
    def _without(out: str = typer.Option(".", "--out")):
        pass

    found = _commands(probe)
    assert {name: _has_json(c) for name, c in found.items()} == {"with-json": True, "without-json": False}

    @dataclasses.dataclass(frozen=True)
    class Bare:
        value: float

    @dataclasses.dataclass(frozen=True)
    class WithDict:
        value: float

        def to_dict(self) -> dict:
            return {"value": self.value}

    assert _lacking_to_dict({"probe.Bare": Bare, "probe.WithDict": WithDict}) == ["probe.Bare"]


def test_jig_standards_summary_matches_the_standard_files():
    """Fixture.to_dict() carries the standards' summary; checked against the open standard's own
    grid as scikit-rf reads it."""
    from pathlib import Path

    import skrf

    from rfmeas.measurement.fixture import load_fixture

    folder = Path(__file__).resolve().parents[1] / "fixtures" / "clip-leads"
    fixture = load_fixture(folder / "fixture.toml")
    open_standard = skrf.Network(str(folder / "open.s1p"))
    summary = fixture.to_dict()["standards"]
    assert summary == {"files": dict(fixture.standard_files), **fixture.standards.to_dict()}
    assert summary["points"] == len(open_standard.f)
    assert summary["start_Hz"] == pytest.approx(open_standard.f[0])
    assert summary["stop_Hz"] == pytest.approx(open_standard.f[-1])
    assert summary["with_load"] is True
