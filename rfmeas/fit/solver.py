"""One joint least-squares fit of the equivalent circuit to every sweep of a transformer.

Residuals and weights. The residual is the complex difference between
modelled and measured S parameters (real and imaginary parts), each S element
of each sweep divided by its error σ from the data alone
(rfmeas.measurement.noise.error_sigma: trace noise from neighbouring points, with a
systematic floor), never from the fit's own residuals. So the reduced χ²,
2·cost/(N − p), is a real goodness-of-fit statistic (≈ 1 when the model
describes the data down to its noise); it is reported as `reduced_chi2`.

Coordinates. Parameters are fitted as the logarithm of each positive value and
log(1 − k) for the coupling, so leakage of 0.1 % and 10 % are equally easy to
reach.

Method (global, then local):
1. Readings (rfmeas.fit.start): L and C of each open winding from a weighted
   straight-line fit of its inductive band, the short-circuit inductance
   (hence k), and from a thru its low-band L1, L2 and signed M (the polarity,
   and the ratio as (M/L1)²) where it is nearly lossless, plus the ratio from
   its mid-band reflection. What the sweeps cannot split — the open-circuit
   capacitance C1 + n²·C2 + (n ∓ 1)²·C12 among the three, the coupling when
   nothing is shorted, the ratio when two readings disagree — is spread over
   several start points.
2. Global stage on about COARSE_POINTS points per sweep (spread in log and
   linear frequency): every start is screened by its cost under both core-loss
   placements (and, with no two-port sweep, both polarities) in one stacked
   evaluation each; for each polarity up to MAX_STARTS run Levenberg–Marquardt,
   each placement's best-screened start first, then the others by cost, until
   two runs agree at the noise; the ROBUST_STARTS best distinct solutions go on
   with robust sweep weights, and the lowest profile score wins. When even that
   misses a sweep like a poor fit (RETRY_CHI2), each placement is searched again
   on its own, the model's own first, the next seeded with its best. Whether the
   other starts ended on the same key quantities is recorded (`start_agreement`,
   `starts_disagree`, `start_spread`).
3. Robust sweep weights: a sweep the model misses is weighted as if its noise
   were max(σ, its misfit) — the maximum-likelihood weighting when each sweep
   may carry an error of its own — so one mislabelled or unmodelled sweep
   cannot drag what the others pin down. χ² is still reported against σ.
4. Core-loss placement: from the winner the fit tries the other placement (Rc
   restarted from its reading) and puts the core loss across the whole primary
   inductance only when the sweeps prefer it clearly (PLACEMENT_DELTA_CHI2);
   Rc's note then says so.
5. Local stage on every point from the winner. A parameter the sweeps cannot
   pin down (log-space standard error above UNDETERMINED_LOG_STDERR, or
   pressed against the edge of its range after one restart from its reading)
   is held at a neutral value — capacitances and winding resistances at
   zero, core-loss resistance at infinity — and reported as not determined.
   Before anything, parameters are held (least observable first) until each
   free one has MIN_RESIDUALS_PER_PARAMETER real residuals; fewer than that
   for the inductance alone is a FitError naming the minimum.

Standard errors: cov = (JᵀJ)⁻¹·max(1, χ²/dof) with J the weighted Jacobian,
plus what the white-noise errors leave out: the shift a smooth systematic
error of the size the fit leaves unexplained could cause
(_smooth_error_covariance), and the spread of the held parameters, in their
linear coordinates, carried into the free ones (_held_parameter_covariance),
what holding an unconstrained parameter hides from the others (their marginal,
not conditional, covariance: _hidden_by_holding), and the shifts to the starts
and the other core-loss placement that fit about as well but end elsewhere
(_start_spread_covariance): a value the data leave ambiguous never carries a
small error bar. Derived quantities follow by first-order propagation
(rfmeas.fit.result).
"""

from __future__ import annotations

import logging
import math
import time
from dataclasses import dataclass, field, replace

import numpy as np
from scipy.optimize import least_squares

from rfmeas.errors import FitError
from rfmeas.fit.rules import EDGE_TOLERANCE_LOG
from rfmeas.fit.start import start_candidates, sweeps_that_see
from rfmeas.model.circuit import y_elements
from rfmeas.model.params import CORE_LOSS_PLACEMENTS, PARAMETER_NAMES, TransformerParams
from rfmeas.measurement.noise import error_sigma
from rfmeas.measurement.sweep import Sweep

log = logging.getLogger(__name__)

UNDETERMINED_LOG_STDERR = 0.5
"""A parameter whose log-space standard error exceeds this (≈ ±50 %) is 'not determined'."""

# Range of each parameter (physical units); internal coordinate limits follow.
BOUNDS = {
    "L1_H": (1e-10, 10.0),
    "L2_H": (1e-10, 10.0),
    "k": (0.05, 1.0 - 1e-7),
    "R1_ohm": (1e-5, 1e4),
    "R2_ohm": (1e-5, 1e4),
    "Rc_ohm": (1e-1, 1e9),
    "C1_F": (1e-17, 1e-8),
    "C2_F": (1e-17, 1e-8),
    "C12_F": (1e-17, 1e-8),
}
# What an undetermined parameter is held at: the value at which it has no effect.
NEUTRAL = {
    "R1_ohm": 1e-5, "R2_ohm": 1e-5, "Rc_ohm": 1e9,
    "C1_F": 1e-17, "C2_F": 1e-17, "C12_F": 1e-17,
}
_STEP = 1e-6  # forward-difference step in internal (log) coordinates
COARSE_POINTS = 200
"""The global stage uses about this many points per sweep; the local stage uses them all."""
MAX_STARTS = 4
"""Starts per polarity run to the end in the global stage (see _global_search)."""
START_BUDGET = 100
"""Function evaluations allowed to one start in the global stage."""
MIN_RESIDUALS_PER_PARAMETER = 5
"""Real residuals (two per complex value) needed for every fitted parameter."""
AGREEMENT_TOLERANCE = {"primary_inductance_H": 0.01, "secondary_inductance_H": 0.01,
                       "leakage_inductance_H": 0.03, "effective_turns_ratio": 0.005}
