"""LCR readings in a transformer's manifest ([[reading]]): A_L from the meter beside the sweeps' A_L.

A_L = L/N² (its definition, docs/DESIGN.md); the demo's readings are invented with a meter that
reads 0.6 % high (scripts/make_sample_data.py), so the two A_L differ by about that much.
"""

import json
import shutil
from pathlib import Path

import pytest
from typer.testing import CliRunner

from rfmeas.cli import app
from rfmeas.errors import InputError
from rfmeas.history.store import HistoryStore
from rfmeas.measurement.manifest import load_manifest

ROOT = Path(__file__).resolve().parents[1]
AFTER = ROOT / "sample_data" / "coupler-after"
TRUTH = json.loads((ROOT / "sample_data" / "truth.json").read_text())["coupler-after"]


def run(*args):
    res = CliRunner().invoke(app, [str(a) for a in args])
    assert res.exception is None or isinstance(res.exception, SystemExit), res.exception
    return res


def analysis_json(*args):
    res = run("analyze", *args, "--json")
    assert res.exit_code in (0, 1), res.output
    return json.loads(res.stdout)


def first_reading_inductance_H(csv_path: Path) -> float:
    rows = [line.split(",") for line in csv_path.read_text().splitlines() if line and line[0].isdigit()]
    return float(rows[0][1]) * 1e-6  # Ls_uH column of the lowest frequency


def test_readings_give_a_l_beside_the_sweeps():
    d = analysis_json(AFTER, "--no-record")
    fig = d["figures"]["inductance_factor_nH_per_turn2"]
    reading = fig["readings_primary"]
    expected_nH = first_reading_inductance_H(AFTER / "pri_lcr.csv") / 5**2 * 1e9
    assert reading["value"] == pytest.approx(expected_nH, rel=1e-9)
    assert reading["stderr"] is None and reading["frequency_Hz"] == 1000.0
    # the invented meter reads 0.6 % high against the truth; the sweeps' fit is near the truth
    assert reading["value"] / (TRUTH["L1_H"] / 25 * 1e9) == pytest.approx(1.006, abs=5e-4)
    assert reading["fit_difference_percent"] == pytest.approx(0.6, abs=0.1)
    assert not any("LCR readings" in w for w in d["warnings"])
    assert d["measurement"]["readings"][0]["winding"] == "primary"


def test_terminal_shows_the_reading_row():
    res = run("analyze", AFTER, "--no-record", "--full")
    assert "from LCR readings of the primary" in res.output
    assert "at 1 kHz" in res.output


def _copy_set(tmp_path) -> Path:
    unit = tmp_path / "unit"
    shutil.copytree(AFTER, unit)
    return unit


def test_readings_far_from_the_sweeps_are_said(tmp_path):
    unit = _copy_set(tmp_path)
    text = (unit / "pri_lcr.csv").read_text().replace("1000,11.4659", "1000,12.6125")  # +10 %
    (unit / "pri_lcr.csv").write_text(text)
    d = analysis_json(unit, "--no-record")
    assert d["figures"]["inductance_factor_nH_per_turn2"]["readings_primary"]["fit_difference_percent"] \
        == pytest.approx(10.6, abs=0.2)
    assert any("from the LCR readings" in w and "differ by" in w for w in d["warnings"])


@pytest.mark.parametrize("table, message", [
    ('file = "pri_lcr.csv"\ntermination = "short"', "other winding open"),
    ('file = "pri_lcr.csv"\nfrequency = 1000', "unknown key 'frequency'"),
    ('file = "nothere.csv"', "not found"),
    ('file = "pri_lcr.csv"\nwinding = "tertiary"', "'primary' or 'secondary'"),
])
def test_bad_reading_tables_are_refused(tmp_path, table, message):
    unit = _copy_set(tmp_path)
    text = (unit / "manifest.toml").read_text().split("[[reading]]")[0] + "[[reading]]\n" + table + "\n"
    (unit / "manifest.toml").write_text(text)
    with pytest.raises(InputError, match=message):
        load_manifest(unit)
    res = run("analyze", unit, "--no-record")
    assert res.exit_code == 2 and message.split("'")[0] in res.output


def test_one_file_of_readings_per_winding(tmp_path):
    unit = _copy_set(tmp_path)
    with open(unit / "manifest.toml", "a") as fh:
        fh.write('\n[[reading]]\nfile = "pri_lcr.csv"\nwinding = "primary"\n')
    with pytest.raises(InputError, match="already read"):
        load_manifest(unit)


def test_readings_alone_point_to_the_core_command(tmp_path):
    unit = _copy_set(tmp_path)
    text = (unit / "manifest.toml").read_text()
    head, reading = text.split("[[sweep]]")[0], "[[reading]]" + text.split("[[reading]]")[1]
    (unit / "manifest.toml").write_text(head + reading)
    with pytest.raises(InputError, match="core --readings"):
        load_manifest(unit)


def test_readings_from_elsewhere_are_kept_with_the_record(tmp_path):
    unit = _copy_set(tmp_path)
    meter = tmp_path / "meter"
    meter.mkdir()
    shutil.move(unit / "pri_lcr.csv", meter / "pri_lcr.csv")
    text = (unit / "manifest.toml").read_text().replace('file = "pri_lcr.csv"',
                                                         'file = "../meter/pri_lcr.csv"  # the meter\'s folder')
    (unit / "manifest.toml").write_text(text)
    db = tmp_path / "h.sqlite3"
    original = analysis_json(unit, "--db", db)
    with HistoryStore(db) as store:
        rec = store.latest()
    assert "external/pri_lcr.csv" in {f.path for f in rec.files}
    assert "# the meter's folder" in rec.manifest_text  # edited in place, comments kept
    res = run("history", "--export", rec.id, tmp_path / "redo", "--db", db)
    assert res.exit_code == 0, res.output
    again = analysis_json(tmp_path / "redo", "--no-record")
    key = "inductance_factor_nH_per_turn2"
    before, after = original["figures"][key]["readings_primary"], again["figures"][key]["readings_primary"]
    assert after["file"] == "external/pri_lcr.csv"  # named as kept
    assert {k: v for k, v in after.items() if k != "file"} == {k: v for k, v in before.items() if k != "file"}
