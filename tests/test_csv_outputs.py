"""CSV outputs of analyze, core and batch: parsed back with the csv module and checked against
the JSON result of the same run."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from rfmeas.cli import app
from rfmeas.fit.result import LABELS
from rfmeas.judge.figures import FIGURE_LABELS
from rfmeas.present.csvout import ANALYSIS_COLUMNS, SPECTRUM_COLUMNS, analysis_rows, label_and_unit

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data"
runner = CliRunner()


def _cell(text):
    return None if text == "" else float(text)


def _data_lines(text):
    return [line for line in text.splitlines() if not line.startswith("#")]


@pytest.fixture(scope="module")
def analyzed(tmp_path_factory):
    out = tmp_path_factory.mktemp("csv") / "after.csv"
    result = runner.invoke(app, ["analyze", str(SAMPLE / "coupler-after"), "--no-record", "--json",
                                 "--csv", str(out)])
    assert result.exit_code == 0, result.stdout + result.stderr
    return json.loads(result.stdout), out


def test_analyze_csv_matches_the_json(analyzed):
    data, out = analyzed
    rows = list(csv.DictReader(io.StringIO(out.read_text(encoding="utf-8"))))
    assert tuple(rows[0]) == ANALYSIS_COLUMNS
    by_key = {r["key"]: r for r in rows}
    # every parameter and every numeric figure of the JSON is there, at full precision
    for key, entry in data["parameters"].items():
        row = by_key[key]
        assert row["label"] == LABELS[key]
        assert _cell(row["value"]) == entry["value"] and _cell(row["standard_error"]) == entry["stderr"]
    numeric = [k for k, e in data["figures"].items() if k in FIGURE_LABELS and "value" in e]
    assert len(numeric) >= 8
    for key in numeric:
        row = by_key[key]
        assert _cell(row["value"]) == data["figures"][key]["value"]
        assert _cell(row["standard_error"]) == data["figures"][key]["stderr"]
        assert row["label"] and row["label"] in FIGURE_LABELS[key][0]
    band = data["figures"]["return_loss_band"]
    assert _cell(by_key["return_loss_band.start_Hz"]["value"]) == band["start_Hz"]
    assert _cell(by_key["return_loss_band.stop_Hz"]["standard_error"]) == band["stop_stderr_Hz"]
    # units in their column: SI, and '1' for ratios
    assert by_key["primary_inductance_H"]["unit"] == "H"
    assert by_key["primary_resistance_ohm"]["unit"] == "ohm"
    assert by_key["coupling_coefficient"]["unit"] == "1"
    assert by_key["low_frequency_corner_3dB_Hz"]["unit"] == "Hz"
    # a figure's note travels with it (extrapolated corners say so)
    extrapolated = [k for k in numeric if data["figures"][k].get("within_sweeps") is False]
    for key in extrapolated:
        assert "extrapolated" in by_key[key]["note"]


def test_analyze_csv_refuses_to_overwrite(analyzed):
    _, out = analyzed
    before = out.read_bytes()
    result = runner.invoke(app, ["analyze", str(SAMPLE / "coupler-after"), "--no-record", "--csv", str(out)])
    assert result.exit_code == 2 and "--overwrite" in result.stderr
    assert out.read_bytes() == before
    result = runner.invoke(app, ["analyze", str(SAMPLE / "coupler-after"), "--no-record", "--csv", str(out),
                                 "--overwrite"])
    assert result.exit_code == 0, result.stdout + result.stderr
    assert "CSV:" in result.stdout and out.read_bytes() == before  # same data, written anew
    assert not [p for p in out.parent.iterdir() if p.name.endswith(".tmp")]


def test_csv_name_must_end_in_csv(tmp_path):
    result = runner.invoke(app, ["analyze", str(SAMPLE / "coupler-after"), "--no-record", "--csv",
                                 str(tmp_path / "x.txt")])
    assert result.exit_code == 2 and ".csv" in result.stderr
    assert not (tmp_path / "x.txt").exists()


def test_undetermined_parameter_has_no_value():
    result = {"parameters": {
        "core_loss_resistance_ohm": {"value": float("inf"), "stderr": None, "determined": False,
                                     "held_at": float("inf"), "note": "the sweeps do not resolve it"},
        "primary_inductance_H": {"value": 1e-5, "stderr": 1e-9, "determined": True}},
        "figures": {}}
    rows = {r[0]: r for r in analysis_rows(result)}
    key, label, value, stderr, unit, note = rows["core_loss_resistance_ohm"]
    assert value == "" and stderr == "" and unit == "ohm"
    assert "not determined" in note and "the sweeps do not resolve it" in note
    assert rows["primary_inductance_H"][2] == repr(1e-5)


def test_labels_and_units_of_every_known_key():
    for key in LABELS:
        label, unit = label_and_unit(key)
        assert label == LABELS[key] and unit
    for key, (label, unit) in FIGURE_LABELS.items():
        got_label, got_unit = label_and_unit(key)
        assert got_unit == (unit or "1") and got_label in label


def test_core_csv_matches_the_json(tmp_path):
    out = tmp_path / "mu.csv"
    result = runner.invoke(app, ["core", str(SAMPLE / "unknown-core"), "--json", "--csv", str(out)])
    assert result.exit_code == 0, result.stdout + result.stderr
    data = json.loads(result.stdout)
    text = out.read_text(encoding="utf-8")
    comments = [line for line in text.splitlines() if line.startswith("#")]
    mu_i = data["initial_permeability"]
    assert any(f"mu_i = {mu_i['value']!r}" in line for line in comments)
    rows = list(csv.DictReader(io.StringIO("\n".join(_data_lines(text)))))
    assert tuple(rows[0]) == SPECTRUM_COLUMNS
    spectrum = data["spectrum"]
    assert len(rows) == len(spectrum["frequency_Hz"])
    for name in SPECTRUM_COLUMNS[:5]:
        assert [_cell(r[name]) for r in rows] == spectrum[name]
    assert [r["trustworthy"] == "1" for r in rows] == spectrum["trustworthy"]
    assert any(spectrum["trustworthy"]) and not all(spectrum["trustworthy"])
    # and the refusal
    again = runner.invoke(app, ["core", str(SAMPLE / "unknown-core"), "--csv", str(out)])
    assert again.exit_code == 2 and "--overwrite" in again.stderr


def test_batch_csv_headers_carry_units(tmp_path, monkeypatch):
    import rfmeas.history.batch
    from tests.helpers.fake_analysis import fake_analyse

    folder = tmp_path / "units"
    folder.mkdir()
    for i in range(3):
        (folder / f"u{i}.toml").write_text(f"name = unit {i}\npassed = true\nL1 = {(10 + i) * 1e-6!r}\n")
    monkeypatch.setattr(rfmeas.history.batch, "analyse_manifest", fake_analyse)
    out = tmp_path / "lot.csv"
    result = runner.invoke(app, ["batch", str(folder), "--workers", "1", "--json", "--csv", str(out)])
    assert result.exit_code == 0, result.stdout + result.stderr
    data = json.loads(result.stdout)
    rows = list(csv.DictReader(io.StringIO(out.read_text(encoding="utf-8"))))
    header = "primary inductance L1 [H]"
    assert header in rows[0] and "primary inductance L1 standard error [H]" in rows[0]
    assert [float(r[header]) for r in rows] == [u["values"]["primary_inductance_H"] for u in data["units"]]
    value_columns = list(rows[0])[4:]
    assert value_columns and all(c.endswith("]") for c in value_columns)
    again = runner.invoke(app, ["batch", str(folder), "--workers", "1", "--csv", str(out)])
    assert again.exit_code == 2 and "--overwrite" in again.stderr
