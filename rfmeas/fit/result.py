"""Fit results as people and programs read them: estimates with standard errors, fit quality.

The fit is judged against the data's own noise, never against its own residuals
(a noise level read off the residuals calls any misfit "noise"). For each sweep,
σ_e is the per-component error of S element e from rfmeas.measurement.noise.error_sigma: the
trace noise found from neighbouring measured points, with a small systematic floor
in quadrature. r_fe = S_model − S_measured at point f, element e.

Statistics reported (per sweep and overall):
- rms_residual: sqrt(mean_fe |r_fe|²) over every fitted S element and point,
  unweighted (S units: 0.001 is a −60 dB misfit);
- data_noise: sqrt(mean_e σ_e²), the sweep's error level per component (S units);
- misfit_ratio (per sweep): sqrt(mean_fe (Re² r_fe + Im² r_fe)/(2·σ_e²)), the rms
  misfit per component in units of the data's own error. A model that describes
  the data leaves only the noise, ratio ≈ 1 (a little below: the fit absorbs p of
  the n components, E[ratio²] ≈ 1 − p/n); a systematic misfit of a·σ per
  component gives ratio ≈ sqrt(1 + a²);
- misfit_ratio (overall): the same over every point of every sweep, pooled,
  sqrt(Σ_sweeps Σ_fe |r_fe|²/(2σ_e²) / Σ_sweeps F·E);
- grade: of the larger of the overall ratio and the worst sweep's ratio, good
  when ≤ GOOD_MISFIT_RATIO (2), marginal when ≤ POOR_MISFIT_RATIO (5), poor above
  (or when a ratio is not a finite number). The worst sweep counts on its own: a
  sweep of another unit, or a wrong connection, is missed by 7–11× while the other
  three sweeps fit to their noise and the pooled ratio stays near 3. See the
  constants for why these limits;
- missed sweeps: misfit_ratio > POOR_MISFIT_RATIO, or > GOOD_MISFIT_RATIO and
  more than MISSED_SWEEP_FACTOR times the median ratio of the other sweeps;
- worst_band: the tenth of a sweep's log-frequency span with the largest rms
  (S units); worst_misfit_band the same in misfit-ratio units;
- noise_estimate: the per-component noise level the solver weighted that sweep by
  (the solver's figure, not used to judge the fit);
- residual_variance: the solver's Σ(weighted residual²)/(N − p), likewise;
- residual_correlation: lag-1 autocorrelation of the residuals along
  frequency; white noise gives ≈ 0, a systematic misfit gives ≈ 1.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from rfmeas.fit.propagation import checked_stderr, propagate_all  # noqa: F401 (checked_stderr: re-exported)
from rfmeas.fit.rules import GOOD_MISFIT_RATIO, MISSED_SWEEP_FACTOR, POOR_MISFIT_RATIO, SYSTEMATIC_CORRELATION
from rfmeas.fit.solver import FitOutcome
from rfmeas.model.params import PARAMETER_NAMES, TransformerParams
from rfmeas.measurement.noise import error_sigma
from rfmeas.measurement.sweep import Sweep
from rfmeas.labels import PARAMETER_LABELS, symbols

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

LABELS = {key: text for key, (text, _unit) in PARAMETER_LABELS.items()}  # one vocabulary: rfmeas.labels

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
    stderr_note: str = ""   # why a determined value has no standard error


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
        if self.stderr_note:
            d["stderr_note"] = self.stderr_note
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
    data_noise: float = math.nan
    misfit_ratio: float = math.nan
    worst_misfit_band: dict = field(default_factory=dict)

    def to_dict(self) -> dict:
        return dict(self.__dict__)


GRADES = ("good", "marginal", "poor")


@dataclass(frozen=True)
class FitQuality:
    """The fit judged against the data's own noise (see the module docstring for the formulas)."""

    grade: str
    misfit_ratio: float
    sweeps: dict                    # label -> misfit ratio
    missed: tuple[dict, ...] = ()   # {"sweep", "misfit_ratio", "worst_band": {start_Hz, stop_Hz, misfit_ratio}}

    @property
    def stderr_describes_error(self) -> bool:
        """False when the misfit is so far above the noise that standard errors mean nothing."""
        return self.grade != "poor"

    def summary(self) -> str:
        """One sentence: the ratio, the grade and what it means."""
        if not math.isfinite(self.misfit_ratio):
            return ("the misfit could not be measured against the data's noise (poor): the standard errors "
                    "do not describe the error, and no design verdict is given")
        text = f"misfit {self.misfit_ratio:.3g}× the data's own noise"
        if self.grade == "good":
            return text + f" (≤ {GOOD_MISFIT_RATIO:g}× is good)"
        if self.grade == "marginal":
            return text + (f" (marginal, ≤ {POOR_MISFIT_RATIO:g}×): the values stand, the standard errors "
                           "are optimistic")
        return text + (f" (poor, above {POOR_MISFIT_RATIO:g}×): the model does not describe the data; the "
                       "standard errors do not describe the error, and no design verdict is given")

    def to_dict(self) -> dict:
        return {
            "grade": self.grade,
            "misfit_ratio": self.misfit_ratio,
            "sweeps": dict(self.sweeps),
            "missed_sweeps": [dict(m) for m in self.missed],
            "noise_source": "data",
            "thresholds": {"good": GOOD_MISFIT_RATIO, "marginal": POOR_MISFIT_RATIO},
            "stderr_describes_error": self.stderr_describes_error,
            "summary": self.summary(),
        }


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
    quality: FitQuality = field(default_factory=lambda: FitQuality("poor", math.nan, {}))

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
            "quality": self.quality.to_dict(),
        }

    def parameters_dict(self) -> dict:
        """Every estimate's dict; when the fit is poor, each standard error is flagged as meaningless."""
        out = {k: e.to_dict() for k, e in self.estimates.items()}
        if not self.quality.stderr_describes_error:
            for d in out.values():
                if d["stderr"] is not None:
                    d["stderr_describes_error"] = False
        return out

    def to_dict(self) -> dict:
        return {
            "parameters": self.parameters_dict(),
            "fit": self.fit_dict(),
            "warnings": list(self.warnings),
            "model": self.params.to_dict(),
        }