"""Two starts ending this close in the key quantities found the same solution."""
SETTLED_CHI2 = 1.5
"""When the first two starts agree with a reduced χ² at most this, the remaining starts are skipped."""
COMPETITIVE_DELTA_CHI2 = 25.0
"""A start whose χ² is within this of the best (after scaling by the reduced χ²) fits about as well."""
SMOOTH_DEGREE = 4
"""Highest Legendre degree (in linear frequency) of the smooth systematic error model."""
SMOOTH_SIGNIFICANCE = 3.0
"""A sweep's misfit counts as systematic when χ² exceeds its noise expectation by this many
standard deviations (sqrt(2/n) per residual)."""
RETRY_CHI2 = 25.0
"""When the best start leaves a sweep's χ² per residual above this (misfit ratio 5, the line of a
poor fit: rfmeas.fit.rules.POOR_MISFIT_RATIO), each core-loss placement is searched again on its
own (see fit_sweeps). A lower line would also search again wherever a calibration residue leaves
a moderate misfit, at twice the cost and with no gain."""
RETRY_STARTS = 2
"""Starts per polarity (besides the seed) run again in that second search."""
PLACEMENT_DELTA_CHI2 = 10.0
"""The core loss is placed across the whole primary only when that lowers −2 log-likelihood by this."""
ROBUST_ROUNDS = 3
ROBUST_STARTS = 2
"""Starts carried on with robust sweep weights after the first descent."""
"""Re-weighting rounds of the robust sweep weights (see _reweight_sweeps)."""
HELD_SPREAD_CAP = 10.0
"""A held parameter's spread is capped at this many times its distance to the sweeps' reading."""
_LINEAR_HOLDS = ("R1_ohm", "R2_ohm", "Rc_ohm", "C1_F", "C2_F", "C12_F")
_EDGE_REASON = "pressed against the edge of its range: too small (or too large) to show in these sweeps"
REFERRAL_RATIO_SQ = 9.0
"""How much further (in L2/L1) an unseen winding is tied when the 1:1 tie needs a negative referred
capacitance (see fit_sweeps): a 1:3 step in the ratio."""
_HOLD_ORDER = ("C12_F", "C2_F", "C1_F", "Rc_ohm", "R2_ohm", "R1_ohm", "k", "L2_H", "L1_H")
_BAD_RESIDUAL = 1e6
_TINY_EIGENVALUE = 1e-14  # relative eigenvalue of the scaled normal matrix that carries no information
_MARGIN = 5.0  # how far (in log units) the unbounded solver may wander past a range edge


def to_internal(name: str, value: float) -> float:
    return math.log(1.0 - value) if name == "k" else math.log(value)


def to_physical(name: str, x):
    return 1.0 - np.exp(x) if name == "k" else np.exp(x)


def internal_bounds(name: str) -> tuple[float, float]:
    lo, hi = BOUNDS[name]
    a, b = to_internal(name, lo), to_internal(name, hi)
    return (min(a, b), max(a, b))


@dataclass(frozen=True)
class FitOutcome:
    """Raw numerical outcome of the fit; rfmeas.fit.result turns it into a report."""

    params: TransformerParams
    free: tuple[str, ...]                 # fitted parameters
    held: dict                            # name -> (value held at, reason)
    referred: dict                        # name -> note: fitted, but only as referred to the other side
    x: np.ndarray                         # internal coordinates of the free parameters
    covariance: np.ndarray | None         # internal coordinates, free parameters, scaled by max(1, χ²/dof)
    residual_variance: float              # reduced χ²: Σ((model − measured)/σ)²/(N − p), σ from the data
    sweep_sigma: tuple[float, ...]        # error σ of each sweep, rms over its S elements (S units)
    residuals: tuple[np.ndarray, ...]     # complex model − measured per sweep, shape (F, E)
    converged: bool
    message: str
    evaluations: int
    points: int                           # real residuals N (two per complex value)
    elapsed_s: float
    sweep_error_sigma: tuple[np.ndarray, ...] = ()  # error σ per S element of each sweep, shape (E,)
    reduced_chi2: float = math.nan        # the same as residual_variance, by its statistical name
    dof: int = 0                          # N − p
    starts: int = 0                       # start points run to the end of the global stage
    start_agreement: float = math.nan     # share of those starts that ended on the chosen solution
    starts_disagree: bool = False         # a start ending elsewhere fits about as well: the data allow both
    start_spread: dict = field(default_factory=dict)  # key quantity -> largest relative deviation among
                                                      # competitive starts


class SweepProblem:
    """Vectorised weighted residuals of a set of sweeps for stacks of parameter vectors.

    Each sweep's residual is divided by its error σ per S element (data noise and
    the systematic floor, rfmeas.measurement.noise.error_sigma), so 2·cost/(N − p) is the
    reduced χ² of the fit against the data's own noise.
    """

    def __init__(self, sweeps: list[Sweep], polarity: int, sigma=None, subset: int | None = None):
        """`subset`: keep about this many points per sweep, spread in log and linear frequency."""
        self.sweeps = sweeps
        self.polarity = polarity
        self.sigma = sigma if sigma is not None else [error_sigma(s.measured()) for s in sweeps]
        self.index = [_subset_index(s.f_Hz, subset) for s in sweeps]
        self.measured = [s.measured()[i] for s, i in zip(sweeps, self.index)]
        self.sweep_weights = np.ones(len(sweeps))  # robust down-weighting of a sweep the model misses
        self.core_loss = "magnetizing"
        # sweeps sharing a frequency grid share one evaluation of the network
        self._grids: dict[bytes, int] = {}
        self.grid_of_sweep = []
        self.grids = []
        for s, i in zip(sweeps, self.index):
            f = s.f_Hz[i]
            key = f.tobytes()
            if key not in self._grids:
                self._grids[key] = len(self.grids)
                self.grids.append(f)
            self.grid_of_sweep.append(self._grids[key])

    @property
    def size(self) -> int:
        """Number of real residuals."""
        return int(sum(2 * m.size for m in self.measured))

    def predict(self, values: np.ndarray) -> list[np.ndarray]:
        """Model S elements per sweep for parameter rows `values` (m, 9): list of (m, F, E).

        The forward model is the sweep's own (Sweep.s_from_admittance); sweeps on one grid
        share one evaluation of the admittance matrix.
        """
        cols = [values[:, i, None] for i in range(values.shape[1])]
        ys = [y_elements(f[None, :], *cols, polarity=self.polarity, core_loss=self.core_loss)
              for f in self.grids]
        return [sweep.s_from_admittance(*ys[g]) for sweep, g in zip(self.sweeps, self.grid_of_sweep)]

    def residual_rows(self, values: np.ndarray) -> np.ndarray:
        """Weighted real residuals, shape (m, N); a network that cannot be evaluated scores badly."""
        parts = []
        with np.errstate(all="ignore"):
            for model, meas, sig, w in zip(self.predict(values), self.measured, self.sigma,
                                           self.sweep_weights):
                d = (model - meas[None]) * (w / sig)
                parts.append(d.real.reshape(d.shape[0], -1))
                parts.append(d.imag.reshape(d.shape[0], -1))
        rows = np.concatenate(parts, axis=1)
        if np.isfinite(rows).all():
            return rows
        return np.nan_to_num(rows, nan=_BAD_RESIDUAL, posinf=_BAD_RESIDUAL, neginf=-_BAD_RESIDUAL)

    def sweep_chi2(self, values: np.ndarray) -> np.ndarray:
        """χ² per real residual of each sweep against its error σ (robust weights left out)."""
        out = []
        for model, meas, sig in zip(self.predict(values[None]), self.measured, self.sigma):
            d = (model[0] - meas) / sig
            out.append(float(np.mean(d.real ** 2 + d.imag ** 2) / 2.0))
        return np.nan_to_num(np.array(out), nan=_BAD_RESIDUAL, posinf=_BAD_RESIDUAL)

    def complex_residuals(self, values: np.ndarray) -> list[np.ndarray]:
        return [model[0] - meas for model, meas in zip(self.predict(values[None]), self.measured)]


