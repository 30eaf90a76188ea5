"""Fit quality over a seeded population of plausible transformers: does the grade tell right from wrong?

Run: python -m pytest tests/bench/test_fit_quality_population.py -s -p no:cacheprovider -o addopts=""

Transformers drawn log-uniformly over the ranges of issue 12 (L1 2 µH–2 mH, turns ratio
1:4 to 5:1, 1 − k 5e-4–5e-2, R1 0.01–1 Ω with R2 scaled by the ratio², C1, C2 1–20 pF,
C12 0.5–20 pF, core-loss corner Rc/(2π·Lm) 0.3–30 MHz; sweeps from 10, 50 or 100 kHz to 30,
50 or 100 MHz with 401–1601 points; complex noise 3e-4 to 3e-3 per component), simulated
with scikit-rf's circuit solver (tests/reference/skrf_circuit.py). Printed:

- right model: the share graded good / marginal / poor, the misfit ratios, and the silent
  failures (L1, L2, leakage or ratio more than 5 standard errors from the truth while the
  fit is not graded poor);
- wrong model (the secondary-open sweep taken on another unit: L2 × 4, k 0.95): the share
  graded poor and the share whose design check is not judged.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from fitting_helpers import simulated_set
from reference import four_sweeps
from reference.skrf_circuit import simulate_skrf
from rfmeas.analysis import analyze
from rfmeas.model import TransformerParams
from rfmeas.measurement.sweep import DesignTarget

UNITS = 40
KEYS = {"primary_inductance_H": "L1_H", "secondary_inductance_H": "L2_H",
        "leakage_inductance_H": None, "effective_turns_ratio": None}


def _log_uniform(rng, lo, hi):
    return float(math.exp(rng.uniform(math.log(lo), math.log(hi))))


def draw(rng):
    """(params, f_Hz, sigma) of one plausible transformer and its sweeps."""
    L1 = _log_uniform(rng, 2e-6, 2e-3)
    n = _log_uniform(rng, 0.25, 5.0)
    k = 1.0 - _log_uniform(rng, 5e-4, 5e-2)
    R1 = _log_uniform(rng, 0.01, 1.0)
    corner_Hz = _log_uniform(rng, 0.3e6, 30e6)
    params = TransformerParams(L1_H=L1, L2_H=L1 * n * n, k=k, R1_ohm=R1, R2_ohm=R1 * n * n,
                               Rc_ohm=2 * math.pi * corner_Hz * k * L1,
                               C1_F=_log_uniform(rng, 1e-12, 20e-12), C2_F=_log_uniform(rng, 1e-12, 20e-12),
                               C12_F=_log_uniform(rng, 0.5e-12, 20e-12))
    f_Hz = np.geomspace(rng.choice([10e3, 50e3, 100e3]), rng.choice([30e6, 50e6, 100e6]),
                        int(rng.integers(401, 1602)))
    return params, f_Hz, _log_uniform(rng, 3e-4, 3e-3)


def _truth(params, key):
    if key == "leakage_inductance_H":
        return params.leakage_inductance_H
    if key == "effective_turns_ratio":
        return params.effective_turns_ratio
    return getattr(params, KEYS[key])


def _worst_z(analysis, params) -> float:
    worst = 0.0
    for key in KEYS:
        est = analysis.fit.estimates[key]
        if not est.determined or est.value is None:
            continue
        if not est.stderr:
            return math.inf
        worst = max(worst, abs(est.value - _truth(params, key)) / est.stderr)
    return worst


def test_grade_over_a_random_population():
    rng = np.random.default_rng(20261202)
    sweeps = four_sweeps()
    design = DesignTarget(source_impedance_ohm=50.0, load_impedance_ohm=450.0, lowest_frequency_Hz=1e6,
                          highest_frequency_Hz=30e6)
    right, wrong, silent, worst = [], [], [], []
    for unit in range(UNITS):
        params, f_Hz, sigma = draw(rng)
        clean = {n: simulate_skrf(params, f_Hz, d) for n, d in sweeps.items()}
        a = analyze(simulated_set(params, f_Hz, sigma=sigma, rng=np.random.default_rng(unit), clean=clean))
        q = a.fit.quality
        z = _worst_z(a, params)
        right.append((q.grade, q.misfit_ratio, z))
        if q.grade != "poor" and z > 5:
            silent.append((unit, q.grade, round(q.misfit_ratio, 2), round(z, 1)))
        other = dataclasses.replace(params, L2_H=4 * params.L2_H, k=0.95)
        clean["sec_open"] = simulate_skrf(other, f_Hz, sweeps["sec_open"])
        b = analyze(simulated_set(params, f_Hz, sigma=sigma, rng=np.random.default_rng(unit), clean=clean,
                                  design=design))
        wrong.append((b.fit.quality.grade, b.fit.quality.misfit_ratio, b.design_status))
        if b.fit.quality.grade != "poor":
            worst.append((unit, b.fit.quality.grade, round(b.fit.quality.misfit_ratio, 2)))
    grades = [g for g, _r, _z in right]
    ratios = np.array([r for g, r, _z in right if g == "good"])
    print(f"\nright model, {UNITS} units: good {grades.count('good')}, marginal {grades.count('marginal')}, "
          f"poor {grades.count('poor')}")
    if ratios.size:
        print(f"  misfit ratio of the good ones: median {np.median(ratios):.3f}, "
              f"min {ratios.min():.3f}, max {ratios.max():.3f}")
    print(f"  silent failures (> 5 standard errors off, not graded poor): {len(silent)} {silent}")
    print(f"  graded poor: {[(i, round(r, 2), round(z, 1)) for i, (g, r, z) in enumerate(right) if g == 'poor']}")
    poor = sum(1 for g, _r, _s in wrong if g == "poor")
    not_judged = sum(1 for _g, _r, s in wrong if s == "not judged")
    print(f"wrong model (sec_open from another unit): graded poor {poor}/{UNITS}, "
          f"design not judged {not_judged}/{UNITS}; not poor: {worst}")
    print(f"  misfit ratios: median {np.median([r for _g, r, _s in wrong]):.3g}, "
          f"min {min(r for _g, r, _s in wrong):.3g}")
    assert poor == UNITS and not_judged == UNITS