def build_estimates(outcome: FitOutcome) -> dict:
    """Estimates with first-order propagated standard errors for every JSON parameter key
    (rfmeas.fit.propagation); a quantity that needs a held parameter is reported as not determined."""
    values = {n: getattr(outcome.params, n) for n in PARAMETER_NAMES}
    names = {key: name for key, name, _unit in PARAMETER_KEYS}
    needs = {key: _DERIVED_INPUTS.get(name, (name,)) for key, name in names.items()}
    propagated = propagate_all(
        outcome, lambda p: {key: _derived_value(name, {n: getattr(p, n) for n in PARAMETER_NAMES})
                            for key, name in names.items()}, needs)
    out = {}
    for key, name in names.items():
        p = propagated[key]
        if p.held:
            note = "; ".join(sorted({outcome.held[n][1] for n in p.held}))
            if name not in PARAMETER_NAMES:
                note = f"needs {symbols(p.held)}: {note}"
            out[key] = Estimate(None, None, False, _derived_value(name, values), note)
            continue
        out[key] = Estimate(float(p.value), p.stderr, note=outcome.referred.get(name, ""), stderr_note=p.reason)
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


def _worst_band(f_Hz: np.ndarray, r: np.ndarray, bins: int = 10, key: str = "rms") -> dict:
    """The tenth of the log-frequency span where the rms of |r| (averaged over elements) is largest."""
    logf = np.log10(f_Hz)
    edges = np.linspace(logf[0], logf[-1], bins + 1)
    mag2 = np.mean(np.abs(r) ** 2, axis=1)
    best = None
    for i in range(bins):
        sel = (logf >= edges[i]) & (logf <= edges[i + 1])
        if not np.any(sel):
            continue
        rms = float(np.sqrt(np.mean(mag2[sel])))
        if best is None or rms > best[key]:
            best = {"start_Hz": float(10 ** edges[i]), "stop_Hz": float(10 ** edges[i + 1]), key: rms}
    return best or {"start_Hz": float(f_Hz[0]), "stop_Hz": float(f_Hz[-1]), key: 0.0}



def sweep_misfit(measured: np.ndarray, residual: np.ndarray) -> tuple[np.ndarray, float, float]:
    """(residual in units of the data's error, data noise, misfit ratio) of one sweep.

    `measured` and `residual` have shape (F, E); the error σ_e of each element comes from the
    measured data alone (rfmeas.measurement.noise.error_sigma). The normalised residual r/(√2·σ_e) has
    rms 1 per point when the misfit is the noise.
    """
    sigma = error_sigma(measured)
    scaled = np.asarray(residual) / (math.sqrt(2.0) * sigma[None, :])
    with np.errstate(invalid="ignore", over="ignore"):
        ratio = float(np.sqrt(np.mean(np.abs(scaled) ** 2)))
    return scaled, float(np.sqrt(np.mean(sigma**2))), ratio


def grade_of(ratio: float) -> str:
    """good / marginal / poor for an overall misfit ratio (poor when it is not a finite number)."""
    if not math.isfinite(ratio) or ratio > POOR_MISFIT_RATIO:
        return "poor"
    return "good" if ratio <= GOOD_MISFIT_RATIO else "marginal"


