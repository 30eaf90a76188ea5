"""One joint least-squares fit of the equivalent circuit to every sweep of a transformer.

The residual is the complex difference between modelled and measured S
parameters (real and imaginary parts), weighted per sweep by its own noise
level, which is estimated from a first pass. Working in S rather than Z
weights each point by how well a 50-ohm instrument resolved it.

Parameters are fitted in internal coordinates: the logarithm of each positive
value, and log(1 − k) for the coupling, so leakage of 0.1 % and 10 % are
equally easy to reach. Standard errors come from the Jacobian,
cov = s²·(JᵀJ)⁻¹ with s² the weighted residual variance per degree of freedom,
and are carried to derived quantities by first-order propagation.

A parameter the sweeps cannot pin down (relative standard error above
`UNDETERMINED_LOG_STDERR` in log terms, or pressed against the edge of its
range) is held at a neutral value — capacitances and winding resistances at
zero, core-loss resistance at infinity — and reported as not determined.
"""

from __future__ import annotations

import logging
import math
import time
from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares

from .errors import FitError
from .methods import s_from_impedance
from .fit_start import estimate_start, sweeps_that_see
from .model.circuit import driving_point_admittance, reflection_from_admittance, s_from_y, \
    termination_admittance, y_elements
from .model.params import PARAMETER_NAMES, TransformerParams
from .sweep import Sweep

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
"""The first pass uses about this many points per sweep; the second uses them all."""
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
    """Raw numerical outcome of the fit; rfmeas.results turns it into a report."""

    params: TransformerParams
    free: tuple[str, ...]                 # fitted parameters
    held: dict                            # name -> (value held at, reason)
    referred: dict                        # name -> note: fitted, but only as referred to the other side
    x: np.ndarray                         # internal coordinates of the free parameters
    covariance: np.ndarray | None         # internal coordinates, free parameters
    residual_variance: float              # s², weighted residual variance per degree of freedom
    sweep_sigma: tuple[float, ...]        # estimated noise of each sweep (S units, per component)
    residuals: tuple[np.ndarray, ...]     # complex model − measured per sweep, shape (F, E)
    converged: bool
    message: str
    evaluations: int
    points: int
    elapsed_s: float


