"""Batch analysis with a stand-in analysis function: the lot completes, bad units are reported."""

import csv
import io
import json
import statistics

import pytest

from rfmeas.history.batch import BatchResult, atomic_write_text, find_manifests, run_batch, summarise
from rfmeas.errors import InputError
from tests.helpers.fake_analysis import crashing_analyse, fake_analyse

N_UNITS = 20
BAD = 7                      # this unit's manifest makes the analysis raise
FAILING = {2, 11, 15}        # these fail their design check


def inductance_H(i):
    return (10 + i) * 1e-6


@pytest.fixture
def units(tmp_path):
    paths = []
    for i in range(N_UNITS):
        p = tmp_path / "units" / f"unit-{i:02d}.toml"
        p.parent.mkdir(exist_ok=True)
        lines = [f"name = unit {i}", f"passed = {'false' if i in FAILING else 'true'}", f"L1 = {inductance_H(i)!r}"]
        if i == BAD:
            lines.append("fail = sweep file 'thru.s2p' is missing")
        p.write_text("\n".join(lines) + "\n")
        paths.append(p)
    return paths


def check_lot(result: BatchResult, paths):
    assert [u.path for u in result.units] == [str(p) for p in paths]  # input order, every unit
    bad = result.units[BAD]
    assert bad.status == "error" and "thru.s2p' is missing" in bad.error and str(paths[BAD]) in bad.error
    assert result.counts == {"pass": N_UNITS - 1 - len(FAILING), "fail": len(FAILING), "not judged": 0, "no design": 0, "error": 1}
    assert result.yield_fraction == pytest.approx((N_UNITS - 1 - len(FAILING)) / N_UNITS)
    good = [inductance_H(i) for i in range(N_UNITS) if i != BAD]
    s = result.spread["primary_inductance_H"]
    assert s.count == N_UNITS - 1
    assert s.mean == pytest.approx(statistics.fmean(good))
    assert s.std == pytest.approx(statistics.stdev(good))
    assert (s.min, s.max) == (min(good), max(good))
    assert "label" not in result.spread  # text figures carry no spread
    assert result.exit_code == 2


def test_parallel_lot_completes_despite_a_bad_unit(units):
    seen = []
    result = run_batch(units, workers=2, analyse=fake_analyse, progress=lambda d, t, o: seen.append((d, t)))
    check_lot(result, units)
    assert seen == [(i, N_UNITS) for i in range(1, N_UNITS + 1)]


def test_in_process_run_matches(units):
    check_lot(run_batch(units, workers=1, analyse=fake_analyse), units)


def test_unexpected_exception_is_reported_not_raised(units):
    result = run_batch(units[:5], workers=2, analyse=crashing_analyse)
    assert result.units[3].status == "error"
    assert "ZeroDivisionError" in result.units[3].error
    assert [u.status for u in result.units[:3]] == ["pass", "pass", "fail"]


def test_worker_returns_no_big_arrays(units):
    outcome = summarise("x", fake_analyse(str(units[0])))
    assert set(outcome.to_dict()) == {"path", "name", "status", "error", "values", "stderrs", "warnings",
                                      "record_id", "record_error"}
    assert all(isinstance(v, float) for v in outcome.values.values())


def test_exit_codes(units):
    good = [p for i, p in enumerate(units) if i != BAD]
    assert run_batch(good, workers=1, analyse=fake_analyse).exit_code == 1
    passing = [p for i, p in enumerate(units) if i != BAD and i not in FAILING]
    assert run_batch(passing, workers=1, analyse=fake_analyse).exit_code == 0
    with pytest.raises(InputError):
        run_batch(units, workers=0, analyse=fake_analyse)


def test_no_yield_without_design_checks(units):
    result = BatchResult(units=(summarise("a", {"name": "a"}), run_batch(units[BAD:BAD + 1], workers=1,
                                                                         analyse=fake_analyse).units[0]), spread={})
    assert result.counts["no design"] == 1 and result.counts["error"] == 1
    assert result.yield_fraction is None


def test_csv_and_json_export(units, tmp_path):
    result = run_batch(units, workers=2, analyse=fake_analyse)
    out = tmp_path / "lot.csv"
    out.write_text(result.to_csv())  # the command writes it through rfmeas.commands._csvfile
    rows = list(csv.DictReader(io.StringIO(out.read_text())))
    assert len(rows) == N_UNITS
    assert rows[0]["name"] == "unit 0" and rows[0]["status"] == "pass"
    # headers carry the label and the unit (rfmeas.present.csvout)
    assert float(rows[4]["primary inductance L1 [H]"]) == inductance_H(4)
    assert float(rows[4]["primary inductance L1 standard error [H]"]) == pytest.approx(inductance_H(4) * 0.01)
    assert rows[BAD]["status"] == "error" and rows[BAD]["primary inductance L1 [H]"] == ""
    assert rows[2]["status"] == "fail"
    js = tmp_path / "lot.json"
    result.write_json(js)
    data = json.loads(js.read_text())
    assert data["counts"]["error"] == 1 and len(data["units"]) == N_UNITS
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]


def test_atomic_write_keeps_old_file_on_failure(tmp_path):
    target = tmp_path / "out.csv"
    target.write_text("old\n")

    with pytest.raises((TypeError, AttributeError)):
        atomic_write_text(target, 12345)  # not text: the write fails half way
    assert target.read_text() == "old\n"
    assert [p.name for p in tmp_path.iterdir()] == ["out.csv"]
    with pytest.raises(InputError):
        atomic_write_text(tmp_path / "missing" / "out.csv", "x")


def test_find_manifests(units, tmp_path):
    folder = units[0].parent
    assert find_manifests([str(folder)]) == units
    assert find_manifests([str(folder / "unit-0*.toml")]) == units[:10]
    assert find_manifests([str(units[3]), str(units[3])]) == [units[3]]
    with pytest.raises(InputError):
        find_manifests([str(tmp_path / "nothing-*.toml")])


# --- the batch command --------------------------------------------------------------------

def test_batch_command(units, tmp_path, monkeypatch):
    from typer.testing import CliRunner

    import rfmeas.history.batch
    from rfmeas.cli import app

    monkeypatch.setattr(rfmeas.history.batch, "analyse_manifest", fake_analyse)
    runner = CliRunner()
    folder = str(units[0].parent)
    res = runner.invoke(app, ["batch", folder, "--workers", "2", "--json", "--csv", str(tmp_path / "lot.csv")])
    assert res.exit_code == 2  # one unit could not be analysed
    data = json.loads(res.stdout)
    assert data["counts"]["error"] == 1 and "thru.s2p' is missing" in res.stderr
    assert len(list(csv.DictReader(io.StringIO((tmp_path / "lot.csv").read_text())))) == N_UNITS
    good = [str(p) for i, p in enumerate(units) if i != BAD]
    res = runner.invoke(app, ["batch", *good, "--workers", "1"])
    assert res.exit_code == 1  # a design check failed
    assert "yield 16/19 = 84.2 %" in res.stdout and "primary inductance L1" in res.stdout and "primary_inductance_H" not in res.stdout
    res = runner.invoke(app, ["batch", str(tmp_path / "none-*.toml")])
    assert res.exit_code == 2 and "no manifest found" in res.stderr
