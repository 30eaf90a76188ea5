"""The fit is judged against the data's own noise, and a fit that misses the data says so.

Sweeps are simulated with rfmeas.model (whose agreement with ngspice and scikit-rf
tests/test_model_reference.py checks) or with scikit-rf's circuit solver
(tests/reference/skrf_circuit.py), plus additive complex Gaussian noise of known σ per
component. The expected misfit ratio on pure noise is derived: the residual of the true
model is minus the noise, rms σ per component, and the error it is judged against is the
data's noise with the systematic floor F of rfmeas.measurement.noise in quadrature, so the ratio is
σ / sqrt(σ² + F²).
"""

from __future__ import annotations

import dataclasses
import json
import math

import numpy as np
import pytest
from rich.console import Console
from typer.testing import CliRunner

from fitting_helpers import REFERENCE_CIRCUIT, simulated_set
from reference import OnePort, TwoPort, four_sweeps
from reference.skrf_circuit import simulate_skrf
from rfmeas.analysis import analyze, analyze_manifest
from rfmeas.cli import app
from rfmeas.judge.design import design_status
from rfmeas.io.touchstone import write_touchstone
from rfmeas.model import TransformerParams, reflection, s_matrix
from rfmeas.measurement.noise import SYSTEMATIC_FLOOR
from rfmeas.fit.result import (GOOD_MISFIT_RATIO, POOR_MISFIT_RATIO, build_result, checked_stderr, fit_quality,
                            grade_of, missed_sweeps, sweep_misfit)
from rfmeas.fit.checks import NOT_A_TRANSFORMER
from rfmeas.measurement.sweep import DesignTarget
from rfmeas.present.terminal import render_analysis

TRUE = TransformerParams(**REFERENCE_CIRCUIT)
F_HZ = np.logspace(5, 8, 401)
SWEEPS = four_sweeps()
# REFERENCE_CIRCUIT is 1:3 (√(99 µH / 11 µH) [derived]): a 50 Ω → 450 Ω design with 3:9 turns
DESIGN = DesignTarget(source_impedance_ohm=50.0, load_impedance_ohm=450.0, lowest_frequency_Hz=1.5e6,
                      highest_frequency_Hz=30e6)
# words of the design check's advice (rfmeas.judge.design): none may appear when nothing is judged
ADVICE_WORDS = ("wind ", "recount", "more turns", "fewer turns", "turns on the", "spread turns", "wind tighter")


def simulate_model(params, f_Hz, description):
    """S of a sweep from rfmeas.model: S11 for a OnePort, the S matrix for a TwoPort."""
    if isinstance(description, OnePort):
        return reflection(params, f_Hz, description.port1, description.termination, description.z0_ohm)
    return s_matrix(params, f_Hz, description.port1, description.z0_port1_ohm, description.z0_port2_ohm)


def _expected_ratio(sigma):
    """σ / sqrt(σ² + F²): pure noise judged against the data's noise plus the floor [derived]."""
    return sigma / math.sqrt(sigma**2 + SYSTEMATIC_FLOOR**2)


def _render(analysis) -> str:
    console = Console(record=True, width=200, force_terminal=False)
    render_analysis(analysis, console, full=True)
    return console.export_text()


def _other_transformer_set(**fields):
    """The usual four sweeps, but sec_open taken on another unit (4× L2, looser, more capacitance)."""
    other = dataclasses.replace(TRUE, L2_H=4 * TRUE.L2_H, k=0.95, C2_F=20e-12)
    clean = {n: simulate_skrf(TRUE, F_HZ, d) for n, d in SWEEPS.items()}
    clean["sec_open"] = simulate_skrf(other, F_HZ, SWEEPS["sec_open"])
    return simulated_set(TRUE, F_HZ, rng=np.random.default_rng(3), clean=clean, **fields)