class SweepProblem:
    """Vectorised residuals of a set of sweeps for stacks of parameter vectors."""

    def __init__(self, sweeps: list[Sweep], polarity: int, stride: int = 1):
        """`stride` > 1 keeps every stride-th point: a cheap problem for the first pass."""
        self.sweeps = sweeps
        self.polarity = polarity
        self.measured = [s.measured()[::stride] for s in sweeps]
        self.weights = np.ones(len(sweeps))
        # sweeps sharing a frequency grid share one evaluation of the network
        self._grids: dict[bytes, int] = {}
        self.grid_of_sweep = []
        self.grids = []
        for s in sweeps:
            f = s.f_Hz[::stride]
            key = f.tobytes()
            if key not in self._grids:
                self._grids[key] = len(self.grids)
                self.grids.append(f)
            self.grid_of_sweep.append(self._grids[key])

    def predict(self, values: np.ndarray) -> list[np.ndarray]:
        """Model S elements per sweep for parameter rows `values` (m, 9): list of (m, F, E)."""
        cols = [values[:, i, None] for i in range(values.shape[1])]
        ys = [y_elements(f[None, :], *cols, polarity=self.polarity) for f in self.grids]
        out = []
        for sweep, g in zip(self.sweeps, self.grid_of_sweep):
            y11, y12, y22 = ys[g]
            if sweep.port1 == "secondary":
                y11, y22 = y22, y11
            if sweep.is_two_port:
                z01, z02 = sweep.z0_ohm
                s11, s21, s12, s22 = s_from_y(y11, y12, y22, z01, z02)
                parts = {"S11": s11, "S21": s21, "S12": s12, "S22": s22}
                out.append(np.stack([parts[e] for e in sweep.elements], axis=-1))
            else:
                yin = driving_point_admittance(y11, y12, y22, termination_admittance(sweep.termination))
                if sweep.is_through_method:
                    out.append(s_from_impedance(sweep.method, 1.0 / yin, sweep.z0_ohm[0])[..., None])
                else:
                    out.append(reflection_from_admittance(yin, sweep.z0_ohm[0])[..., None])
        return out

    def residual_rows(self, values: np.ndarray) -> np.ndarray:
        """Weighted real residuals, shape (m, N); a network that cannot be evaluated scores badly."""
        parts = []
        with np.errstate(all="ignore"):
            for model, meas, w in zip(self.predict(values), self.measured, self.weights):
                d = (model - meas[None]) * w
                parts.append(d.real.reshape(d.shape[0], -1))
                parts.append(d.imag.reshape(d.shape[0], -1))
        rows = np.concatenate(parts, axis=1)
        if np.isfinite(rows).all():
            return rows
        return np.nan_to_num(rows, nan=_BAD_RESIDUAL, posinf=_BAD_RESIDUAL, neginf=-_BAD_RESIDUAL)

    def complex_residuals(self, values: np.ndarray) -> list[np.ndarray]:
        return [model[0] - meas for model, meas in zip(self.predict(values[None]), self.measured)]


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

    def values(self, X: np.ndarray) -> np.ndarray:
        rows = np.repeat(self.base[None, :], X.shape[0], axis=0)
        for j, (name, i) in enumerate(zip(self.free, self.index)):
            lo, hi = internal_bounds(name)
            upper = hi if name == "k" else hi + _MARGIN  # k itself must stay positive
            rows[:, i] = to_physical(name, np.clip(X[:, j], lo - _MARGIN, upper))
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
    """s²·(JᵀJ)⁻¹; directions with no information get an infinite variance.

    Decomposes the small n×n normal matrix (columns scaled to unit norm, which
    keeps it well conditioned) rather than the tall N×n Jacobian: an SVD of the
    Jacobian goes through multi-threaded LAPACK, which on a busy two-core
    machine can take longer than the whole fit.
    """
    jtj = jac.T @ jac
    norm = np.sqrt(np.clip(np.diag(jtj), 0.0, np.inf))
    scale = np.where(norm > 0, norm, 1.0)
    w, v = np.linalg.eigh(jtj / np.outer(scale, scale))
    tiny = w <= w[-1] * _TINY_EIGENVALUE if w.size else w
    inv = np.where(tiny, 0.0, 1.0 / np.where(tiny, 1.0, w))
    cov = (v * inv) @ v.T / np.outer(scale, scale)
    # a parameter that moves along a direction the data do not see has no bounded variance
    unseen = np.any(np.abs(v[:, tiny]) > 1e-6, axis=1) if np.any(tiny) else np.zeros(len(w), bool)
    cov[unseen, :] = np.nan
    cov[:, unseen] = np.nan
    cov[unseen, unseen] = np.inf
    return cov * residual_variance


