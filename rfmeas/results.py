"""Fit results as people and programs read them: estimates with standard errors, fit quality.

Statistics reported (per sweep and overall):
- rms_residual: sqrt(mean |S_model − S_measured|²) over every fitted S element
  and point, unweighted (S units: 0.001 is a −60 dB misfit);
- noise_estimate: the per-component residual rms used to weight that sweep;
- residual_variance: Σ(weighted residual²)/(N − p), about 1 when the model
  describes the data down to its noise;
- residual_correlation: lag-1 autocorrelation of the residuals along
  frequency; white noise gives ≈ 0, a systematic misfit gives ≈ 1;
- worst_band: the tenth of a sweep's log-frequency span with the largest rms.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .fit import FitOutcome, to_physical
from .model.params import PARAMETER_NAMES, TransformerParams
from .sweep import Sweep

# JSON key, internal name, unit for display
PARAMETER_KEYS = (
    ("primary_inductance_H", "L1_H", "H"),
    ("secondary_inductance_H", "L2_H", "H"),
    ("coupling_coefficient", "k", ""),
    ("leakage_inductance_H", "leakage", "H"),
    ("effective_turns_ratio", "ratio", ""),
    ("magnetizing_inductance_H", "Lm", "H"),
    ("mutual_inductance_H", "M", "H"),
    ("primary_resistance_ohm", "R1_ohm", "Ω"),
    ("secondary_resistance_ohm", "R2_ohm", "Ω"),
    ("core_loss_resistance_ohm", "Rc_ohm", "Ω"),
    ("primary_capacitance_F", "C1_F", "F"),
    ("secondary_capacitance_F", "C2_F", "F"),
    ("interwinding_capacitance_F", "C12_F", "F"),
)

LABELS = {
    "primary_inductance_H": "primary inductance L1",
    "secondary_inductance_H": "secondary inductance L2",
    "coupling_coefficient": "coupling k",
    "leakage_inductance_H": "leakage inductance (short-circuit, at primary)",
    "effective_turns_ratio": "effective turns ratio √(L2/L1)",
    "magnetizing_inductance_H": "magnetising inductance Lm = k·L1",
    "mutual_inductance_H": "mutual inductance M",
    "primary_resistance_ohm": "primary resistance R1",
    "secondary_resistance_ohm": "secondary resistance R2",
    "core_loss_resistance_ohm": "core-loss resistance Rc",
    "primary_capacitance_F": "primary capacitance C1",
    "secondary_capacitance_F": "secondary capacitance C2",
    "interwinding_capacitance_F": "interwinding capacitance C12",
}

# the inputs each derived quantity needs
_DERIVED_INPUTS = {
    "leakage": ("L1_H", "k"),
    "ratio": ("L1_H", "L2_H"),
    "Lm": ("L1_H", "k"),
    "M": ("L1_H", "L2_H", "k"),
}


def _derived_value(name: str, v: dict) -> float:
    if name == "leakage":
        return v["L1_H"] * (1.0 - v["k"] ** 2)
    if name == "ratio":
        return math.sqrt(v["L2_H"] / v["L1_H"])
    if name == "Lm":
        return v["k"] * v["L1_H"]
    if name == "M":
        return v["k"] * math.sqrt(v["L1_H"] * v["L2_H"])
    return v[name]


@dataclass(frozen=True)
class Estimate:
    """A fitted or derived quantity: value and standard error (None when not determined)."""

    value: float | None
    stderr: float | None
    determined: bool = True
    held_at: float | None = None
    note: str = ""

    @property
    def relative_stderr(self) -> float | None:
        if self.value in (None, 0) or self.stderr is None:
            return None
        return abs(self.stderr / self.value)

    def to_dict(self) -> dict:
        d = {"value": self.value, "stderr": self.stderr, "determined": self.determined}
        if not self.determined:
            d["held_at"] = self.held_at
        if self.note:
            d["note"] = self.note
        return d


@dataclass(frozen=True)
class SweepQuality:
    label: str
    description: str
    points: int
    rms_residual: float
    noise_estimate: float
    residual_correlation: float
    worst_band: dict

    def to_dict(self) -> dict:
        return dict(self.__dict__)


@dataclass(frozen=True)
class FitResult:
    """Everything the fit says about one transformer."""

    params: TransformerParams
    estimates: dict
    converged: bool
    message: str
    rms_residual: float
    residual_variance: float
    points: int
    free_parameters: int
    evaluations: int
    elapsed_s: float
    sweeps: tuple[SweepQuality, ...]
    warnings: tuple[str, ...]
    outcome: FitOutcome = field(repr=False, compare=False)

    def estimate(self, key: str) -> Estimate:
        return self.estimates[key]

    def fit_dict(self) -> dict:
        worst = max(self.sweeps, key=lambda s: s.worst_band.get("rms", 0.0)) if self.sweeps else None
        return {
            "converged": self.converged,
            "message": self.message,
            "rms_residual": self.rms_residual,
            "residual_variance": self.residual_variance,
            "points": self.points,
            "free_parameters": self.free_parameters,
            "evaluations": self.evaluations,
            "elapsed_s": self.elapsed_s,
            "polarity": "inverting" if self.params.polarity < 0 else "non-inverting",
            "worst_band": None if worst is None else dict(worst.worst_band, sweep=worst.label),
            "sweeps": [s.to_dict() for s in self.sweeps],
        }

    def to_dict(self) -> dict:
        return {
            "parameters": {k: e.to_dict() for k, e in self.estimates.items()},
            "fit": self.fit_dict(),
            "warnings": list(self.warnings),
            "model": self.params.to_dict(),
        }


def _gradient(func, x: np.ndarray, step: float = 1e-6) -> np.ndarray:
    f0 = func(x)
    g = np.empty_like(x)
    for j in range(x.size):
        xp = x.copy()
        xp[j] += step
        g[j] = (func(xp) - f0) / step
    return g


def build_estimates(outcome: FitOutcome) -> dict:
    """Estimates with first-order propagated standard errors for every JSON parameter key."""
    params = outcome.params
    values = {n: getattr(params, n) for n in PARAMETER_NAMES}
    free = list(outcome.free)
    cov = outcome.covariance

    def vals_from_x(x):
        v = dict(values)
        for j, n in enumerate(free):
            v[n] = float(to_physical(n, x[j]))
        return v

    out = {}
    for key, name, _unit in PARAMETER_KEYS:
        inputs = _DERIVED_INPUTS.get(name, (name,))
        held = [n for n in inputs if n in outcome.held]
        if held:
            reasons = sorted({outcome.held[n][1] for n in held})
            held_at = _derived_value(name, values)
            note = "; ".join(reasons)
            if name not in PARAMETER_NAMES:
                note = f"needs {', '.join(held)}: {note}"
            out[key] = Estimate(None, None, False, held_at, note)
            continue
        value = _derived_value(name, values)
        note = outcome.referred.get(name, "")
        g = _gradient(lambda x: _derived_value(name, vals_from_x(x)), outcome.x.copy())
        with np.errstate(invalid="ignore"):  # nan where the data leave a direction unseen
            var = float(g @ cov @ g) if cov is not None else math.nan
        stderr = math.sqrt(var) if math.isfinite(var) and var >= 0 else None
        out[key] = Estimate(float(value), stderr, note=note)
    return out


def _lag1_correlation(r: np.ndarray) -> float:
    parts = []
    for comp in (r.real, r.imag):
        for col in comp.T:
            c = col - col.mean()
            den = float(np.dot(c, c))
            if den > 0 and c.size > 2:
                parts.append(float(np.dot(c[:-1], c[1:]) / den))
    return float(np.mean(parts)) if parts else 0.0


def _worst_band(f_Hz: np.ndarray, r: np.ndarray, bins: int = 10) -> dict:
    logf = np.log10(f_Hz)
    edges = np.linspace(logf[0], logf[-1], bins + 1)
    mag2 = np.mean(np.abs(r) ** 2, axis=1)
    best = None
    for i in range(bins):
        sel = (logf >= edges[i]) & (logf <= edges[i + 1])
        if not np.any(sel):
            continue
        rms = float(np.sqrt(np.mean(mag2[sel])))
        if best is None or rms > best["rms"]:
            best = {"start_Hz": float(10 ** edges[i]), "stop_Hz": float(10 ** edges[i + 1]), "rms": rms}
    return best or {"start_Hz": float(f_Hz[0]), "stop_Hz": float(f_Hz[-1]), "rms": 0.0}


MISFIT_WARNING_RMS = 0.01
"""A sweep whose fit leaves more than this rms (S units, −40 dB) is flagged."""
CORRELATION_WARNING = 0.5


def build_result(outcome: FitOutcome, sweeps: list[Sweep]) -> FitResult:
    """Turn a FitOutcome into a FitResult with quality figures and plain-words warnings."""
    estimates = build_estimates(outcome)
    warnings: list[str] = []
    for s in sweeps:
        warnings.extend(f"{s.label}: {w}" for w in s.warnings)
        if s.forward_only:
            warnings.append(f"{s.label}: forward-only two-port file (S12, S22 not measured): "
                            "only S11 and S21 were fitted")
    qualities = []
    total_sq, total_n = 0.0, 0
    for s, r, sigma in zip(sweeps, outcome.residuals, outcome.sweep_sigma):
        rms = float(np.sqrt(np.mean(np.abs(r) ** 2)))
        total_sq += float(np.sum(np.abs(r) ** 2))
        total_n += r.size
        corr = _lag1_correlation(r)
        q = SweepQuality(s.label, s.describe(), int(s.f_Hz.size), rms, sigma, corr,
                         _worst_band(s.f_Hz, r))
        qualities.append(q)
        if rms > MISFIT_WARNING_RMS:
            warnings.append(
                f"{s.label}: the fitted model misses this sweep by {rms:.3g} rms (worst "
                f"{q.worst_band['start_Hz']:.3g}–{q.worst_band['stop_Hz']:.3g} Hz); "
                "the circuit may not describe it, or the sweep is not what the manifest says")
        elif corr > CORRELATION_WARNING and rms > 1e-6:
            warnings.append(
                f"{s.label}: the residuals follow a pattern along frequency (lag-1 correlation "
                f"{corr:.2f}): the model leaves something out, so standard errors are optimistic")
    for key, est in estimates.items():
        if not est.determined and key in ("primary_inductance_H", "secondary_inductance_H",
                                          "coupling_coefficient", "core_loss_resistance_ohm",
                                          "primary_capacitance_F", "secondary_capacitance_F",
                                          "interwinding_capacitance_F", "primary_resistance_ohm",
                                          "secondary_resistance_ohm"):
            warnings.append(f"{LABELS[key]} not determined: {est.note}")
    # non-convergence is reported, with its reason, by rfmeas.sanity.check_fit
    return FitResult(
        params=outcome.params,
        estimates=estimates,
        converged=outcome.converged,
        message=outcome.message,
        rms_residual=math.sqrt(total_sq / max(total_n, 1)),
        residual_variance=outcome.residual_variance,
        points=outcome.points,
        free_parameters=len(outcome.free),
        evaluations=outcome.evaluations,
        elapsed_s=outcome.elapsed_s,
        sweeps=tuple(qualities),
        warnings=tuple(warnings),
        outcome=outcome,
    )
