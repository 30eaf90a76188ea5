"""The JSON of `rfmeas analyze` and `rfmeas core` validates against the checked-in JSON Schemas
(docs/schema/*.schema.json, draft 2020-12, checked with the `jsonschema` package), and the
schemas reject a JSON that breaks the contract (docs/DESIGN.md, "JSON contract")."""

from __future__ import annotations

import copy
import json
from pathlib import Path

import jsonschema
import pytest
from typer.testing import CliRunner

from rfmeas.analysis import analyze_files, analyze_manifest
from rfmeas.cli import app
from rfmeas.fit.core_spectrum import analyze_core_file
from rfmeas.io.jsonio import SCHEMA_VERSION, dumps_json
from rfmeas.fit.result import PARAMETER_KEYS

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_data"
SCHEMAS = ROOT / "docs" / "schema"

runner = CliRunner()


def _validator(name: str) -> jsonschema.Draft202012Validator:
    schema = json.loads((SCHEMAS / f"{name}.schema.json").read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator.check_schema(schema)  # the schema itself is valid draft 2020-12
    return jsonschema.Draft202012Validator(schema)


def _errors(validator, data) -> list[str]:
    return [f"{'/'.join(map(str, e.absolute_path))}: {e.message}" for e in validator.iter_errors(data)]


@pytest.fixture(scope="module")
def analysis_json() -> dict:
    """analyze's JSON of the bundled 'before' set, as it is written (NaN -> null)."""
    return json.loads(dumps_json(analyze_manifest(SAMPLE / "coupler-before").to_dict()))


@pytest.mark.parametrize("folder", ["coupler-before", "coupler-after"])
def test_sample_sets_validate(folder):
    data = json.loads(dumps_json(analyze_manifest(SAMPLE / folder).to_dict()))
    assert data["schema_version"] == SCHEMA_VERSION
    assert _errors(_validator("analysis"), data) == []
    assert isinstance(data["design_check"], dict)  # both sets carry a [design]


@pytest.mark.parametrize("file", ["thru.s2p", "pri_open.s1p"])
def test_set_without_design_or_turns_validates(file):
    """design_check is null, turn-dependent figures have no value, and (from one open sweep) several
    parameters are not determined: still the contract."""
    data = json.loads(dumps_json(analyze_files([SAMPLE / "coupler-before" / file]).to_dict()))
    assert data["design_check"] is None
    assert _errors(_validator("analysis"), data) == []


def test_cli_analyze_json_validates():
    result = runner.invoke(app, ["analyze", str(SAMPLE / "coupler-after"), "--json"])
    assert result.exit_code in (0, 1), result.output  # 1: the design check failed, JSON still printed
    assert _errors(_validator("analysis"), json.loads(result.stdout)) == []


def test_schema_rejects_a_renamed_parameter(analysis_json):
    broken = copy.deepcopy(analysis_json)
    broken["parameters"]["primary_inductance"] = broken["parameters"].pop("primary_inductance_H")
    errors = _errors(_validator("analysis"), broken)
    assert any("primary_inductance_H" in e for e in errors), errors


@pytest.mark.parametrize("breakage", [
    lambda d: d.pop("schema_version"),
    lambda d: d["fit"].pop("quality"),
    lambda d: d["fit"]["quality"].update(grade="excellent"),
    lambda d: d["design_check"].update(status="passed"),
    lambda d: d["parameters"]["coupling_coefficient"].update(stderr="0.1"),
    lambda d: d.update(warnings="one warning"),
])
def test_schema_rejects_other_breaches(analysis_json, breakage):
    broken = copy.deepcopy(analysis_json)
    breakage(broken)
    assert _errors(_validator("analysis"), broken) != []


def test_schema_names_every_parameter_the_code_writes():
    """Every parameter key the fit writes is required by the schema, so a new key is documented."""
    schema = json.loads((SCHEMAS / "analysis.schema.json").read_text(encoding="utf-8"))
    assert set(schema["properties"]["parameters"]["required"]) == {key for key, _, _ in PARAMETER_KEYS}


@pytest.fixture(scope="module")
def core_json() -> dict:
    return json.loads(dumps_json(analyze_core_file(SAMPLE / "unknown-core").to_dict()))


def test_core_json_validates(core_json):
    assert core_json["schema_version"] == SCHEMA_VERSION
    assert _errors(_validator("core"), core_json) == []


def test_cli_core_json_validates():
    result = runner.invoke(app, ["core", str(SAMPLE / "unknown-core"), "--json"])
    assert result.exit_code == 0, result.output
    assert _errors(_validator("core"), json.loads(result.stdout)) == []


def test_core_schema_rejects_a_renamed_key(core_json):
    broken = copy.deepcopy(core_json)
    broken["initial_permeability_mu"] = broken.pop("initial_permeability")
    assert any("initial_permeability" in e for e in _errors(_validator("core"), broken))
