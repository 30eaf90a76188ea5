"""First-order error propagation of any function of the fitted circuit: the one routine for
derived quantities (rfmeas.fit.result) and figures of merit (rfmeas.judge.figures).

The fit keeps its covariance in internal coordinates (rfmeas.fit.solver: log of each value,
log(1 − k) for the coupling). `physical_covariance` converts it once, to the physical
units of the free parameters: C_p = D·C_x·D with D = diag(∂p/∂x) (p for a logarithm,
−(1 − k) for the coupling), read off the solver's own `to_physical`.

A quantity q = f(params) then has var(q) = g·C_p·gᵀ, g = ∂f/∂p by central differences
in physical units. Step rule: each free parameter moves by ±STEP_RELATIVE of its own
value, the coupling by ±STEP_RELATIVE of 1 − k (so k never reaches 1); held parameters
stay where the fit held them (their spread is already in C_p, carried into the free
ones by the solver); the polarity and the core-loss placement are kept.

No number is given when it would mislead: `stderr` is None with a `reason` when the fit
gave no covariance, when the quantity needs a held parameter (`needs`), when it cannot be
evaluated next to the fitted values, when a parameter it depends on lies along a direction
the sweeps do not see (a non-finite variance), or when the variance is zero or not finite.
A parameter the quantity does not depend on (gradient exactly zero) is left out, so an
unseen direction spoils only the quantities that move along it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from rfmeas.fit.solver import to_physical
from rfmeas.labels import symbols

STEP_RELATIVE = 1e-5
"""Central-difference step: this fraction of each value (of 1 − k for the coupling)."""


@dataclass(frozen=True)
class Propagated:
    """A quantity at the fitted values and its first-order standard error (None, with a reason)."""

    value: float
    stderr: float | None
    reason: str = ""               # why stderr is None
    held: tuple[str, ...] = ()     # held parameters the quantity needs

    def to_dict(self) -> dict:
        return {"value": self.value, "stderr": self.stderr, "reason": self.reason, "held": list(self.held)}


def checked_stderr(value: float, stderr: float | None, no_covariance: bool = False) -> tuple[float | None, str]:
    """(standard error, "") when it is a usable number, else (None, why).

    A standard error of exactly zero (or one below 1e-12 of the value, floating-point dust),
    NaN or infinity describes no measurement: it must never print as a confident number.
    """
    if no_covariance:
        return None, "no standard error: the fit gave no covariance"
    if stderr is None or not math.isfinite(stderr):
        return None, "no standard error: the sweeps leave this quantity's direction unseen"
    if stderr <= 1e-12 * abs(value):
        return None, "no standard error: the fit's covariance gives 0, which no measurement supports"
    return stderr, ""


def physical_covariance(outcome) -> tuple[tuple[str, ...], np.ndarray | None]:
    """(free parameter names, their covariance in physical units) from the fit's internal one.

    Entries the solver marks as unseen (NaN, infinite variance) stay non-finite.
    """
    free = tuple(outcome.free)
    if outcome.covariance is None:
        return free, None
    x = np.asarray(outcome.x, dtype=float)
    # complex step: ∂p/∂x exactly, from the solver's own definition of the coordinates
    h = 1e-30
    d = np.array([np.imag(to_physical(name, x[j] + 1j * h)) / h for j, name in enumerate(free)])
    cov = np.asarray(outcome.covariance, dtype=float)
    with np.errstate(invalid="ignore"):
        return free, cov * np.outer(d, d)


def _step(name: str, value: float) -> float:
    scale = 1.0 - value if name == "k" else abs(value)
    return STEP_RELATIVE * (scale if scale > 0 else 1.0)


def propagate_all(outcome, func, needs: dict | None = None) -> dict[str, Propagated]:
    """Every entry of `func(params) -> dict[str, float]` at the fit, with its standard error.

    `needs` maps a key to the parameters it needs: a key that needs a held parameter gets
    no standard error (its `held` names them). Keys missing from a perturbed evaluation,
    or an evaluation that raises ValueError or ArithmeticError, give no standard error.
    """
    params = outcome.params
    base = {k: float(v) for k, v in func(params).items()}
    free, cov = physical_covariance(outcome)
    keys = list(base)
    jac = np.zeros((len(keys), len(free)))
    failures: list[str] = []
    for j, name in enumerate(free):
        value = float(getattr(params, name))
        h = _step(name, value)
        sides = []
        for sign in (1.0, -1.0):
            try:
                d = func(params.replace(**{name: value + sign * h}))
            except (ValueError, ArithmeticError) as exc:
                failures.append(f"moving {name} by {sign * h:+.3g}: {exc}")
                d = {}
            sides.append(np.array([float(d.get(k, math.nan)) for k in keys]))
        with np.errstate(invalid="ignore"):
            jac[:, j] = (sides[0] - sides[1]) / (2.0 * h)
    held_reasons = dict(getattr(outcome, "held", {}) or {})
    out = {}
    for i, key in enumerate(keys):
        value = base[key]
        held = tuple(n for n in (needs or {}).get(key, ()) if n in held_reasons)
        if held:
            reasons = "; ".join(sorted({held_reasons[n][1] for n in held}))
            out[key] = Propagated(value, None, f"no standard error: needs {symbols(held)}, held ({reasons})",
                                  held)
            continue
        if not math.isfinite(value):
            out[key] = Propagated(value, None, "no standard error: the quantity has no finite value")
            continue
        if cov is None:
            out[key] = Propagated(value, *checked_stderr(value, None, no_covariance=True))
            continue
        g = jac[i]
        if not np.all(np.isfinite(g)):
            why = f" ({failures[0]})" if failures else ""
            out[key] = Propagated(value, None, "no standard error: the quantity cannot be evaluated next to "
                                               f"the fitted values{why}")
            continue
        used = g != 0
        sub = cov[np.ix_(used, used)]
        with np.errstate(invalid="ignore", over="ignore"):
            var = float(g[used] @ sub @ g[used]) if np.any(used) else 0.0
        stderr = math.sqrt(var) if math.isfinite(var) and var >= 0 else None
        out[key] = Propagated(value, *checked_stderr(value, stderr))
    return out


def propagate(outcome, func, needs: tuple[str, ...] = ()) -> Propagated:
    """A scalar `func(params) -> float` at the fit, with its first-order standard error."""
    return propagate_all(outcome, lambda p: {"q": func(p)}, {"q": tuple(needs)})["q"]