def missed_sweeps(ratios: dict) -> list[str]:
    """Labels of the sweeps the model misses: far above the noise, or far above the other sweeps."""
    out = []
    for label, ratio in ratios.items():
        others = [r for other, r in ratios.items() if other != label and math.isfinite(r)]
        typical = float(np.median(others)) if others else math.nan
        if not math.isfinite(ratio) or ratio > POOR_MISFIT_RATIO or (
                ratio > GOOD_MISFIT_RATIO and math.isfinite(typical) and ratio > MISSED_SWEEP_FACTOR * typical):
            out.append(label)
    return out


def fit_quality(qualities, sizes) -> FitQuality:
    """The grade of a fit from its sweeps' misfit ratios (SweepQuality), pooled over every fitted
    value: `sizes` holds each sweep's count of complex values, points × elements."""
    count = float(sum(sizes))
    total = sum(q.misfit_ratio**2 * n for q, n in zip(qualities, sizes))
    ratio = math.sqrt(total / count) if count else math.nan
    ratios = {q.label: q.misfit_ratio for q in qualities}
    missed_labels = missed_sweeps(ratios)
    worst = max(ratios.values(), key=lambda r: r if math.isfinite(r) else math.inf, default=ratio)
    grade = max(grade_of(ratio), grade_of(worst), key=GRADES.index)
    missed = tuple({"sweep": q.label, "misfit_ratio": q.misfit_ratio, "worst_band": dict(q.worst_misfit_band)}
                   for q in qualities if q.label in missed_labels)
    return FitQuality(grade, ratio, ratios, missed)


def _missed_warning(q: SweepQuality) -> str:
    band = q.worst_misfit_band
    where = (f"worst {band['start_Hz']:.3g}–{band['stop_Hz']:.3g} Hz, {band['misfit_ratio']:.3g}×"
             if band and math.isfinite(band.get("misfit_ratio", math.nan)) else "no band stands out")
    ratio = f"{q.misfit_ratio:.3g}×" if math.isfinite(q.misfit_ratio) else "by a non-finite amount from"
    return (f"{q.label}: the model misses this sweep: misfit {ratio} the data's own noise "
            f"({q.rms_residual:.3g} rms against a noise of {q.data_noise:.2g}; {where}); the circuit may "
            "not describe it, or the sweep is not what the manifest says")


def build_result(outcome: FitOutcome, sweeps: list[Sweep]) -> FitResult:
    """Turn a FitOutcome into a FitResult with quality figures and plain-words warnings."""
    estimates = build_estimates(outcome)
    warnings: list[str] = []
    for s in sweeps:
        warnings.extend(f"{s.label}: {w}" for w in s.warnings)
        if s.forward_only:
            warnings.append(f"{s.label}: forward-only two-port file (S12, S22 not measured): "
                            "only S11 and S21 were fitted")
    qualities, sizes = [], []
    total_sq, total_n = 0.0, 0
    for s, r, sigma in zip(sweeps, outcome.residuals, outcome.sweep_sigma):
        rms = float(np.sqrt(np.mean(np.abs(r) ** 2)))
        total_sq += float(np.sum(np.abs(r) ** 2))
        total_n += r.size
        sizes.append(r.size)
        scaled, noise, ratio = sweep_misfit(s.measured(), r)
        qualities.append(SweepQuality(
            s.label, s.describe(), int(s.f_Hz.size), rms, sigma, _lag1_correlation(r), _worst_band(s.f_Hz, r),
            data_noise=noise, misfit_ratio=ratio,
            worst_misfit_band=_worst_band(s.f_Hz, scaled, key="misfit_ratio")))
    quality = fit_quality(qualities, sizes)
    missed = {m["sweep"] for m in quality.missed}
    for q in qualities:
        if q.label in missed:
            warnings.append(_missed_warning(q))
        elif q.residual_correlation > SYSTEMATIC_CORRELATION and q.misfit_ratio > GOOD_MISFIT_RATIO:
            warnings.append(
                f"{q.label}: the residuals follow a pattern along frequency (lag-1 correlation "
                f"{q.residual_correlation:.2f}, misfit {q.misfit_ratio:.3g}× the noise): the model leaves "
                "something out, so standard errors are optimistic")
    if quality.grade == "poor":
        warnings.append(f"the fit is poor: {quality.summary()}")
    for key, est in estimates.items():
        if not est.determined and key in ("primary_inductance_H", "secondary_inductance_H",
                                          "coupling_coefficient", "core_loss_resistance_ohm",
                                          "primary_capacitance_F", "secondary_capacitance_F",
                                          "interwinding_capacitance_F", "primary_resistance_ohm",
                                          "secondary_resistance_ohm"):
            warnings.append(f"{LABELS[key]} not determined: {est.note}")
    # non-convergence is reported, with its reason, by rfmeas.fit.checks.check_fit
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
        quality=quality,
    )