def _write(measurement, folder):
    """Touchstone files and a manifest (with the design and turns) for a simulated set."""
    lines = ['[transformer]', 'name = "bench unit"', 'primary_turns = 3', 'secondary_turns = 9',
             '[design]', 'source_impedance_ohm = 50', 'load_impedance_ohm = 450',
             'lowest_frequency_Hz = 1.5e6', 'highest_frequency_Hz = 30e6']
    for sweep in measurement.sweeps:
        name = f"{sweep.label}.s{2 if sweep.is_two_port else 1}p"
        write_touchstone(sweep.network, folder / name)
        lines += ["[[sweep]]", f'file = "{name}"', f'port1 = "{sweep.port1}"']
        lines.append(f'port2 = "{sweep.port2}"' if sweep.is_two_port else f'termination = "{sweep.termination}"')
    (folder / "manifest.toml").write_text("\n".join(lines) + "\n", encoding="utf-8")
    return folder / "manifest.toml"


@pytest.fixture(scope="module")
def good():
    return analyze(simulated_set(TRUE, F_HZ, rng=np.random.default_rng(1), design=DESIGN,
                                 primary_turns=3, secondary_turns=9))


@pytest.fixture(scope="module")
def wrong():
    return analyze(_other_transformer_set(design=DESIGN, primary_turns=3, secondary_turns=9))


# --------------------------------------------------------------------------- the statistic


@pytest.mark.parametrize("sigma", [1e-3, 3e-3, 1e-2])
def test_misfit_ratio_is_one_on_pure_noise_around_the_true_model(sigma):
    rng = np.random.default_rng(int(sigma * 1e5))
    f_Hz = np.logspace(5, 8, 801)
    qualities, sizes = [], []
    for name, description in SWEEPS.items():
        clean = simulate_model(TRUE, f_Hz, description)
        clean = clean[:, None] if clean.ndim == 1 else np.stack([clean[:, 0, 0], clean[:, 1, 0]], axis=1)
        measured = clean + sigma * (rng.standard_normal(clean.shape) + 1j * rng.standard_normal(clean.shape))
        _scaled, noise, ratio = sweep_misfit(measured, clean - measured)
        # the data's noise is found (estimator within 10 %), and the true model's misfit is the noise
        assert noise == pytest.approx(math.hypot(sigma, SYSTEMATIC_FLOOR), rel=0.1), name
        assert ratio == pytest.approx(_expected_ratio(sigma), rel=0.1), name
        qualities.append(type("Q", (), dict(label=name, misfit_ratio=ratio, worst_misfit_band={}))())
        sizes.append(clean.size)
    quality = fit_quality(qualities, sizes)
    assert quality.misfit_ratio == pytest.approx(_expected_ratio(sigma), rel=0.06)
    assert quality.grade == "good" and quality.missed == ()


def test_grades_and_missed_sweeps_follow_the_documented_thresholds():
    assert (GOOD_MISFIT_RATIO, POOR_MISFIT_RATIO) == (2.0, 5.0)
    assert [grade_of(r) for r in (0.9, 2.0, 2.01, 5.0, 5.01, math.nan, math.inf)] == \
        ["good", "good", "marginal", "marginal", "poor", "poor", "poor"]
    # far above the others (> 2 and > 3× their median), or above the poor threshold
    assert missed_sweeps({"a": 1.0, "b": 1.1, "c": 4.0}) == ["c"]
    assert missed_sweeps({"a": 1.5, "b": 1.5, "c": 4.0}) == []
    assert missed_sweeps({"a": 6.0, "b": 7.0}) == ["a", "b"]
    assert missed_sweeps({"a": 1.0, "b": math.nan}) == ["b"]


# --------------------------------------------------------------------------- whole analyses


