"""Pathological measurements are named, or refused, never fitted into confident numbers silently.

Each case is built from sweeps simulated by scikit-rf's circuit solver
(tests/reference/skrf_circuit.py) with 1e-3 rms VNA noise (common practice for
a small VNA), or from plain arrays for the standards: a dead short is
S11 = −1 and an open S11 = +1 (the definition of the reflection coefficient,
Γ = (Z − Z0)/(Z + Z0), at Z = 0 and Z = ∞).
"""

from __future__ import annotations

import dataclasses
import json

import numpy as np
import pytest
import skrf as rf

from fitting_helpers import REFERENCE_CIRCUIT, simulated_set
from reference import OnePort, four_sweeps
from reference.skrf_circuit import simulate_skrf
from rfmeas.analysis import analyze, analyze_manifest
from rfmeas.errors import FitError
from rfmeas.fit.start import first_resonance_Hz
from rfmeas.model.methods import impedance_from_reflection
from rfmeas.io.touchstone import write_touchstone
from rfmeas.model import TransformerParams
from rfmeas.fit.checks import NOT_A_TRANSFORMER, check_fit, check_sweeps

TRUE = TransformerParams(**REFERENCE_CIRCUIT)
F_HZ = np.logspace(5, 8, 101)
SWEEPS = four_sweeps()
CLEAN = {n: simulate_skrf(TRUE, F_HZ, d) for n, d in SWEEPS.items()}


def _set(clean=None, f_Hz=F_HZ, sweeps=None, seed=0, **fields):
    sweeps = sweeps or SWEEPS
    clean = clean or {n: simulate_skrf(TRUE, f_Hz, d) for n, d in sweeps.items()}
    return simulated_set(TRUE, f_Hz, sweeps=sweeps, clean=clean, rng=np.random.default_rng(seed), **fields)


def _replaced(**changes):
    return dict(CLEAN, **changes)


def _about(warnings, label, *words):
    """The warnings that name sweep `label` and contain every word."""
    return [w for w in warnings if w.startswith(f"{label}:") and all(x in w for x in words)]


@pytest.fixture(scope="module")
def good_analysis():
    return analyze(_set())


def test_a_sound_measurement_raises_no_doubt(good_analysis):
    assert check_sweeps(good_analysis.measurement) == []
    assert check_fit(good_analysis.measurement, good_analysis.fit) == []
    assert good_analysis.warnings == ()


def test_the_bundled_sample_sets_raise_no_doubt():
    """The sample sets (ngspice-simulated units with VNA noise, see sample_data/README.md)."""
    for folder in ("coupler-before", "coupler-after"):
        analysis = analyze_manifest(f"sample_data/{folder}")
        assert analysis.warnings == (), folder


def test_dead_short_instead_of_a_winding_is_named():
    analysis = analyze(_set(_replaced(pri_open=-np.ones(F_HZ.size))))
    assert _about(analysis.warnings, "pri_open", "short circuit", "shorted turn or wrong termination")


def test_open_lead_is_named():
    analysis = analyze(_set(_replaced(pri_open=np.ones(F_HZ.size))))
    assert _about(analysis.warnings, "pri_open", "open circuit", "broken or unsoldered lead")


def test_uncalibrated_reflection_above_one_is_named():
    analysis = analyze(_set(_replaced(pri_open=1.2 * CLEAN["pri_open"])))
    assert _about(analysis.warnings, "pri_open", "not a passive measurement")


def test_a_few_points_above_one_are_a_warning_only():
    s11 = CLEAN["sec_open"].copy()
    s11[-5:] *= 1.1
    warnings = check_sweeps(_set(_replaced(sec_open=s11)))
    assert _about(warnings, "sec_open", "passive device cannot", "calibration")


def _wrong_unit(measurement, labels):
    """The sweeps `labels` with Hz numbers read as GHz (frequencies × 1e9)."""
    sweeps = []
    for s in measurement.sweeps:
        if s.label in labels:
            net = s.network.copy()
            net.frequency = rf.Frequency.from_f(s.f_Hz * 1e9, unit="Hz")
            s = dataclasses.replace(s, network=net)
        sweeps.append(s)
    return dataclasses.replace(measurement, sweeps=tuple(sweeps))


def test_one_sweep_in_the_wrong_frequency_unit_is_named():
    analysis = analyze(_wrong_unit(_set(), {"pri_short"}))
    assert _about(analysis.warnings, "pri_short", "wrong frequency unit", "option line")


def test_every_sweep_in_the_wrong_frequency_unit_is_refused():
    measurement = _wrong_unit(_set(), set(SWEEPS))
    with pytest.raises(FitError) as info:
        analyze(measurement)
    assert NOT_A_TRANSFORMER in info.value.message
    assert "wrong frequency unit" in info.value.message
    assert all(label in info.value.message for label in SWEEPS)