def _subset_index(f_Hz: np.ndarray, count: int | None) -> np.ndarray:
    """Indices of about `count` points spread evenly in log and in linear frequency."""
    if count is None or f_Hz.size <= 1.5 * count:
        return np.arange(f_Hz.size)
    half = count // 2
    on_log = np.searchsorted(f_Hz, np.geomspace(f_Hz[0], f_Hz[-1], half)) if f_Hz[0] > 0 else []
    on_lin = np.linspace(0, f_Hz.size - 1, half).round().astype(int)
    return np.unique(np.clip(np.concatenate([on_log, on_lin]).astype(int), 0, f_Hz.size - 1))


class _Objective:
    """least_squares callbacks; the Jacobian's finite-difference steps share one evaluation."""

    def __init__(self, problem: SweepProblem, free: list[str], fixed: dict):
        self.problem = problem
        self.free = free
        self.fixed = fixed
        self.index = [PARAMETER_NAMES.index(n) for n in free]
        self.base = np.array([fixed.get(n, 0.0) for n in PARAMETER_NAMES], dtype=float)
        self.evaluations = 0
        self._last = (None, None)
        bounds = [internal_bounds(n) for n in free]
        self._lo = np.array([lo - _MARGIN for lo, _ in bounds])
        self._hi = np.array([hi if n == "k" else hi + _MARGIN  # k itself must stay positive
                             for n, (_, hi) in zip(free, bounds)])
        self._is_k = np.array([n == "k" for n in free], bool)

    def values(self, X: np.ndarray) -> np.ndarray:
        rows = np.repeat(self.base[None, :], X.shape[0], axis=0)
        if self.index:
            e = np.exp(np.clip(X, self._lo, self._hi))
            rows[:, self.index] = np.where(self._is_k, 1.0 - e, e)
        return rows

    def residuals(self, x: np.ndarray) -> np.ndarray:
        if self._last[0] is not None and np.array_equal(self._last[0], x):
            return self._last[1]
        r = self.problem.residual_rows(self.values(x[None, :]))[0]
        self.evaluations += 1
        self._last = (x.copy(), r)
        return r

    def jacobian(self, x: np.ndarray) -> np.ndarray:
        base = self.residuals(x)  # usually cached: least_squares has just evaluated x
        X = x[None, :] + _STEP * np.eye(len(x))
        R = self.problem.residual_rows(self.values(X))
        self.evaluations += len(X)
        return ((R - base) / _STEP).T


def _solve(problem, free, fixed, x0, max_nfev=200):
    """Levenberg–Marquardt in internal coordinates.

    The coordinates are unbounded; the model clips each parameter a little past
    its range (see _Objective.values), so a parameter the data push out of range
    stalls just outside it and is then reported as at the edge.
    """
    obj = _Objective(problem, free, fixed)
    lb, ub = zip(*(internal_bounds(n) for n in free))
    x0 = np.clip(x0, np.array(lb) + 1e-9, np.array(ub) - 1e-9)
    res = least_squares(obj.residuals, x0, jac=obj.jacobian, method="lm", x_scale="jac",
                        xtol=1e-8, ftol=1e-8, gtol=1e-8, max_nfev=max_nfev)
    # past the clip the model no longer changes: bring x back to where it still acts
    res.x = np.array([np.clip(x, lo - _MARGIN, hi if n == "k" else hi + _MARGIN)
                      for x, n, lo, hi in zip(res.x, free, lb, ub)])
    return res, obj


def _covariance(jac: np.ndarray, residual_variance: float) -> np.ndarray:
    """s²·(JᵀJ)⁻¹; directions with no information get an infinite variance."""
    cov, unseen = _pseudo_inverse_normal(jac, with_unseen=True)
    cov[unseen, :] = np.nan
    cov[:, unseen] = np.nan
    cov[unseen, unseen] = np.inf
    return cov * residual_variance


def _pseudo_inverse_normal(jac: np.ndarray, with_unseen: bool = False):
    """(JᵀJ)⁺ with the directions that carry no information left out.

    Decomposes the small n×n normal matrix (columns scaled to unit norm, which
    keeps it well conditioned) rather than the tall N×n Jacobian: an SVD of the
    Jacobian goes through multi-threaded LAPACK, which on a busy two-core
    machine can take longer than the whole fit. With `with_unseen`, also which
    parameters move along a direction the data do not see.
    """
    jtj = jac.T @ jac
    norm = np.sqrt(np.clip(np.diag(jtj), 0.0, np.inf))
    scale = np.where(norm > 0, norm, 1.0)
    w, v = np.linalg.eigh(jtj / np.outer(scale, scale))
    tiny = w <= w[-1] * _TINY_EIGENVALUE if w.size else w
    inv = np.where(tiny, 0.0, 1.0 / np.where(tiny, 1.0, w))
    pinv = (v * inv) @ v.T / np.outer(scale, scale)
    if not with_unseen:
        return pinv
    unseen = np.any(np.abs(v[:, tiny]) > 1e-6, axis=1) if np.any(tiny) else np.zeros(len(w), bool)
    return pinv, unseen