@pytest.mark.parametrize("params, sigma, seed", [
    (TRUE, 3e-4, 11), (TRUE, 3e-3, 12),
    # a 1:1 isolation transformer and a 4:1 step-down (as in tests/test_fit.py)
    (TransformerParams(L1_H=40e-6, L2_H=40e-6, k=0.998, R1_ohm=0.1, R2_ohm=0.1, Rc_ohm=math.inf,
                       C1_F=4e-12, C2_F=4e-12, C12_F=15e-12), 1e-3, 13),
    (TransformerParams(L1_H=80e-6, L2_H=5e-6, k=0.95, R1_ohm=0.4, R2_ohm=0.03, Rc_ohm=3000.0,
                       C1_F=8e-12, C2_F=2e-12, C12_F=1.5e-12), 1e-3, 14),
])
def test_a_clean_noisy_simulated_set_is_graded_good(params, sigma, seed):
    analysis = analyze(simulated_set(params, F_HZ, sigma=sigma, rng=np.random.default_rng(seed)))
    quality = analysis.fit.quality
    assert quality.grade == "good" and quality.missed == ()
    # a right model leaves the noise: ratio ≈ σ/sqrt(σ² + F²), a little less for the fitted parameters
    assert 0.8 * _expected_ratio(sigma) < quality.misfit_ratio < 1.1 * _expected_ratio(sigma)
    assert quality.stderr_describes_error
    data = analysis.to_dict()["fit"]
    assert data["quality"]["grade"] == "good" and data["quality"]["noise_source"] == "data"
    assert set(data["quality"]["sweeps"]) == {"pri_open", "pri_short", "sec_open", "thru"}
    assert {"converged", "rms_residual", "points"} <= set(data)


def test_a_sweep_from_another_transformer_is_graded_poor_and_named(wrong):
    quality = wrong.fit.quality
    assert quality.grade == "poor" and quality.misfit_ratio > POOR_MISFIT_RATIO
    missed = {m["sweep"]: m for m in quality.missed}
    assert "sec_open" in missed
    band = missed["sec_open"]["worst_band"]
    assert F_HZ[0] <= band["start_Hz"] < band["stop_Hz"] <= F_HZ[-1] * 1.0001
    assert band["misfit_ratio"] >= missed["sec_open"]["misfit_ratio"]
    data = wrong.to_dict()
    assert data["fit"]["quality"]["grade"] == "poor"
    assert data["fit"]["quality"]["stderr_describes_error"] is False
    assert data["parameters"]["primary_inductance_H"]["stderr_describes_error"] is False
    assert any(w.startswith("sec_open: the model misses this sweep") and "Hz" in w for w in data["warnings"])
    assert any(w.startswith("the fit is poor") for w in data["warnings"])


def test_a_poor_fit_leaves_the_design_not_judged_without_advice(wrong):
    check = wrong.to_dict()["design_check"]
    assert check["passed"] is None and check["status"] == "not judged" and wrong.design_status == "not judged"
    assert check["checks"] and check["not_judged_reasons"]
    assert any("fit is poor" in r for r in check["not_judged_reasons"])
    for c in check["checks"]:
        assert c["passed"] is None and c["state"] == "not judged" and c["advice"] == ""
        assert "fit is poor" in c["reason"]
    text = _render(wrong)
    assert "Design check: NOT JUDGED" in text and "these standard errors do not describe the error" in text
    assert not any(word in text for word in ADVICE_WORDS)


@pytest.mark.parametrize("r_peak_ohm, grade", [(4.0, "marginal"), (20.0, "poor")])
def test_a_resonance_the_model_lacks_is_named_with_its_band(r_peak_ohm, grade):
    """pri_open with a parallel trap (Q = 10 at 20 MHz) in series: no lumped element of the circuit
    makes it, so the fit must name pri_open and the band around 20 MHz. A small trap (4 Ω peak)
    leaves a marginal fit whose design is still judged; a large one (20 Ω) a poor fit."""
    from rfmeas.model.methods import impedance_from_reflection

    z0 = 50.0
    clean = {n: simulate_skrf(TRUE, F_HZ, d) for n, d in SWEEPS.items()}
    z = impedance_from_reflection(clean["pri_open"], z0)
    f0, q = 20e6, 10.0
    trap = r_peak_ohm / (1 + 1j * q * (F_HZ / f0 - f0 / F_HZ))  # parallel RLC near f0 [derived]
    clean["pri_open"] = (z + trap - z0) / (z + trap + z0)
    analysis = analyze(simulated_set(TRUE, F_HZ, rng=np.random.default_rng(5), clean=clean, design=DESIGN,
                                     primary_turns=3, secondary_turns=9))
    quality = analysis.fit.quality
    assert quality.grade == grade
    missed = {m["sweep"]: m for m in quality.missed}
    assert list(missed) == ["pri_open"]
    band = missed["pri_open"]["worst_band"]
    assert band["start_Hz"] <= f0 <= band["stop_Hz"]
    assert any(w.startswith("pri_open: the model misses this sweep") for w in analysis.all_warnings)
    assert (analysis.design_status == "not judged") == (grade == "poor")
    assert quality.stderr_describes_error == (grade != "poor")


