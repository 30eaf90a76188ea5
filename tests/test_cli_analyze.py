"""`rfmeas analyze`, `rfmeas export` and `rfmeas demo` through the real CLI."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from rfmeas.cli import app
from rfmeas.io.touchstone import read_touchstone
from rfmeas.model import TransformerParams, s_matrix

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_data"
TRUTH = json.loads((SAMPLE / "truth.json").read_text())

CONTRACT_PARAMETERS = {
    "primary_inductance_H", "secondary_inductance_H", "coupling_coefficient", "leakage_inductance_H",
    "effective_turns_ratio", "magnetizing_inductance_H", "primary_resistance_ohm",
    "secondary_resistance_ohm", "core_loss_resistance_ohm", "primary_capacitance_F",
    "secondary_capacitance_F", "interwinding_capacitance_F",
}

runner = CliRunner()


def _truth(name: str) -> dict:
    return TRUTH[name]


def test_analyze_json_follows_the_contract_and_recovers_the_sample_unit(tmp_path):
    result = runner.invoke(app, ["analyze", str(SAMPLE / "coupler-after" / "manifest.toml"), "--json"])
    data = json.loads(result.stdout)  # stdout is JSON and nothing else
    assert set(data) >= {"name", "parameters", "figures", "design_check", "fit", "warnings"}
    assert set(data["parameters"]) >= CONTRACT_PARAMETERS
    for entry in data["parameters"].values():
        assert set(entry) >= {"value", "stderr"}
    assert data["fit"]["converged"] is True
    assert set(data["fit"]) >= {"converged", "rms_residual", "points"}
    true = _truth("coupler-after")
    assert data["parameters"]["primary_inductance_H"]["value"] == pytest.approx(true["L1_H"], rel=0.01)
    assert data["parameters"]["secondary_inductance_H"]["value"] == pytest.approx(true["L2_H"], rel=0.01)
    assert data["parameters"]["effective_turns_ratio"]["value"] == pytest.approx(
        (true["L2_H"] / true["L1_H"]) ** 0.5, rel=0.01)


def test_analyze_table_and_history_record():
    result = runner.invoke(app, ["analyze", str(SAMPLE / "coupler-after")])
    assert "primary inductance L1" in result.stdout
    assert "µH" in result.stdout
    assert "recorded in the history as @1" in result.stdout
    listing = runner.invoke(app, ["history", "--json"])
    records = json.loads(listing.stdout)["records"]
    assert len(records) == 1


def test_analyze_no_record_leaves_the_history_empty(tmp_path):
    db = tmp_path / "other.sqlite3"
    runner.invoke(app, ["analyze", str(SAMPLE / "coupler-after"), "--no-record", "--db", str(db)])
    assert not db.exists()


def test_quick_look_without_manifest(tmp_path):
    files = [str(SAMPLE / "coupler-after" / n) for n in ("pri_open.s1p", "thru.s2p")]
    result = runner.invoke(app, ["analyze", *files, "--turns", "5:15", "--json", "--no-record"])
    data = json.loads(result.stdout)
    true = _truth("coupler-after")
    assert data["parameters"]["primary_inductance_H"]["value"] == pytest.approx(true["L1_H"], rel=0.02)
    assert data["measurement"]["primary_turns"] == 5


def test_export_writes_a_netlist_and_a_model_that_equals_the_fit(tmp_path):
    cir, s2p = tmp_path / "t1.cir", tmp_path / "t1.s2p"
    result = runner.invoke(app, ["export", str(SAMPLE / "coupler-after"), "--spice", str(cir),
                                 "--touchstone", str(s2p), "--points", "51", "--json"])
    assert result.exit_code == 0, result.stdout
    info = json.loads(result.stdout)
    text = cir.read_text()
    assert ".SUBCKT XFMR P1 S1 GND" in text and ".ENDS XFMR" in text
    model = info["model"]
    params = TransformerParams(**{k: v for k, v in model.items()})
    net = read_touchstone(s2p).network
    assert net.f.size == 51
    np.testing.assert_allclose(net.s, s_matrix(params, net.f), rtol=0, atol=1e-12)


def test_export_needs_an_output(tmp_path):
    result = runner.invoke(app, ["export", str(SAMPLE / "coupler-after")])
    assert result.exit_code == 2
    assert "--spice" in result.stderr


def test_demo_writes_its_outputs(tmp_path):
    result = runner.invoke(app, ["demo", "--out", str(tmp_path)])
    assert result.exit_code == 0, result.stdout + result.stderr
    written = sorted(p.name for p in tmp_path.iterdir())
    assert {"coupler-after.json", "coupler-before.json", "coupler-after.html", "coupler-before.html",
            "compare.png", "unknown-core.json", "unknown-core.png"} <= set(written)
    data = json.loads((tmp_path / "coupler-after.json").read_text())
    assert data["parameters"]["primary_inductance_H"]["value"] > 0


def test_the_unknown_core_sample_gives_back_its_invented_material():
    """sample_data/unknown-core: ngspice-simulated 1- and 4-turn windings through the same leads on a
    core with a damped resonance plus a relaxation (µi 125, µ'' peak and leads in sample_data/truth.json),
    with a small VNA's calibration residue; acceptance bounds of the core job."""
    result = runner.invoke(app, ["core", str(SAMPLE / "unknown-core"), "--json"])
    assert result.exit_code == 0, result.stderr
    data = json.loads(result.stdout)
    true = TRUTH["unknown-core"]
    assert data["initial_permeability"]["value"] == pytest.approx(true["mu_initial"], rel=0.05)
    assert data["relaxation_frequency_Hz"]["value"] == pytest.approx(true["loss_peak_Hz"], rel=0.10)
    assert data["leads"]["source"] == "turn counts"
    assert data["leads"]["inductance_H"]["value"] == pytest.approx(true["lead_inductance_H"], rel=0.25)
    assert "NiZn" in data["material_class"]["best"]["name"]