def _smooth_basis(f_Hz: np.ndarray) -> np.ndarray:
    """Slowly varying functions of frequency, shape (F, K), each of unit rms: what a calibration
    residue, a lead or a core slightly off the lumped model leaves on a sweep."""
    f = np.asarray(f_Hz, float)
    lin = 2.0 * (f - f[0]) / max(f[-1] - f[0], 1e-30) - 1.0
    lg = np.log(f)
    lg = 2.0 * (lg - lg[0]) / max(lg[-1] - lg[0], 1e-30) - 1.0
    cols = [np.polynomial.legendre.legval(lin, np.eye(SMOOTH_DEGREE + 1)[k]) for k in range(SMOOTH_DEGREE + 1)]
    cols += [np.polynomial.legendre.legval(lg, np.eye(3)[k]) for k in (1, 2)]
    b = np.stack(cols, axis=1)
    return b / np.sqrt(np.mean(b ** 2, axis=0))


def _smooth_error_covariance(problem: SweepProblem, jac: np.ndarray, fun: np.ndarray) -> np.ndarray:
    """Covariance the parameters owe to a smooth systematic error of the size the fit leaves unexplained.

    White-noise standard errors describe the noise only. When a sweep's misfit
    exceeds its noise (χ² per residual clearly above 1), the excess is a smooth
    error the model cannot follow — and an unknown part of the same error was
    absorbed by the parameters, unseen. For each slowly varying function
    (Legendre polynomials in linear and log frequency, per S element and
    component), take it as large as it could be if it alone left the excess
    actually observed (the part the fit would not absorb equals the excess),
    and add the shift it would cause in the parameters (linearised:
    δx = (JᵀJ)⁻¹Jᵀe). The direction of the real error among them is unknown,
    so the sum over the functions bounds it. Zero when every sweep is fitted
    down to its noise.
    """
    p = jac.shape[1]
    out = np.zeros((p, p))
    if p == 0:
        return out
    pinv = _pseudo_inverse_normal(jac)
    start = 0
    for measured, sig, w, idx, sweep in zip(problem.measured, problem.sigma, problem.sweep_weights,
                                            problem.index, problem.sweeps):
        F, E = measured.shape
        n = 2 * F * E
        rows = slice(start, start + n)
        start += n
        power = float(np.sum(fun[rows] ** 2))
        expected = n * w ** 2
        if n < 2 or power <= expected * (1.0 + SMOOTH_SIGNIFICANCE * math.sqrt(2.0 / n)):
            continue
        excess = power - expected
        basis = _smooth_basis(sweep.f_Hz[idx])                    # (F, K)
        K = basis.shape[1]
        B = np.zeros((jac.shape[0], 2 * E * K))
        col = 0
        for part in range(2):                                     # real, imaginary
            for e in range(E):
                block = np.zeros((F, E, K))
                block[:, e, :] = basis * (w / sig[e])
                B[start - n + part * F * E: start - n + (part + 1) * F * E, col:col + K] = block.reshape(F * E, K)
                col += K
        G = pinv @ (jac.T @ B)                                    # parameter shift per unit coefficient
        unabsorbed = np.sum((B - jac @ G) ** 2, axis=0)           # per function
        ok = unabsorbed > 0
        # each function alone, as large as the observed excess allows: a bound, since the
        # error's direction among them is not known
        out += (G[:, ok] * (excess / unabsorbed[ok])) @ G[:, ok].T
    return out


def _held_parameter_covariance(problem, obj, res, held: dict, readings: dict, scale: float) -> np.ndarray:
    """What holding a parameter hides: the scatter its plausible values would cause in the free ones.

    Holding a parameter the data barely see (a resistance pressed to zero, a
    capacitance too small to show) fixes it at one value; the free parameters
    correlated with it then look better known than they are. For each held
    resistance, capacitance or core-loss conductance, in its linear coordinate
    (where zero is an ordinary value), the data allow a spread of
    σ_h = 1/‖(I − P)·j_h‖ (P the projection on the free parameters' columns),
    capped at HELD_SPREAD_CAP times its distance to the sweeps' own reading; the free parameters
    shift by G = (JᵀJ)⁺Jᵀ·j_h per unit, so σ_h²·G·Gᵀ is added to their
    covariance — the Schur-complement form of leaving it free.
    """
    jac = res.jac
    p = jac.shape[1]
    out = np.zeros((p, p))
    if p == 0:
        return out
    pinv = _pseudo_inverse_normal(jac)
    base = obj.values(res.x[None, :])[0]
    r0 = problem.residual_rows(base[None, :])[0]
    for name, (value, reason) in held.items():
        if name not in _LINEAR_HOLDS or value is None:
            continue
        i = PARAMETER_NAMES.index(name)
        reading = readings.get(name, value)
        if name == "Rc_ohm":   # linear in the conductance 1/Rc
            plausible = abs(1.0 / reading - 1.0 / value)
            step = max(plausible, 1e-9) * 1e-3
            row = base.copy()
            row[i] = 1.0 / (1.0 / value + step)
        else:
            plausible = abs(reading - value)
            step = max(plausible, abs(value), 1e-18) * 1e-3
            row = base.copy()
            row[i] = value + step
        if not plausible > 0:
            continue
        j_h = (problem.residual_rows(row[None, :])[0] - r0) / step
        G = pinv @ (jac.T @ j_h)
        perp = float(np.sum((j_h - jac @ G) ** 2))
        spread_sq = min(scale / perp if perp > 0 else math.inf, (HELD_SPREAD_CAP * plausible) ** 2)
        out += spread_sq * np.outer(G, G)
    return out


def _key_quantities(values: np.ndarray) -> dict:
    v = dict(zip(PARAMETER_NAMES, values))
    return {
        "primary_inductance_H": v["L1_H"], "secondary_inductance_H": v["L2_H"],
        "leakage_inductance_H": v["L1_H"] * (1.0 - v["k"] ** 2),
        "effective_turns_ratio": math.sqrt(v["L2_H"] / v["L1_H"]),
    }