def test_a_noisy_sweep_is_noisy_not_missed():
    """pri_short with 15× the noise of the others: its rms misfit is far above theirs, but measured
    against its own noise the model fits it; it is called noisy, and the fit stays good."""
    measurement = simulated_set(TRUE, F_HZ, rng=np.random.default_rng(8))
    rng = np.random.default_rng(9)
    sweeps = []
    for sweep in measurement.sweeps:
        if sweep.label == "pri_short":
            s = sweep.network.s.copy()
            s = s + 15e-3 * (rng.standard_normal(s.shape) + 1j * rng.standard_normal(s.shape))
            sweep = dataclasses.replace(sweep, network=sweep.network.copy())
            sweep.network.s = s
        sweeps.append(sweep)
    analysis = analyze(dataclasses.replace(measurement, sweeps=tuple(sweeps)))
    assert analysis.fit.quality.grade == "good" and analysis.fit.quality.missed == ()
    assert any(w.startswith("pri_short:") and "noisier" in w for w in analysis.all_warnings)
    assert not any("suspect sweep" in w or "misses this sweep" in w for w in analysis.all_warnings)


def test_cli_exits_1_without_advice_when_the_fit_is_poor(tmp_path):
    manifest = _write(_other_transformer_set(), tmp_path)
    result = CliRunner().invoke(app, ["analyze", str(manifest), "--no-record", "--json"])
    assert result.exit_code == 1, result.output
    data = json.loads(result.stdout)
    assert data["design_check"]["passed"] is None and data["fit"]["quality"]["grade"] == "poor"
    result = CliRunner().invoke(app, ["analyze", str(manifest), "--no-record"])
    assert result.exit_code == 1
    assert "NOT JUDGED" in result.stdout and not any(w in result.stdout for w in ADVICE_WORDS)
    assert "down to the noise" not in result.stdout


def test_a_good_fit_is_judged_and_the_line_that_could_not_fail_is_gone(good):
    assert good.fit.quality.grade == "good" and good.design_status in ("pass", "fail")
    assert good.design_check.not_judged == ()
    text = _render(good)
    assert "down to the noise" not in text and "residual variance" not in text
    assert "fit quality: good" in text and "the data's own noise" in text


def test_non_transformer_gives_no_verdict_and_no_turn_advice(tmp_path):
    """The passive but meaningless sweeps of tests/test_sanity.py (|S| < 1, random phase)."""
    rng = np.random.default_rng(11)
    f_Hz = np.logspace(5, 8, 101)

    def junk(shape):
        z = rng.standard_normal(shape) + 1j * rng.standard_normal(shape)
        return 0.99 * z / (1 + np.abs(z))

    clean = {n: junk((f_Hz.size, 2, 2) if n == "thru" else f_Hz.size) for n in SWEEPS}
    measurement = simulated_set(TRUE, f_Hz, rng=rng, clean=clean, design=DESIGN, primary_turns=3,
                                secondary_turns=9)
    analysis = analyze(measurement)
    check = analysis.design_check
    assert check.passed is None and analysis.design_status == "not judged"
    assert any(r.startswith(NOT_A_TRANSFORMER) for r in check.not_judged)
    assert all(v.advice == "" and v.state == "not judged" for v in check.verdicts)
    assert not any(word in _render(analysis) for word in ADVICE_WORDS)
    result = CliRunner().invoke(app, ["analyze", str(_write(measurement, tmp_path)), "--no-record"])
    assert result.exit_code == 1 and "NOT JUDGED" in result.stdout
    assert not any(word in result.stdout for word in ADVICE_WORDS)


