"""Figures of merit from the fit, checked on sweeps simulated outside the project.

The sweeps come from scikit-rf's circuit solver (tests/reference/skrf_circuit,
coupled-inductor form) with known L1, L2, k, C, plus a little seeded noise;
the sample data come from ngspice (sample_data/README.md). Each check names
the formula it is held against.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
import skrf as rf

from rfmeas.model import response
from rfmeas.analysis import analyze, analyze_manifest
from rfmeas.magnetics import MU0_H_per_m, toroid_geometry
from rfmeas.model.params import TransformerParams
from rfmeas.measurement.sweep import DesignTarget, MeasurementSet, Sweep
from tests.reference import TwoPort, four_sweeps
from tests.reference.skrf_circuit import simulate_four_sweeps, simulate_skrf

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "sample_data"

F_HZ = np.geomspace(1e4, 3e8, 401)
N1, N2 = 5, 15
# High coupling and tiny capacitances, so the closed-form corners apply.
TRUE = TransformerParams(L1_H=10e-6, L2_H=90e-6, k=0.995, R1_ohm=0.02, R2_ohm=0.1,
                         C1_F=0.005e-12, C2_F=0.005e-12, C12_F=0.002e-12)
# Toroid 10 / 5 / 3 mm (REFERENCES.md, derived from the IEC 60205 ring-core form)
CORE = {"shape": "toroid", "outer_diameter_mm": 10.0, "inner_diameter_mm": 5.0, "height_mm": 3.0}
MATCHED = DesignTarget(source_impedance_ohm=50.0, load_impedance_ohm=450.0,
                       lowest_frequency_Hz=2e6, highest_frequency_Hz=30e6)


def simulated_sweeps(params=TRUE, f_Hz=F_HZ, noise=1e-4, seed=7, names=None) -> tuple[Sweep, ...]:
    """The usual four sweeps of `params` from scikit-rf, with complex Gaussian noise of `noise` rms."""
    rng = np.random.default_rng(seed)
    freq = rf.Frequency.from_f(f_Hz, unit="Hz")
    described = four_sweeps()
    out = []
    for name, s in simulate_four_sweeps(params, f_Hz).items():
        if names is not None and name not in names:
            continue
        s = np.array(s, dtype=complex)
        s = s + noise * (rng.standard_normal(s.shape) + 1j * rng.standard_normal(s.shape)) / math.sqrt(2)
        sweep = described[name]
        if isinstance(sweep, TwoPort):
            out.append(Sweep(rf.Network(frequency=freq, s=s, z0=50.0), sweep.port1, None,
                             sweep.other, label=name))
        else:
            out.append(Sweep(rf.Network(frequency=freq, s=s.reshape(-1, 1, 1), z0=50.0), sweep.port1,
                             sweep.termination, label=name))
    return tuple(out)


@pytest.fixture(scope="module")
def sweeps():
    return simulated_sweeps()


@pytest.fixture(scope="module")
def matched(sweeps):
    return analyze(MeasurementSet("simulated 5:15", sweeps, N1, N2, CORE, MATCHED))


def _closed_form_low_corner_Hz(params, source_ohm, load_ohm):
    """f = Rp/(2π·Lm), Rp = Rs ∥ RL/n² (amwindow.org transformer design notes, REFERENCES.md)."""
    n = math.sqrt(params.L2_H / params.L1_H)
    reflected = load_ohm / n**2
    rp = source_ohm * reflected / (source_ohm + reflected)
    return rp / (2 * math.pi * params.magnetizing_inductance_H)


def test_inductance_factor_matches_L_over_N_squared(matched):
    al = matched.figures["inductance_factor_nH_per_turn2"]
    # A_L = L/N² (REFERENCES.md "Core geometry and A_L"): 10 µH / 25 = 90 µH / 225 = 400 nH/turn²
    assert al.detail("primary").value == pytest.approx(TRUE.L1_H / N1**2 * 1e9, rel=0.01)
    assert al.detail("secondary").value == pytest.approx(TRUE.L2_H / N2**2 * 1e9, rel=0.01)
    assert al.value == pytest.approx(400.0, rel=0.01)
    assert abs(al.detail("agreement_percent")) < 1.0 and al.detail("agrees") is True
    # 1 µH per 100 turns = 0.1 nH/turn², 1 mH per 1000 turns = 1 nH/turn² (L at N turns over N²)
    assert al.detail("uH_per_100_turns").value == pytest.approx(al.value * 10)
    assert al.detail("mH_per_1000_turns").value == pytest.approx(al.value)


def test_inductance_factor_stderr_is_the_inductance_stderr_over_N_squared(matched):
    # first-order propagation of a linear function: σ(A_L) = σ(L1)/N1²
    al = matched.figures["inductance_factor_nH_per_turn2"].detail("primary")
    l1 = matched.fit.estimate("primary_inductance_H")
    assert l1.stderr > 0
    assert al.stderr == pytest.approx(l1.stderr / N1**2 * 1e9, rel=1e-3)


def test_effective_permeability_of_a_toroid(matched):
    # µe = L·le/(µ0·N²·Ae) = L·C1/(µ0·N²); toroid 10/5/3 mm has C1 = 3.0216 mm⁻¹
    # (IEC 60205 ring-core form, worked in REFERENCES.md "Core geometry and A_L")
    mu = matched.figures["effective_permeability"]
    expected = TRUE.L1_H * 3.0216e3 / (MU0_H_per_m * N1**2)
    assert mu.value == pytest.approx(expected, rel=0.01)
    geometry = toroid_geometry(10.0, 5.0, 3.0)
    assert mu.detail("core")["effective_length_mm"] == pytest.approx(geometry.effective_length_m * 1e3)
    assert mu.detail("core")["effective_length_mm"] == pytest.approx(21.78, rel=1e-3)  # REFERENCES.md [derived]


def test_reactance_rule_limit_by_hand(sweeps):
    # X_L ≥ 4·R (common practice; D. Fern, REFERENCES.md): f = 4·R/(2π·L)
    # primary: 4·50/(2π·10 µH) = 3.1831 MHz; secondary into 200 Ω: 4·200/(2π·90 µH) = 1.4147 MHz
    design = DesignTarget(source_impedance_ohm=50.0, load_impedance_ohm=200.0, lowest_frequency_Hz=2e6)
    a = analyze(MeasurementSet("mismatched", sweeps, N1, N2, None, design))
    lf = a.figures["low_frequency_limit_Hz"]
    assert lf.detail("primary").value == pytest.approx(3.1831e6, rel=0.02)
    assert lf.detail("secondary").value == pytest.approx(1.4147e6, rel=0.02)
    assert lf.value == pytest.approx(3.1831e6, rel=0.02) and lf.detail("set_by") == "primary"
    assert lf.stderr > 0
    # the corner for this mismatch: Rp = 50 ∥ 200/9 = 15.385 Ω
    assert a.figures["low_frequency_corner_3dB_Hz"].value == pytest.approx(
        _closed_form_low_corner_Hz(TRUE, 50.0, 200.0), rel=0.03)


def test_three_dB_corners_against_the_closed_form(matched):
    f = matched.figures
    # 1:3 into 450 Ω from 50 Ω: Rp = 25 Ω, Lm = 9.95 µH -> 399.9 kHz
    # (the REFERENCES.md worked case, 25 Ω and 10 µH, gives 397.9 kHz)
    low = _closed_form_low_corner_Hz(TRUE, 50.0, 450.0)
    assert low == pytest.approx(399.9e3, rel=1e-3)
    assert f["low_frequency_corner_3dB_Hz"].value == pytest.approx(low, rel=0.03)
    # upper corner of the series leakage L1(1 − k²) between Rs and RL' (first-order low-pass,
    # (Rs + RL')/(2π·Ll); leakage from the short-circuit inductance, REFERENCES.md)
    high = (50.0 + 50.0) / (2 * math.pi * TRUE.leakage_inductance_H)
    assert f["high_frequency_corner_3dB_Hz"].value == pytest.approx(high, rel=0.03)
    assert f["high_frequency_corner_3dB_Hz"].detail("within_sweeps") is True
    # first-order high-pass: |H|² = 1/(1 + (fc/f)²) is 1 dB down at fc/sqrt(10^0.1 − 1) [derived]
    assert f["low_frequency_corner_1dB_Hz"].value == pytest.approx(low / math.sqrt(10**0.1 - 1), rel=0.03)
    assert f["low_frequency_corner_3dB_Hz"].stderr > 0


def test_return_loss_band_start_against_the_shunt_inductance_form():
    # matched (RL' = Rs = R) with only Lm across: Γ = −R/(R + 2jωLm), so |Γ| = g at
    # ω = R·sqrt(1/g² − 1)/(2·Lm) [derived]; leakage kept negligible (k = 0.999999)
    params = TRUE.replace(k=0.999999)
    g = 10 ** (-15 / 20)
    start = 50.0 * math.sqrt(1 / g**2 - 1) / (2 * params.magnetizing_inductance_H) / (2 * math.pi)
    band = response.band_response(params, 50.0, 450.0, 15.0)
    assert band.return_loss_start_Hz == pytest.approx(start, rel=0.01)
    assert band.low_3dB_Hz == pytest.approx(_closed_form_low_corner_Hz(params, 50.0, 450.0), rel=0.01)


def test_fitted_return_loss_band_recovers_the_true_circuit(matched):
    band = matched.figures.return_loss_band
    truth = response.band_response(TRUE, 50.0, 450.0, 15.0)
    assert band.threshold_dB == 15.0
    assert band.start.value == pytest.approx(truth.return_loss_start_Hz, rel=0.01)
    assert band.stop.value == pytest.approx(truth.return_loss_stop_Hz, rel=0.01)


def test_self_resonance_of_a_winding(sweeps):
    # C = 1/((2π·f)²·L) (REFERENCES.md, self-resonance): a winding with a 10 pF shunt
    params = TRUE.replace(C1_F=10e-12, C2_F=1e-15, C12_F=1e-15)
    f_expected = 1 / (2 * math.pi * math.sqrt(params.L1_H * (10e-12 + 9e-15 + 4e-15)))
    a = analyze(MeasurementSet("srf", simulated_sweeps(params, F_HZ[::2]), N1, N2))
    assert a.figures["self_resonance_primary_Hz"].value == pytest.approx(f_expected, rel=0.02)


def test_turns_ratio_and_nearest_turns(sweeps):
    a = analyze(MeasurementSet("wound 15, stated 16", sweeps, N1, 16, None, MATCHED))
    tr = a.figures["turns_ratio"]
    assert tr.detail("effective").value == pytest.approx(3.0, rel=1e-3)
    # open-circuit voltage ratio at mid-band ≈ M/L1 = k·n
    assert tr.detail("open_circuit_voltage_ratio").value == pytest.approx(TRUE.k * 3.0, rel=1e-3)
    assert tr.detail("nearest_secondary_turns") == 15 and tr.detail("nearest_primary_turns") == 5
    assert tr.detail("design_ratio") == pytest.approx(3.0)
    assert any("not the stated 5:16" in w for w in a.warnings)
    stated = {v.name: v for v in a.design_check.verdicts}["turns_ratio_vs_stated_turns"]
    assert stated.passed is False and "5:15" in stated.advice
    assert a.design_passed is False


def test_response_gain_is_the_transducer_gain_of_skrf():
    # |S21|² with port references Rs and RL is the transducer gain; scikit-rf's circuit solver
    # with those port impedances gives the same S21
    f = np.geomspace(1e5, 1e8, 25)
    params = TransformerParams(10e-6, 90e-6, 0.99, 0.1, 0.3, C1_F=2e-12, C2_F=3e-12, C12_F=1e-12)
    s = simulate_skrf(params, f, TwoPort("primary", 50.0, 450.0))
    np.testing.assert_allclose(response.transducer_gain_dB(params, f, 50.0, 450.0),
                               20 * np.log10(np.abs(s[:, 1, 0])), atol=1e-9)
    np.testing.assert_allclose(response.return_loss_dB(params, f, 50.0, 450.0),
                               -20 * np.log10(np.abs(s[:, 0, 0])), atol=1e-9)


def test_defaults_without_design_are_noted(sweeps):
    a = analyze(MeasurementSet("no design", sweeps, None, None))
    assert a.design_check is None
    assert a.figures["inductance_factor_nH_per_turn2"].value is None
    assert "turn" in a.figures["inductance_factor_nH_per_turn2"].note
    assert a.figures["effective_permeability"].value is None
    terms = a.figures.terminations
    assert terms.source_ohm == 50.0 and terms.load_ohm == pytest.approx(450.0, rel=1e-3)
    assert "50 Ω" in a.figures["low_frequency_corner_3dB_Hz"].note
    assert a.figures["low_frequency_corner_3dB_Hz"].value == pytest.approx(
        _closed_form_low_corner_Hz(TRUE, 50.0, 450.0), rel=0.03)
    assert a.figures["turns_ratio"].detail("nearest_secondary_turns") is None


def test_undetermined_secondary_gives_no_value_and_says_why():
    only_primary = simulated_sweeps(f_Hz=F_HZ[::2], names={"pri_open"})
    a = analyze(MeasurementSet("primary only", only_primary, N1, N2, None, MATCHED))
    f = a.figures
    assert f["inductance_factor_nH_per_turn2"].detail("primary").value == pytest.approx(400.0, rel=0.01)
    assert f["inductance_factor_nH_per_turn2"].detail("secondary").value is None
    assert "needs L2," in f["inductance_factor_nH_per_turn2"].detail("secondary").note  # plain symbol, not L2_H
    assert f["turns_ratio"].value is None and "not determined" in f["turns_ratio"].note
    json.dumps(f.to_dict())  # plain Python all the way down


def test_sample_before_fails_the_ratio_check_and_names_15_turns():
    # invented set made with ngspice (sample_data/README.md): 14 turns wound instead of 15
    a = analyze_manifest(SAMPLES / "coupler-before")
    checks = {v.name: v for v in a.design_check.verdicts}
    ratio = checks["turns_ratio_vs_design"]
    assert ratio.passed is False and a.design_passed is False
    assert ratio.value == pytest.approx(2.8, rel=0.01) and ratio.limit == pytest.approx(3.0)
    assert "15 turns" in ratio.advice
    assert "below" in ratio.margin
    truth = json.loads((SAMPLES / "truth.json").read_text())["coupler-before"]
    # A_L = µ0·µ/C1 = 455.90 nH/turn² (sample_data/README.md)
    assert a.figures["inductance_factor_nH_per_turn2"].value == pytest.approx(455.90, rel=0.01)
    assert a.figures["inductance_factor_nH_per_turn2"].detail("primary").value == pytest.approx(
        truth["L1_H"] / 25 * 1e9, rel=0.01)
    assert a.figures["effective_permeability"].value == pytest.approx(800, rel=0.01)


def test_sample_after_meets_the_ratio():
    a = analyze_manifest(SAMPLES / "coupler-after")
    checks = {v.name: v for v in a.design_check.verdicts}
    assert checks["turns_ratio_vs_design"].passed is True
    assert checks["turns_ratio_vs_stated_turns"].passed is True
    # 4·50/(2π·11.3975 µH) = 2.7929 MHz, below the 3.5 MHz asked for
    assert checks["low_frequency_limit"].passed is True
    assert checks["low_frequency_limit"].value == pytest.approx(2.7929e6, rel=0.02)


def test_a_crossing_the_ends_do_not_bracket_is_known_to_the_grid_and_never_raises():
    # a band edge found on the grid whose refinement meets a value that cannot be evaluated
    # (NaN) or two ends of one sign must not end the analysis with a root finder's error
    f_a, f_b = 1e6, 2e6
    assert response.refine_crossing(lambda f: np.nan if f == f_a else 1.0, f_a, f_b) == pytest.approx(
        math.sqrt(f_a * f_b))
    assert response.refine_crossing(lambda f: 1.0, f_a, f_b) == pytest.approx(math.sqrt(f_a * f_b))
    # a real sign change is still refined: f − 1.5 MHz crosses at 1.5 MHz
    assert response.refine_crossing(lambda f: f - 1.5e6, f_a, f_b) == pytest.approx(1.5e6, rel=1e-9)