def _hold_for_point_count(free: list[str], residuals: int, held: dict) -> None:
    """Hold parameters (least observable first) until each free one has enough residuals."""
    allowed = residuals // MIN_RESIDUALS_PER_PARAMETER
    if allowed < 1:
        raise FitError(
            f"too few points to fit: the sweeps give {residuals // 2} complex values, and the fit "
            f"needs at least {math.ceil(MIN_RESIDUALS_PER_PARAMETER / 2)} per fitted parameter "
            f"(at least {math.ceil(MIN_RESIDUALS_PER_PARAMETER / 2)} points for the inductance alone)")
    for name in _HOLD_ORDER:
        if len(free) <= allowed:
            break
        if name in free:
            free.remove(name)
            held[name] = (NEUTRAL.get(name), f"too few points: {residuals // 2} complex values carry "
                          f"{allowed} parameter(s) at {MIN_RESIDUALS_PER_PARAMETER} real residuals each")


def fit_sweeps(sweeps: list[Sweep]) -> FitOutcome:
    """Fit the equivalent circuit to all `sweeps` at once (method in the module docstring).

    A winding no sweep sees is modelled with its inductance tied to the seen one's (1:1). Its
    ratio is not measured, so any tie fits as well as long as the referred C1 and C2 stay
    positive; when one is pressed against zero (a large C12 with a ratio far from 1:1 needs a
    negative one), the fit is run again with the tie REFERRAL_RATIO_SQ times further in that
    direction and kept when it fits clearly better (PLACEMENT_DELTA_CHI2).
    """
    t0 = time.perf_counter()
    outcome = _fit_sweeps(sweeps, 1.0)
    pressed = [n for n in ("C1_F", "C2_F") if n in outcome.held and outcome.held[n][1] == _EDGE_REASON]
    unseen = not (sweeps_that_see(sweeps, "primary") and sweeps_that_see(sweeps, "secondary"))
    if not unseen or "C12_F" not in outcome.free or len(pressed) != 1:
        return outcome
    # a referred C1 below zero needs a larger modelled L2/L1, a referred C2 below zero a smaller one
    again = _fit_sweeps(sweeps, REFERRAL_RATIO_SQ if pressed[0] == "C1_F" else 1.0 / REFERRAL_RATIO_SQ)
    better = again.reduced_chi2 * again.dof < outcome.reduced_chi2 * outcome.dof - PLACEMENT_DELTA_CHI2
    chosen = again if better else outcome
    return replace(chosen, evaluations=outcome.evaluations + again.evaluations,
                   elapsed_s=time.perf_counter() - t0)