def test_sweep_below_one_hertz_is_named():
    f_Hz = F_HZ * 1e-9  # GHz numbers under a "# Hz" option line
    measurement = _set(clean=CLEAN)
    low = dataclasses.replace(measurement.sweeps[0], network=rf.Network(
        frequency=rf.Frequency.from_f(f_Hz, unit="Hz"), s=measurement.sweeps[0].network.s, z0=50))
    warnings = check_sweeps(dataclasses.replace(measurement, sweeps=(low,) + measurement.sweeps[1:]))
    assert _about(warnings, "pri_open", "far below", "wrong frequency unit")


def _srf_Hz():
    """First self-resonance of the secondary (primary open), from a fine scikit-rf sweep."""
    f = np.logspace(5, 8, 2001)
    z = impedance_from_reflection(simulate_skrf(TRUE, f, OnePort("secondary", "open")), 50.0)
    return first_resonance_Hz(f, z)


def test_sweep_entirely_above_self_resonance_is_named():
    srf_Hz = _srf_Hz()
    assert 1e6 < srf_Hz < 2e7  # 1/(2π√(L2·C)) with L2 = 99 µH and tens of pF: a few MHz [derived]
    f_Hz = np.logspace(np.log10(5 * srf_Hz), np.log10(50 * srf_Hz), 101)
    analysis = analyze(_set(f_Hz=f_Hz))
    assert _about(analysis.warnings, "sec_open", "capacitive over the whole sweep", "start the sweep lower")
    # above its self-resonance the primary's open sweep shows less than its leakage: named too
    assert _about(analysis.warnings, "pri_short", "pri_open", "self-resonance")


def test_only_sweep_above_self_resonance_is_refused():
    srf_Hz = _srf_Hz()
    f_Hz = np.logspace(np.log10(5 * srf_Hz), np.log10(50 * srf_Hz), 101)
    with pytest.raises(FitError, match="start the sweep lower") as info:
        analyze(_set(f_Hz=f_Hz, sweeps={"sec_open": OnePort("secondary", "open")}))
    assert NOT_A_TRANSFORMER in info.value.message


def test_unconnected_port_2_is_named():
    thru = CLEAN["thru"].copy()
    thru[:, 1, 0] = 0.0  # nothing arrives; noise is added on top
    thru[:, 0, 0] = CLEAN["pri_open"]  # port 1 sees the primary with the secondary open
    analysis = analyze(_set(_replaced(thru=thru)))
    assert _about(analysis.warnings, "thru", "port 2 connected")


def test_nothing_but_dead_sweeps_is_not_a_transformer():
    dead = {n: (-np.ones(F_HZ.size) if n != "thru" else np.zeros((F_HZ.size, 2, 2))) for n in SWEEPS}
    with pytest.raises(FitError) as info:
        analyze(_set(dead))
    message = info.value.message
    assert message.startswith(NOT_A_TRANSFORMER)
    assert "pri_open" in message and "thru" in message and "port 2" in message


def _write_set(folder, clean, files):
    """Touchstone files of the simulated sweeps and a manifest listing `files` (label -> file)."""
    measurement = _set(clean)
    for sweep in measurement.sweeps:
        write_touchstone(sweep.network, folder / f"{sweep.label}.s{2 if sweep.is_two_port else 1}p")
    lines = ['[transformer]', 'name = "bench unit"', 'primary_turns = 3', 'secondary_turns = 9']
    for label, termination in (("pri_open", "open"), ("pri_short", "short")):
        lines += ["[[sweep]]", f'file = "{files[label]}"', 'port1 = "primary"', f'termination = "{termination}"']
    lines += ["[[sweep]]", 'file = "sec_open.s1p"', 'port1 = "secondary"', 'termination = "open"']
    lines += ["[[sweep]]", 'file = "thru.s2p"', 'port1 = "primary"', 'port2 = "secondary"']
    (folder / "manifest.toml").write_text("\n".join(lines) + "\n", encoding="utf-8")
    return folder / "manifest.toml"


def test_open_and_short_files_swapped_in_the_manifest_are_named(tmp_path):
    manifest = _write_set(tmp_path, CLEAN, {"pri_open": "pri_short.s1p", "pri_short": "pri_open.s1p"})
    analysis = analyze_manifest(manifest)
    # the sweep labels are the file names the manifest gives
    named = _about(analysis.warnings, "pri_open.s1p", "swapped")
    assert named and "pri_short.s1p" in named[0]


def test_swapped_files_reach_the_json_output(tmp_path):
    from typer.testing import CliRunner

    from rfmeas.cli import app

    manifest = _write_set(tmp_path, CLEAN, {"pri_open": "pri_short.s1p", "pri_short": "pri_open.s1p"})
    result = CliRunner().invoke(app, ["analyze", str(manifest), "--json"])
    assert result.exit_code == 0, result.output
    warnings = json.loads(result.stdout)["warnings"]
    assert any("swapped" in w for w in warnings)


def test_mislabelled_termination_is_the_suspect_sweep():
    """A sweep said to be loaded by 200 Ω that was taken with 50 Ω: the fit misses only it."""
    sweeps = dict(SWEEPS, pri_200=OnePort("primary", 200.0))
    clean = dict(CLEAN, pri_200=simulate_skrf(TRUE, F_HZ, OnePort("primary", 50.0)))
    analysis = analyze(_set(clean, sweeps=sweeps))
    assert _about(analysis.warnings, "pri_200", "suspect sweep", "mislabelled")
    assert not any(w.startswith(("pri_open:", "pri_short:", "sec_open:", "thru:")) for w in analysis.warnings)


