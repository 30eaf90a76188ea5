"""Statistical efficiency of the fit: scatter over noisy repeats against the Cramér–Rao bound.

Cramér–Rao bound for additive Gaussian noise of known σ per real component
(e.g. Kay, Fundamentals of Statistical Signal Processing: Estimation Theory,
ch. 3, eq. 3.33 for the linearised Gaussian model): cov ≥ σ²(JᵀJ)⁻¹ with J the
Jacobian of the modelled real and imaginary S components with respect to the
fitted coordinates, here the fit's internal ones (log of each value, log(1−k)).
Derived quantities follow by the delta method, var g = ∇gᵀ cov ∇g.

Targets: the scatter of L1, leakage L1(1−k²) and turns ratio √(L2/L1) over
the repeats is within 1.2× of the bound, and the median reported standard
error is within 0.8–1.25× of the scatter.
"""

from __future__ import annotations

import math
import time

import numpy as np

from fitting_helpers import REFERENCE_CIRCUIT, simulated_set
from reference import four_sweeps
from reference.skrf_circuit import simulate_skrf
from rfmeas.fit.solver import SweepProblem, fit_sweeps, to_internal
from rfmeas.model import TransformerParams
from rfmeas.model.params import PARAMETER_NAMES
from rfmeas.fit.result import build_result

POINTS = 201
REPEATS = 200
SIGMA = 1e-3          # per real component, as simulated_set adds it
STEP = 1e-5           # central-difference step in internal coordinates
SCATTER_OVER_BOUND_MAX = 1.2
# with 200 repeats a standard deviation is known to about ±5 %, so a scatter
# clearly below the bound would mean the bound itself is wrong
SCATTER_OVER_BOUND_MIN = 0.85
STDERR_OVER_SCATTER = (0.8, 1.25)
KEYS = ("primary_inductance_H", "leakage_inductance_H", "effective_turns_ratio")


def _rows(x: np.ndarray) -> np.ndarray:
    """Physical parameter rows from internal coordinates, shape (m, 9)."""
    rows = np.exp(x)
    k = PARAMETER_NAMES.index("k")
    rows[:, k] = 1.0 - np.exp(x[:, k])
    return rows


def cramer_rao_stddevs(params: TransformerParams, sweeps, sigma: float) -> dict[str, float]:
    """Bound on the standard deviation of L1, leakage and ratio for `sweeps` with noise `sigma`."""
    problem = SweepProblem(sweeps, params.polarity)  # unit weights: residuals are plain S components
    x0 = np.array([to_internal(n, getattr(params, n)) for n in PARAMETER_NAMES])
    n = len(x0)
    shifts = STEP * np.eye(n)
    plus = problem.residual_rows(_rows(x0 + shifts))
    minus = problem.residual_rows(_rows(x0 - shifts))
    jac = ((plus - minus) / (2 * STEP)).T  # (N, 9); the measured data cancels
    cov = sigma ** 2 * np.linalg.inv(jac.T @ jac)

    i_l1, i_l2, i_k = (PARAMETER_NAMES.index(p) for p in ("L1_H", "L2_H", "k"))
    L1, k, ratio = params.L1_H, params.k, params.effective_turns_ratio
    leakage = params.leakage_inductance_H
    gradients = {name: np.zeros(n) for name in KEYS}
    gradients["primary_inductance_H"][i_l1] = L1                      # d e^x / dx
    gradients["leakage_inductance_H"][i_l1] = leakage
    gradients["leakage_inductance_H"][i_k] = L1 * 2 * k * (1 - k)    # dk/dx = −(1−k)
    gradients["effective_turns_ratio"][i_l1] = -ratio / 2
    gradients["effective_turns_ratio"][i_l2] = ratio / 2
    return {name: math.sqrt(g @ cov @ g) for name, g in gradients.items()}


def test_scatter_meets_the_cramer_rao_bound_and_stderrs_match_it():
    params = TransformerParams(**REFERENCE_CIRCUIT)
    f_Hz = np.logspace(5, 8, POINTS)
    descriptions = four_sweeps()
    clean = {name: simulate_skrf(params, f_Hz, d) for name, d in descriptions.items()}
    # the bound needs the sweeps as measured (forward-only thru: S11 and S21)
    template = list(simulated_set(params, f_Hz, sigma=0.0, clean=clean).sweeps)
    bound = cramer_rao_stddevs(params, template, SIGMA)

    rng = np.random.default_rng(11)
    values = {k: [] for k in KEYS}
    stderrs = {k: [] for k in KEYS}
    t0 = time.perf_counter()
    for _ in range(REPEATS):
        sweeps = list(simulated_set(params, f_Hz, sigma=SIGMA, rng=rng, clean=clean).sweeps)
        outcome = fit_sweeps(sweeps)
        assert outcome.converged and not outcome.held, outcome.held  # the bound is for all nine free
        estimates = build_result(outcome, sweeps).estimates
        for k in KEYS:
            values[k].append(estimates[k].value)
            stderrs[k].append(estimates[k].stderr)
    elapsed = time.perf_counter() - t0

    print(f"\nstatistical efficiency, {REPEATS} repeats of four sweeps x {POINTS} points, "
          f"sigma {SIGMA:g} ({elapsed:.1f} s):")
    failures = []
    for k in KEYS:
        scatter = float(np.std(values[k], ddof=1))
        reported = float(np.median(stderrs[k]))
        over_bound = scatter / bound[k]
        over_scatter = reported / scatter
        print(f"  {k}: scatter {scatter:.3e}, Cramer-Rao {bound[k]:.3e}, scatter/bound {over_bound:.3f}; "
              f"median reported stderr {reported:.3e}, stderr/scatter {over_scatter:.3f}")
        if not SCATTER_OVER_BOUND_MIN <= over_bound <= SCATTER_OVER_BOUND_MAX:
            failures.append(f"{k}: scatter/bound {over_bound:.3f}")
        if not STDERR_OVER_SCATTER[0] <= over_scatter <= STDERR_OVER_SCATTER[1]:
            failures.append(f"{k}: stderr/scatter {over_scatter:.3f}")
    assert not failures, failures