def _fit_sweeps(sweeps: list[Sweep], tie_ratio_sq: float) -> FitOutcome:
    """fit_sweeps with an unseen winding's inductance tied at `tie_ratio_sq` times (L2/L1) the seen one."""
    t0 = time.perf_counter()
    if not sweeps:
        raise FitError("no sweeps to fit")
    for s in sweeps:
        if not np.all(np.isfinite(s.measured())):
            raise FitError(f"{s.label or 'a sweep'}: holds values that are not finite numbers")
    starts, polarity = start_candidates(sweeps)
    sigma = [error_sigma(s.measured()) for s in sweeps]
    problem = SweepProblem(sweeps, polarity, sigma=sigma)
    big = any(s.f_Hz.size > 1.5 * COARSE_POINTS for s in sweeps)
    coarse = SweepProblem(sweeps, polarity, sigma=sigma, subset=COARSE_POINTS) if big else problem
    points = problem.size

    held: dict[str, tuple[float, str]] = {}
    referred: dict[str, str] = {}
    ties = []  # (unseen winding's inductance, the seen one it is held equal to)
    for winding, own, ref, side in (("secondary", "L2_H", ("R2_ohm", "C2_F", "C12_F"), "primary"),
                                    ("primary", "L1_H", ("R1_ohm", "C1_F", "C12_F"), "secondary")):
        if sweeps_that_see(sweeps, winding):
            continue
        # The unseen winding is modelled 1:1 (its inductance held equal to the seen one; at
        # `tie_ratio_sq` on the second try, see fit_sweeps), so its resistance and capacitances
        # come out referred to the seen side. The referral is exact with C12 free: C12' = n·C12,
        # C1' = C1 + (1 − n)·C12, n²·C2 + n(n − 1)·C12 (while C1' and C2' stay positive), but only
        # sweeps of the seen winding with the unseen one both open and shorted (or loaded) tell
        # C12' from the other two.
        ties.append((own, "L1_H" if own == "L2_H" else "L2_H", tie_ratio_sq))
        held[own] = (None, f"no sweep sees the {winding} winding's inductance")
        if len({s.termination for s in sweeps if not s.is_two_port}) < 2:
            held["C12_F"] = (NEUTRAL["C12_F"], f"needs the {winding} winding's inductance to be referred")
        for name in ref:
            if name not in held:
                referred[name] = (f"referred to the {side} (the turns ratio is not measured)" if tie_ratio_sq == 1
                                  else f"referred to the {side} through an assumed ratio √(L2/L1) of "
                                       f"{math.sqrt(tie_ratio_sq):.3g} (the turns ratio is not measured)")
    _tie(starts, ties)
    free = [n for n in PARAMETER_NAMES if n not in held]
    _hold_for_point_count(free, points, held)
    for name, (value, reason) in list(held.items()):
        if value is None:  # an inductance or the coupling, held where the readings put it
            held[name] = (starts[0][name], reason)
    fixed = {n: v for n, (v, _) in held.items()}
    total_evals = 0

    # Global stage: screen every start by its cost, run the best few to the end on the thinned
    # problem, keep the lowest cost and record whether the others agree. The starts are screened
    # under both core-loss placements, and without a two-port sweep (the polarity then shows
    # only through C12) under both polarities.
    polarities = [polarity] if any(s.is_two_port for s in sweeps) else [polarity, -polarity]
    placements = CORE_LOSS_PLACEMENTS if "Rc_ohm" in free else ("magnetizing",)
    pol_starts = {pol: starts if pol == polarity else _tie(start_candidates(sweeps, polarity=pol)[0], ties)
                  for pol in polarities}
    groups = [(placement, pol, pol_starts[pol]) for pol in polarities for placement in placements]
    memo: dict = {}
    runs, configs, evaluations = _global_search(coarse, free, fixed, groups, memo=memo)
    total_evals += evaluations
    best = min(range(len(runs)), key=lambda r: runs[r][2])
    if not _fits_well(coarse, runs[best], configs[best]):
        # Second chance: each placement searched on its own, the model's own first, the next one
        # seeded with the best solution of the one before (Rc from its reading: driven out of
        # range under another placement, its gradient has vanished and it could not come back).
        seeds = []
        for placement in placements:
            more, more_configs, evaluations = _global_search(
                coarse, free, fixed, [g for g in groups if g[0] == placement],
                [((placement, pol), x) for pol, x in seeds], memo, RETRY_STARTS)
            total_evals += evaluations
            for r, config in zip(more, more_configs):
                if not any(r is q for q in runs):  # a run taken from the memo is there already
                    runs.append(r)
                    configs.append(config)
            j = min(range(len(more)), key=lambda r: more[r][2])
            seed = more[j][0].x.copy()
            if "Rc_ohm" in free:
                seed[free.index("Rc_ohm")] = to_internal("Rc_ohm", starts[0]["Rc_ohm"])
            seeds = [(more_configs[j][1], seed)]
        best = min(range(len(runs)), key=lambda r: runs[r][2])
    placement, polarity = configs[best]
    coarse.core_loss, coarse.polarity = placement, polarity
    problem.polarity = polarity
    res, obj, score, weights = runs[best]
    agreement, disagree, spread, start_shifts = _start_agreement(runs, res, obj, coarse, free)
    if "Rc_ohm" in free:
        # The other place the core loss may sit, tried from the winner; the core loss across the
        # whole primary is taken only when the sweeps clearly prefer it.
        coarse.core_loss = "primary" if placement == "magnetizing" else "magnetizing"
        # Rc starts from its reading: driven out of range under the other placement, its
        # gradient has vanished and it could not come back
        x_try = res.x.copy()
        x_try[free.index("Rc_ohm")] = to_internal("Rc_ohm", starts[0]["Rc_ohm"])
        res2, obj2, score2, evaluations, weights2 = _robust_solve(coarse, free, fixed, x_try, START_BUDGET,
                                                                  ROBUST_ROUNDS, weights)
        total_evals += evaluations
        other = (res2, obj2)
        primary_score, own_score = (score2, score) if placement == "magnetizing" else (score, score2)
        chosen = "primary" if primary_score < own_score - PLACEMENT_DELTA_CHI2 else "magnetizing"
        if chosen != placement:
            other = (res, obj)
            res, obj, weights = res2, obj2, weights2
        coarse.core_loss = problem.core_loss = chosen
        if chosen == "primary":
            referred["Rc_ohm"] = ("across the whole primary inductance: these sweeps show the core loss "
                                  "outside the leakage, not across the magnetising branch alone")
        if abs(score2 - score) <= COMPETITIVE_DELTA_CHI2:
            # both placements fit about as well: what they disagree on is not known better than that
            mine = _key_quantities(obj.values(res.x[None, :])[0])
            theirs = _key_quantities(other[1].values(other[0].x[None, :])[0])
            for k in mine:
                spread[k] = max(spread.get(k, 0.0), abs(theirs[k] / mine[k] - 1.0))
            start_shifts.append(dict(zip(free, (float(d) for d in other[0].x - res.x))))
            disagree = disagree or any(abs(theirs[k] / mine[k] - 1.0) > AGREEMENT_TOLERANCE[k] for k in mine)

    # Local stage on every point, then hold what the data do not determine and refit.
    x = res.x
    probed: set[str] = set()
    hidden: list[dict] = []  # what holding each unconstrained parameter would hide (see _hidden_by_holding)
    while True:
        res, obj, score, evaluations, weights = _robust_solve(problem, free, fixed, x, 200, ROBUST_ROUNDS, weights)
        total_evals += evaluations
        dof = max(points - len(free), 1)
        values = obj.values(res.x[None, :])[0]
        chi2 = 2.0 * _plain_cost(problem, values) / dof
        weighted_chi2 = float(2.0 * res.cost / dof)
        cov = _covariance(res.jac, max(1.0, weighted_chi2))
        name, edge = _worst_undetermined(free, res.x, cov)
        if name is None:
            break
        j = free.index(name)
        if edge and name not in probed:
            # In log coordinates a value driven towards zero cannot come back (its gradient
            # vanishes with it): restart it from its reading before calling it too small.
            probed.add(name)
            x_try = res.x.copy()
            x_try[j] = to_internal(name, starts[0][name])
            res2, obj2, score2, evaluations, weights2 = _robust_solve(problem, free, fixed, x_try, 200,
                                                                      ROBUST_ROUNDS, weights)
            total_evals += evaluations
            if score2 < score - 1e-9 * abs(score):
                x, weights = res2.x, weights2
                continue
        values = obj.values(res.x[None, :])[0]
        reason = _EDGE_REASON if edge else "the sweeps do not constrain it"
        if not edge:
            hidden.append(_hidden_by_holding(free, j, cov))
        held[name] = (NEUTRAL.get(name, float(values[PARAMETER_NAMES.index(name)])), reason)
        fixed[name] = held[name][0]
        free.pop(j)
        x = np.delete(res.x, j)
        if not free:
            raise FitError("nothing left to fit: the sweeps determine no parameter")

    cov = cov + _smooth_error_covariance(problem, res.jac, res.fun)
    cov = cov + _held_parameter_covariance(problem, obj, res, held, starts[0], max(1.0, weighted_chi2))
    for extra in hidden:
        cov = cov + _on_free(extra, free)
    if start_shifts:
        cov = cov + _start_spread_covariance(start_shifts, free)
    final_values = obj.values(res.x[None, :])[0]
    params = _to_params(final_values, polarity, problem.core_loss)
    residuals = problem.complex_residuals(final_values)
    log.debug("fit: chi2/dof %.3g, %d starts, agreement %.2f", chi2, len(runs), agreement)
    return FitOutcome(
        params=params, free=tuple(free), held=dict(held), referred=dict(referred), x=res.x.copy(),
        covariance=cov, residual_variance=chi2,
        sweep_sigma=tuple(float(np.sqrt(np.mean(s ** 2))) for s in sigma), residuals=tuple(residuals),
        converged=bool(res.success), message=str(res.message), evaluations=total_evals,
        points=points, elapsed_s=time.perf_counter() - t0,
        sweep_error_sigma=tuple(np.asarray(s, float) for s in sigma), reduced_chi2=chi2, dof=dof,
        starts=len(runs), start_agreement=agreement, starts_disagree=disagree, start_spread=spread,
    )