def fit_sweeps(sweeps: list[Sweep]) -> FitOutcome:
    """Fit the equivalent circuit to all `sweeps` at once."""
    t0 = time.perf_counter()
    if not sweeps:
        raise FitError("no sweeps to fit")
    start_values, polarity = estimate_start(sweeps)
    problem = SweepProblem(sweeps, polarity)
    stride = max(1, min(s.f_Hz.size for s in sweeps) // COARSE_POINTS)
    coarse = SweepProblem(sweeps, polarity, stride) if stride > 1 else problem
    points = sum(m.size for m in problem.measured) * 2

    held: dict[str, tuple[float, str]] = {}
    referred: dict[str, str] = {}
    for winding, own, ref, side in (("secondary", "L2_H", ("R2_ohm", "C2_F"), "primary"),
                                    ("primary", "L1_H", ("R1_ohm", "C1_F"), "secondary")):
        if sweeps_that_see(sweeps, winding):
            continue
        # The unseen winding is modelled 1:1 (its inductance held equal to the seen one), so
        # its resistance and capacitance come out referred to the seen side; C12 cannot be
        # told from the referred capacitance and is held at zero.
        seen = "L1_H" if own == "L2_H" else "L2_H"
        start_values[own] = start_values[seen]
        held[own] = (start_values[own], f"no sweep sees the {winding} winding's inductance")
        held["C12_F"] = (NEUTRAL["C12_F"], f"needs the {winding} winding's inductance to be referred")
        for name in ref:
            referred[name] = f"referred to the {side} (the turns ratio is not measured)"
    current = dict(start_values)
    total_evals = 0
    k_starts = [current["k"]]
    if "k" not in held and not any(s.termination == "short" for s in sweeps if not s.is_two_port):
        k_starts = sorted({current["k"], 0.95, 0.99, 0.998})

    for _round in range(len(PARAMETER_NAMES)):
        free = [n for n in PARAMETER_NAMES if n not in held]
        if len(free) == 0:
            raise FitError("nothing left to fit: the sweeps determine no parameter")
        fixed = {n: v for n, (v, _) in held.items()}
        # first pass on a thinned problem (cheap); several starts get a short budget
        best = None
        for k0 in k_starts:
            trial = dict(current, k=k0) if "k" in free else dict(current)
            x0 = np.array([to_internal(n, trial[n]) for n in free])
            res, obj = _solve(coarse, free, fixed, x0, max_nfev=40 if len(k_starts) > 1 else 200)
            total_evals += obj.evaluations
            if best is None or res.cost < best[0].cost:
                best = (res, obj)
        res, obj = best
        if len(k_starts) > 1:
            res, obj = _solve(coarse, free, fixed, res.x)
            total_evals += obj.evaluations
        k_starts = [float(to_physical("k", res.x[free.index("k")]))] if "k" in free else k_starts
        # second pass on every point, each sweep weighted by its own noise level
        values = obj.values(res.x[None, :])[0]
        sigma = _sweep_sigma(problem, values)
        problem.weights = 1.0 / sigma
        res, obj = _solve(problem, free, fixed, res.x)
        total_evals += obj.evaluations
        dof = max(points - len(free), 1)
        residual_variance = float(2.0 * res.cost / dof)
        cov = _covariance(res.jac, residual_variance)
        log_stderr = np.sqrt(np.clip(np.diag(cov), 0, np.inf))
        for j, n in enumerate(free):
            current[n] = float(to_physical(n, res.x[j]))
        lb, ub = zip(*(internal_bounds(n) for n in free))
        at_edge = [(j, n) for j, n in enumerate(free)
                   if res.x[j] - lb[j] < 1e-3 or ub[j] - res.x[j] < 1e-3]
        worst = None
        for j, n in enumerate(free):
            if n in ("L1_H", "L2_H"):
                continue  # inductances with sweeps behind them are always reported
            edge = (j, n) in at_edge
            badness = log_stderr[j] if np.isfinite(log_stderr[j]) else np.inf
            # a parameter at the edge of its range goes first: it can spoil the others' errors
            rank = (edge, badness)
            if (edge or badness > UNDETERMINED_LOG_STDERR) and (worst is None or rank > worst[0]):
                worst = (rank, n, edge)
        if worst is None:
            break
        _, name, edge = worst
        reason = ("pressed against the edge of its range: too small (or too large) to show in these sweeps"
                  if edge else "the sweeps do not constrain it")
        held[name] = (NEUTRAL.get(name, current[name]), reason)
        current[name] = held[name][0]

    final_values = obj.values(res.x[None, :])[0]
    params = _to_params(final_values, polarity)
    residuals = problem.complex_residuals(final_values)
    return FitOutcome(
        params=params, free=tuple(free), held=dict(held), referred=dict(referred), x=res.x.copy(),
        covariance=cov, residual_variance=residual_variance,
        sweep_sigma=tuple(float(s) for s in sigma), residuals=tuple(residuals),
        converged=bool(res.success), message=str(res.message), evaluations=total_evals,
        points=points, elapsed_s=time.perf_counter() - t0,
    )


def _sweep_sigma(problem: SweepProblem, values: np.ndarray) -> np.ndarray:
    sig = []
    for r in problem.complex_residuals(values):
        s = float(np.sqrt(np.mean(np.abs(r) ** 2) / 2.0))
        sig.append(max(s, 1e-9))
    return np.array(sig)


def _to_params(values: np.ndarray, polarity: int) -> TransformerParams:
    d = dict(zip(PARAMETER_NAMES, (float(v) for v in values)))
    d["k"] = min(max(d["k"], 1e-9), 1 - 1e-12)
    return TransformerParams(**d, polarity=polarity)