def test_turn_counts_that_contradict_the_inductances_are_named():
    # REFERENCE_CIRCUIT: √(99 µH / 11 µH) = 3 [derived]
    analysis = analyze(_set(CLEAN, primary_turns=5, secondary_turns=11))
    message = [w for w in analysis.warnings if "turn counts" in w]
    assert message == ["the turn counts in the manifest say 5:11 (1:2.2) but the windings measure 1:3 "
                       "(√(L2/L1)): a miscounted winding, or primary and secondary sweeps swapped?"]


def test_turn_counts_that_agree_raise_nothing(good_analysis):
    measurement = dataclasses.replace(good_analysis.measurement, primary_turns=3, secondary_turns=9)
    assert check_fit(measurement, good_analysis.fit) == []


def test_non_convergence_is_reported_with_its_reason(good_analysis):
    stuck = dataclasses.replace(good_analysis.fit, converged=False,
                                message="The maximum number of function evaluations is exceeded.")
    warnings = check_fit(good_analysis.measurement, stuck)
    assert len(warnings) == 1
    assert "no converged fit" in warnings[0] and "ran out of evaluations" in warnings[0]
    assert "not a result" in warnings[0]


def test_non_finite_residuals_are_not_a_result(good_analysis):
    broken = dataclasses.replace(good_analysis.fit, rms_residual=float("nan"))
    assert any("not finite" in w for w in check_fit(good_analysis.measurement, broken))


@pytest.mark.parametrize("k, words", [(1 - 1e-7, "top of its range"), (0.05, "bottom of its range")])
def test_coupling_at_the_edge_of_its_range_is_named(good_analysis, k, words):
    fit = dataclasses.replace(good_analysis.fit, params=dataclasses.replace(good_analysis.fit.params, k=k))
    assert any(words in w for w in check_fit(good_analysis.measurement, fit))


def test_inductance_at_the_edge_of_its_range_is_named(good_analysis):
    params = dataclasses.replace(good_analysis.fit.params, L2_H=10.0)
    fit = dataclasses.replace(good_analysis.fit, params=params)
    assert any("secondary inductance came out at the edge" in w
               for w in check_fit(good_analysis.measurement, fit))


def test_matched_load_instead_of_a_winding_is_named():
    analysis = analyze(_set(_replaced(sec_open=np.zeros(F_HZ.size))))
    assert _about(analysis.warnings, "sec_open", "50 Ω load, not a winding")


def test_sweeps_of_random_reflections_do_not_look_like_a_transformer():
    """Passive but meaningless data (|S| < 1, random phase): no circuit fits, and the analysis says so."""
    rng = np.random.default_rng(11)

    def junk(shape):
        z = rng.standard_normal(shape) + 1j * rng.standard_normal(shape)
        return 0.99 * z / (1 + np.abs(z))

    clean = {n: junk((F_HZ.size, 2, 2) if n == "thru" else F_HZ.size) for n in SWEEPS}
    analysis = analyze(_set(clean))
    assert any(w.startswith(NOT_A_TRANSFORMER) and "misses 4 of 4 sweeps" in w for w in analysis.warnings)


def test_a_fit_that_runs_out_of_evaluations_says_why(monkeypatch):
    import rfmeas.fit.solver

    real = rfmeas.fit.solver.least_squares

    def starved(*args, **kwargs):
        return real(*args, **dict(kwargs, max_nfev=2))

    monkeypatch.setattr(rfmeas.fit.solver, "least_squares", starved)
    analysis = analyze(_set())
    assert not analysis.fit.converged
    assert any(w.startswith("no converged fit") and "ran out of evaluations" in w for w in analysis.warnings)


def test_a_low_impedance_reflection_sweep_gets_method_advice():
    """The sample unit's shorted-secondary sweep is well under an ohm to ~20 Ω: shunt-through
    resolves it better (rfmeas.model.methods), and the advice says so; advice is not a warning."""
    analysis = analyze_manifest("sample_data/coupler-after")
    advice = [a for a in analysis.advice if a.startswith("pri_short")]
    assert advice and "shunt-through" in advice[0]
    assert not any(a.startswith("pri_open") for a in analysis.advice)
    assert analysis.to_dict()["advice"] == list(analysis.advice)
    assert analysis.warnings == ()


def test_an_unusable_sweep_is_left_out_and_the_others_still_fit():
    """An open lead on the primary-open sweep: the other three sweeps carry the fit."""
    analysis = analyze(_set(_replaced(pri_open=np.ones(F_HZ.size))))
    assert _about(analysis.warnings, "pri_open", "left out of the fit")
    assert [s.label for s in analysis.measurement.sweeps] == ["pri_short", "sec_open", "thru"]
    assert analysis.fit.estimates["primary_inductance_H"].value == pytest.approx(TRUE.L1_H, rel=0.02)
    assert "pri_open" in [s["label"] for s in analysis.to_dict()["measurement"]["sweeps"]]