def _tie(starts: list[dict], ties) -> list[dict]:
    """Starts with each unseen winding's inductance tied to the seen one: (own, seen, L2/L1)."""
    for own, seen, ratio_sq in ties:
        for st in starts:
            st[own] = st[seen] * (ratio_sq if own == "L2_H" else 1.0 / ratio_sq)
    return starts


def _fits_well(coarse: SweepProblem, run, config) -> bool:
    """Whether a run fits every sweep within RETRY_CHI2 of its noise (χ² per residual)."""
    coarse.core_loss, coarse.polarity = config
    res, obj, _, _ = run
    return bool(np.all(coarse.sweep_chi2(obj.values(res.x[None, :])[0]) <= RETRY_CHI2))


def _global_search(coarse: SweepProblem, free, fixed, groups, seeds=(), memo=None,
                   max_starts=MAX_STARTS) -> tuple[list, list, int]:
    """The best starts run to the end, from `groups` of (core-loss placement, polarity, starts).

    Every start is screened by its cost in one stacked evaluation per group; for each
    polarity `max_starts` starts run Levenberg–Marquardt, each placement's best first,
    then the rest by their screening cost (stopping when two runs agree at the
    noise), the ROBUST_STARTS best go on with robust sweep weights.
    Returns the runs (solution, objective, profile score, sweep weights), each run's
    (placement, polarity) and the evaluations spent. `seeds`: ((placement, polarity),
    x0) run before the starts. `memo` (a dict) keeps each start's run under its
    placement, so a later search takes it instead of running it again. `coarse` is
    left configured as the last run needed.
    """
    memo = {} if memo is None else memo
    ranked, total = {}, 0  # (placement, polarity) -> [(screening cost, start index, x0)], best first
    for placement, pol, starts in groups:
        coarse.core_loss, coarse.polarity = placement, pol
        X0 = np.array([[to_internal(n, st[n]) for n in free] for st in starts])
        screen = _Objective(coarse, free, fixed)
        with np.errstate(all="ignore"):
            costs = 0.5 * np.sum(coarse.residual_rows(screen.values(X0)) ** 2, axis=1)
        total += len(X0)
        ranked[placement, pol] = sorted(((float(c), i, x) for i, (c, x) in enumerate(zip(costs, X0))),
                                        key=lambda c: c[0])
    runs, configs, keys = [], [], []

    def run(config, x0, key=None):
        coarse.core_loss, coarse.polarity = config
        if key in memo:
            runs.append(memo[key])
            evaluations = 0
        else:
            res, obj, score, evaluations, weights = _robust_solve(coarse, free, fixed, x0, START_BUDGET, 0)
            runs.append((res, obj, score, weights))
        configs.append(config)
        keys.append(key)
        return evaluations

    for config, x0 in seeds:
        total += run(config, x0)
    for pol in sorted({pol for _, pol in ranked}):  # each polarity its own starts
        # each placement's best-screened start first, then the others by their screening cost
        lists = [[(c, (placement, p), i, x) for c, i, x in ranked[placement, p]]
                 for placement, p in ranked if p == pol]
        turns = [lst[0] for lst in lists] + sorted((c for lst in lists for c in lst[1:]), key=lambda c: c[0])
        mine = []
        for _, config, i, x0 in turns[:max_starts]:
            total += run(config, x0, (config, i))
            if any(_settled([runs[j], runs[-1]], coarse, [configs[j], config]) for j in mine):
                break
            mine.append(len(runs) - 1)
    # the most promising distinct solutions go on, re-weighted against sweeps the model misses
    for j in _distinct(runs, ROBUST_STARTS):
        if keys[j] in memo:
            continue  # re-weighted already
        coarse.core_loss, coarse.polarity = configs[j]
        res, obj, score, evaluations, weights = _robust_solve(coarse, free, fixed, runs[j][0].x, START_BUDGET,
                                                              ROBUST_ROUNDS)
        total += evaluations
        runs[j] = (res, obj, score, weights)
    memo.update((key, r) for key, r in zip(keys, runs) if key is not None)
    return runs, configs, total


def _distinct(runs, count: int) -> list[int]:
    """Indices of the `count` best runs (by profile score), one per solution: a run ending on the
    key quantities of a better one (AGREEMENT_TOLERANCE) is passed over."""
    chosen, keys = [], []
    for j in sorted(range(len(runs)), key=lambda r: runs[r][2]):
        res, obj = runs[j][:2]
        mine = _key_quantities(obj.values(res.x[None, :])[0])
        if any(all(abs(mine[k] / other[k] - 1.0) <= AGREEMENT_TOLERANCE[k] for k in mine) for other in keys):
            continue
        chosen.append(j)
        keys.append(mine)
        if len(chosen) == count:
            break
    return chosen


def _reweight_sweeps(problem: SweepProblem, values: np.ndarray) -> bool:
    """Robust sweep weights: each sweep counts as if its noise were max(σ, its misfit).

    This is the maximum-likelihood weighting when each sweep may carry an
    error of its own beyond the data noise (a model that misses one sweep, a
    mislabelled termination): a sweep fitted down to its noise keeps weight 1,
    one missed by a factor m in rms counts 1/m. One bad sweep then cannot drag
    the parameters the others pin down, and its misfit widens the standard
    errors of what it touches. The reported χ² stays the one against the data
    noise. Returns True when the weights changed.
    """
    per_sweep = problem.sweep_chi2(values)
    target = 1.0 / np.sqrt(np.maximum(1.0, per_sweep))
    if np.allclose(target, problem.sweep_weights, rtol=0.2):
        return False
    problem.sweep_weights = target
    return True


def _plain_cost(problem: SweepProblem, values: np.ndarray) -> float:
    """½·χ² against the data noise alone (robust weights left out)."""
    return 0.5 * float(np.sum(problem.sweep_chi2(values) * [2 * m.size for m in problem.measured]))


def _profile_score(problem: SweepProblem, values: np.ndarray) -> float:
    """−2 log-likelihood with an unknown error scale per sweep (floored at the data noise), up to a constant.

    Compares solutions found under different robust weights on one scale.
    """
    per_sweep = problem.sweep_chi2(values)
    n = np.array([2 * m.size for m in problem.measured], float)
    return float(np.sum(n * (np.log(np.maximum(per_sweep, 1.0)) + np.minimum(per_sweep, 1.0))))