def test_a_partial_sweep_leaves_the_design_not_judged(good):
    sweeps = tuple(dataclasses.replace(s, partial=(s.label == "thru")) for s in good.measurement.sweeps)
    analysis = analyze(dataclasses.replace(good.measurement, sweeps=sweeps))
    assert analysis.fit.quality.grade == "good"
    check = analysis.design_check
    assert check.passed is None and check.status == "not judged"
    assert any(r.startswith("thru:") and "incomplete" in r for r in check.not_judged)
    assert all(v.advice == "" for v in check.verdicts)


# --------------------------------------------------------------------------- standard errors of 0


@pytest.mark.parametrize("stderr", [0.0, None, math.nan, math.inf, 1e-30])
def test_unusable_standard_errors_are_refused_with_a_reason(stderr):
    value, why = checked_stderr(1e-5, stderr)
    assert value is None and why.startswith("no standard error")


def test_a_zero_standard_error_never_prints_as_a_bare_number(good):
    outcome = good.fit.outcome
    zero = dataclasses.replace(outcome, covariance=np.zeros_like(outcome.covariance))
    result = build_result(zero, list(good.measurement.sweeps))
    est = result.estimates["primary_inductance_H"]
    assert est.determined and est.stderr is None and "no standard error" in est.stderr_note
    data = est.to_dict()
    assert data["stderr"] is None and data["stderr_note"]
    from rfmeas.judge.figures import compute_figures

    figures, _check, _w = compute_figures(good.measurement, result)
    assert figures["turns_ratio"].stderr is None and figures["turns_ratio"].stderr_note
    analysis = dataclasses.replace(good, fit=result, figures=figures)
    text = _render(analysis)
    line = next(row for row in text.splitlines() if row.startswith("primary inductance L1"))
    assert "± ?" in line and "no standard error" in line
    assert "± ?" in next(row for row in text.splitlines() if row.startswith("turns ratio √(L2/L1)"))
    from rfmeas.present.report.html import parameter_rows

    row = next(r for r in parameter_rows(analysis) if r["key"] == "primary_inductance_H")
    assert row["value"].endswith("± ?") and "no standard error" in row["note"]


# --------------------------------------------------------------------------- report, history, status


def test_report_shows_the_grade_and_not_judged(good, wrong):
    from rfmeas.present.report.html import render_report

    html = render_report(wrong, plots=[])
    assert 'id="fit-grade" class="state fail">poor<' in html
    assert "? not judged" in html and "Design check not judged" in html
    assert 'id="stderr-warning"' in html and "sec_open" in html
    assert "down to the noise" not in html and "residual variance" not in html
    html = render_report(good, plots=[])
    assert 'id="fit-grade" class="state pass">good<' in html and 'id="stderr-warning"' not in html


def test_history_shows_the_grade(good, wrong, tmp_path):
    from rfmeas.history.store import HistoryStore, record_analysis

    db = tmp_path / "h.sqlite3"
    with HistoryStore(db) as store:
        record_analysis(store, good)
        record_analysis(store, wrong)
    result = CliRunner().invoke(app, ["history", "--db", str(db), "--json"])
    records = json.loads(result.stdout)["records"]
    assert [(r["fit_grade"], r["design_status"]) for r in records] == \
        [("poor", "not judged"), ("good", good.design_status)]
    result = CliRunner().invoke(app, ["history", "--db", str(db)])
    assert result.exit_code == 0 and "poor" in result.stdout and "good" in result.stdout
    assert "not judged" in result.stdout


def test_design_status_from_json_old_and_new():
    assert design_status(None) == "no design"
    assert design_status({"passed": None, "status": "not judged", "checks": []}) == "not judged"
    assert design_status({"passed": None, "checks": [{"passed": None}]}) == "not judged"
    assert design_status({"passed": True}) == "pass"
    assert design_status({"ratio": {"passed": False}}) == "fail"


def test_batch_counts_a_unit_not_judged_as_not_passing():
    from rfmeas.history.batch import BatchResult, summarise

    unit = summarise("u.toml", {"name": "u", "design_check": {"passed": None, "status": "not judged",
                                                               "checks": []}})
    lot = BatchResult((unit,), {})
    assert unit.status == "not judged" and lot.exit_code == 1 and lot.yield_fraction == 0.0