def _robust_solve(problem, free, fixed, x0, max_nfev, rounds, weights=None):
    """Levenberg–Marquardt from the given sweep weights (default 1), re-weighted (see _reweight_sweeps).

    Returns the solution, its objective, its profile score, the evaluations spent
    and the sweep weights it ended with.
    """
    problem.sweep_weights = np.ones(len(problem.sweeps)) if weights is None else np.array(weights, float)
    res, obj = _solve(problem, free, fixed, x0, max_nfev=max_nfev)
    evaluations = obj.evaluations
    for _ in range(rounds):
        if not _reweight_sweeps(problem, obj.values(res.x[None, :])[0]):
            break
        res, obj = _solve(problem, free, fixed, res.x, max_nfev=max_nfev)
        evaluations += obj.evaluations
    score = _profile_score(problem, obj.values(res.x[None, :])[0])
    return res, obj, score, evaluations, problem.sweep_weights.copy()


def _worst_undetermined(free: list[str], x: np.ndarray, cov: np.ndarray) -> tuple[str | None, bool]:
    """The free parameter to hold next (pressed against its range, else the worst determined)."""
    log_stderr = np.sqrt(np.clip(np.diag(cov), 0, np.inf))
    worst = None
    for j, n in enumerate(free):
        if n in ("L1_H", "L2_H"):
            continue  # inductances with sweeps behind them are always reported
        lo, hi = internal_bounds(n)
        edge = x[j] - lo < EDGE_TOLERANCE_LOG or hi - x[j] < EDGE_TOLERANCE_LOG
        badness = log_stderr[j] if np.isfinite(log_stderr[j]) else np.inf
        rank = (edge, badness)  # a parameter at the edge goes first: it can spoil the others' errors
        if (edge or badness > UNDETERMINED_LOG_STDERR) and (worst is None or rank > worst[0]):
            worst = (rank, n, edge)
    return (None, False) if worst is None else (worst[1], worst[2])


def _start_agreement(runs, best_res, best_obj, problem, free) -> tuple[float, bool, dict, list]:
    """Share of starts ending on the chosen solution; whether a competitive one ends elsewhere.

    Also returns, for each competitive start that ended elsewhere, its shift from
    the chosen solution in internal coordinates (name -> shift), so the standard
    errors can be widened to cover it (_start_spread_covariance).
    """
    best_values = best_obj.values(best_res.x[None, :])[0]
    best = _key_quantities(best_values)
    best_score = _profile_score(problem, best_values)
    agree, disagree, spread, shifts = 0, False, {}, []
    for res, obj, score, _ in runs:
        keys = _key_quantities(obj.values(res.x[None, :])[0])
        dev = {k: abs(keys[k] / best[k] - 1.0) for k in best}
        same = all(dev[k] <= AGREEMENT_TOLERANCE[k] for k in dev)
        agree += same
        if score - best_score <= COMPETITIVE_DELTA_CHI2:
            for k, d in dev.items():
                spread[k] = max(spread.get(k, 0.0), float(d))
            disagree = disagree or not same
            if not same:
                shifts.append(dict(zip(free, (float(d) for d in res.x - best_res.x))))
    return agree / max(len(runs), 1), disagree, spread, shifts


def _settled(runs, problem, configs) -> bool:
    """The first two starts ended on the same key quantities, fitted down to the noise: no
    further start is run (SETTLED_CHI2). Anything worse, or any disagreement, runs them all.
    `configs`: each run's (core-loss placement, polarity)."""
    keys = [_key_quantities(obj.values(res.x[None, :])[0]) for res, obj, _, _ in runs[:2]]
    same = all(abs(keys[1][k] / keys[0][k] - 1.0) <= AGREEMENT_TOLERANCE[k] for k in keys[0])
    if not same:
        return False
    n = np.array([2 * m.size for m in problem.measured], float)
    for (res, obj, _, _), config in zip(runs[:2], configs):
        problem.core_loss, problem.polarity = config
        per_sweep = problem.sweep_chi2(obj.values(res.x[None, :])[0])
        if float(np.sum(per_sweep * n) / np.sum(n)) > SETTLED_CHI2:
            return False
    return True


def _start_spread_covariance(shifts: list[dict], free: list[str]) -> np.ndarray:
    """Covariance covering the starts that fit about as well but end elsewhere.

    Each such start's shift δ from the chosen solution adds δ·δᵀ (in internal
    coordinates): a key quantity the data leave ambiguous between two minima then
    carries a standard error at least as large as the distance between them,
    never a small error bar on one of them. Parameters held since then are left out.
    """
    out = np.zeros((len(free), len(free)))
    for shift in shifts:
        d = np.array([shift.get(n, 0.0) for n in free])
        d = np.where(np.isfinite(d), d, 0.0)
        out += np.outer(d, d)
    return out


def _hidden_by_holding(free: list[str], j: int, cov: np.ndarray) -> dict:
    """What holding free parameter j hides from the others' covariance (name pair -> covariance).

    Left free, parameter j (poorly determined, so about to be held) lets the others
    move along with it: their covariance is the marginal one. Held, it is the
    conditional one, smaller by c·cᵀ/σ_j² (c: their covariance with j). When the
    data cannot pin j, the part it hides is what the others could be off by, so
    it is kept and added back after the fit (_on_free). Unseen directions (NaN,
    infinite) add nothing here: they are held for their own reason.
    """
    var = cov[j, j]
    if not (np.isfinite(var) and var > 0):
        return {}
    c = np.array(cov[:, j], float)
    c = np.where(np.isfinite(c), c, 0.0)
    out = {}
    for a, na in enumerate(free):
        for b, nb in enumerate(free):
            if a != j and b != j:
                out[(na, nb)] = c[a] * c[b] / var
    return out


def _on_free(pairs: dict, free: list[str]) -> np.ndarray:
    """A name-pair covariance (see _hidden_by_holding) on the current free parameters."""
    return np.array([[pairs.get((a, b), 0.0) for b in free] for a in free])


def _to_params(values: np.ndarray, polarity: int, core_loss: str = "magnetizing") -> TransformerParams:
    d = dict(zip(PARAMETER_NAMES, (float(v) for v in values)))
    d["k"] = min(max(d["k"], 1e-9), 1 - 1e-12)
    return TransformerParams(**d, polarity=polarity, core_loss=core_loss)
