"""What is this core? Complex permeability of a wound core from test windings' impedance.

The single-winding method (IEC 62044-2 scope): a few turns on the core, the winding's
impedance swept, and (rfmeas.magnetics.dispersion)

    Z(f) = Rs + jω·Ls + Zc/(1 + jω·Cw·Zc),   Zc = jω·µ(f)·µ0·N²/C1,   µ = µ' − jµ''

How the answer is read off, in order of trust:

1. The error model. A small VNA's residual calibration errors (VnaErrorModel: directivity,
   source match, tracking) give each point's impedance error σ_Z. It decides which points
   resolve the core (the trustworthy band) and weighs the fit; the fit's own residuals never
   set it.
2. The leads. A series lead inductance and resistance do not scale with N². They are
   measured (two or more turn counts, or a sweep of the shorted leads, or given), else
   fitted from the dispersion of one sweep where it is visible, else left in and warned of.
3. The dispersion model: relaxation, damped resonance, or their sum, with Rs, Ls and Cw,
   fitted on a grid thinned to equal weight per decade; the form with the lowest Bayesian
   information criterion (BIC) is kept. Parameters at a bound are reported as not determined.
4. µi is read from the data: the robust plateau (weighted median) of the measured µ' over
   the lowest well-resolved band where µ'' ≪ µ' and µ' is flat. Only where the data hold no
   such plateau is the model's µ(f → 0) given, and labelled an extrapolation.
5. µ'(f), µ''(f) per point from the data with Rs, Ls, Cw removed; the µ'' peak from the data
   when it lies inside the trustworthy band, else from the model when the model's peak lies
   inside the sweep, else not given.

Everything above the I/O section is pure numerics on numpy arrays.
"""

from __future__ import annotations

import logging
import math
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from rfmeas.errors import FitError, InputError
from rfmeas.magnetics import CoreGeometry
from rfmeas.io.jsonio import SCHEMA_VERSION
from rfmeas.magnetics.dispersion import (
    DEFAULT_VNA_ERRORS,
    MODEL_FORMS,
    MODEL_PARAMETERS,
    MODELS,
    RELAXATION,
    RESONANCE,
    SUM,
    VnaErrorModel,
    air_core_inductance_H,
    first_run,
    log_thin_indices,
    longest_run,
    model_permeability,
    permeability_from_impedance,
    static_permeability,
    weighted_median,
    winding_impedance,
)
from rfmeas.measurement.noise import trace_noise_sigma
from rfmeas.model.methods import (
    METHODS, REFLECTION, impedance_from_s, impedance_sensitivity, method_advice, s_from_impedance)

log = logging.getLogger(__name__)

TRUST_RELATIVE_UNCERTAINTY = 0.10   # trustworthy: the error model resolves µ to 10 %
ROUGH_RELATIVE_UNCERTAINTY = 0.30   # a model's µ'' peak is given only where the data resolve µ to 30 %
PLATEAU_RELATIVE_UNCERTAINTY = 0.10  # a plateau point: µ' resolved to 10 % by the error model
PLATEAU_MIN_IMPEDANCE_OHM = 0.5     # below this a small VNA's R and X are not to be trusted (common practice)
PLATEAU_LOSS_RATIO = 0.10           # µ'' ≪ µ': µ''/µ' below this
PLATEAU_MAX_RELATIVE_UNCERTAINTY = 0.05  # a plateau resolved worse than this is only shown beside the model
PLATEAU_FLATNESS = 0.03             # µ' may change by at most 3 % across the plateau band
PLATEAU_MIN_POINTS = 3
SERIES_INDUCTANCE_BIC = 10.0       # a single sweep's fitted series inductance is kept when dropping it
                                   # costs more BIC than this ("very strong" evidence, common practice)
POINTS_PER_DECADE = 50.0            # the fit's grid: at most this many points per decade
POOR_MISFIT = 3.0                   # rms residual / error model above this: the fit is poor
_BOUND_MARGIN = 1e-3                # a log parameter this close to a bound is at the bound
_MAX_LOG_STDERR = 0.7               # a log parameter less certain than a factor 2 is not determined
_NH, _PF = 1e-9, 1e-12


def _clean(x):
    return None if x is None or not np.isfinite(x) else float(x)


def _estimate(value, stderr) -> dict:
    return {"value": _clean(value), "stderr": _clean(stderr)}


# ---------------------------------------------------------------- results

@dataclass(frozen=True)
class ShortCurve:
    """The shorted leads' impedance as swept (smoothed along frequency), for removal point by point.

    Taking the measured curve off, not just Rl + jωLl, also takes off the calibration residue the
    short shares with a low-impedance winding swept with the same calibration.
    """

    f_Hz: np.ndarray
    impedance_ohm: np.ndarray
    noise_ohm: np.ndarray  # standard uncertainty of each smoothed point (trace noise only)

    def at(self, f_Hz):
        """(impedance, its noise, inside): the curve on `f_Hz`, and where `f_Hz` lies inside its sweep."""
        f = np.asarray(f_Hz, dtype=float)
        inside = (f >= self.f_Hz[0]) & (f <= self.f_Hz[-1])
        return _on_grid(f, self.f_Hz, self.impedance_ohm), np.interp(f, self.f_Hz, self.noise_ohm), inside

    def to_dict(self) -> dict:
        return {"band_Hz": [float(self.f_Hz[0]), float(self.f_Hz[-1])], "points": int(self.f_Hz.size),
                "median_noise_ohm": float(np.median(self.noise_ohm)),
                "note": "the swept short is taken off each winding point by point"}


@dataclass(frozen=True)
class LeadEstimate:
    """The series lead impedance Rl + jωLl, which does not scale with the turns.

    source: 'turn counts' (separated from windings of different N), 'shorted leads' (a sweep
    of the leads alone), 'given' (options), 'single sweep' (the dispersion fit of one sweep),
    or 'none' (not removed). `determined` is False when the data could not resolve it.
    """

    inductance_H: float
    inductance_stderr_H: float | None
    resistance_ohm: float
    resistance_stderr_ohm: float | None
    source: str
    determined: bool = True
    band_Hz: tuple[float, float] | None = None
    note: str = ""
    short: ShortCurve | None = field(default=None, compare=False, repr=False)

    def impedance_ohm(self, f_Hz):
        """(Z of the leads to take off, its noise, where the measured short curve was used).

        Inside a shorted-leads sweep: the swept curve; elsewhere Rl + jωLl (Rl not below 0).
        """
        f = np.asarray(f_Hz, dtype=float)
        z = max(self.resistance_ohm, 0.0) + 2j * np.pi * f * self.inductance_H
        noise = np.zeros(f.shape)
        if self.short is None:
            return z, noise, np.zeros(f.shape, bool)
        zs, ns, inside = self.short.at(f)
        return np.where(inside, zs, z), np.where(inside, ns, noise), inside

    def to_dict(self) -> dict:
        return {"inductance_H": _estimate(self.inductance_H, self.inductance_stderr_H),
                "resistance_ohm": _estimate(self.resistance_ohm, self.resistance_stderr_ohm),
                "source": self.source, "determined": bool(self.determined),
                "band_Hz": None if self.band_Hz is None else [float(self.band_Hz[0]), float(self.band_Hz[1])],
                "swept_short": None if self.short is None else self.short.to_dict(),
                "note": self.note}


NO_LEADS = LeadEstimate(0.0, None, 0.0, None, "none", determined=False,
                        note="no lead measurement: the series lead impedance is part of the winding's")


@dataclass(frozen=True)
class DispersionFit:
    """The chosen dispersion model with the winding's series R, lead L and capacitance.

    values/stderr  the model's parameters (MODEL_PARAMETERS order); stderr None when not determined
    undetermined   names of parameters at a bound or resolved worse than a factor 2
    misfit         rms of the residuals in units of the error model on the fit's grid (≈ 1 or
                   below when the model describes the data to the VNA's accuracy)
    bic            n·ln(χ²/n) + k·ln(n) on the fit's grid (n residuals, k parameters)
    comparison     every model tried: its bic, misfit and parameter count
    """

    name: str
    values: tuple[float, ...]
    stderr: tuple[float | None, ...]
    undetermined: tuple[str, ...]
    series_resistance_ohm: float
    series_resistance_stderr_ohm: float | None
    lead_inductance_H: float
    lead_inductance_stderr_H: float | None
    lead_inductance_fitted: bool
    winding_capacitance_F: float
    winding_capacitance_stderr_F: float | None
    misfit: float
    bic: float
    points: int
    comparison: dict
    reason: str
    static_permeability_stderr: float | None = None
    converged: bool = True

    def permeability(self, f_Hz) -> np.ndarray:
        """µ' − jµ'' of this model at `f_Hz`."""
        return model_permeability(self.name, f_Hz, self.values)

    @property
    def static_permeability(self) -> float:
        return static_permeability(self.name, self.values)

    @property
    def poor(self) -> bool:
        return not (self.misfit <= POOR_MISFIT)

    def to_dict(self) -> dict:
        names = MODEL_PARAMETERS[self.name]
        parameters = {}
        for name, value, se in zip(names, self.values, self.stderr):
            determined = name not in self.undetermined
            parameters[name] = {"value": _clean(value) if determined else None,
                                "stderr": _clean(se) if determined else None,
                                "determined": determined,
                                **({} if determined else {"at": _clean(value),
                                                          "note": "at a bound or unresolved: not determined"})}
        return {"name": self.name, "form": MODEL_FORMS[self.name], "parameters": parameters,
                "winding": {"series_resistance_ohm": _estimate(self.series_resistance_ohm,
                                                               self.series_resistance_stderr_ohm),
                            "lead_inductance_H": {**_estimate(self.lead_inductance_H, self.lead_inductance_stderr_H),
                                                  "fitted": bool(self.lead_inductance_fitted)},
                            "capacitance_F": _estimate(self.winding_capacitance_F,
                                                       self.winding_capacitance_stderr_F)},
                "misfit": float(self.misfit), "poor": bool(self.poor), "poor_above": POOR_MISFIT,
                "criterion": "BIC", "bic": float(self.bic), "points": int(self.points),
                "comparison": {k: dict(v) for k, v in self.comparison.items()}, "reason": self.reason}


@dataclass(frozen=True)
class LossPoint:
    """tan δ = µ''/µ' and tan δ/µi at one frequency: measured (interpolated in log f) and model."""

    frequency_Hz: float
    tan_delta: float | None
    tan_delta_over_mu: float | None
    tan_delta_over_mu_stderr: float | None
    model_tan_delta_over_mu: float
    trustworthy: bool

    def to_dict(self) -> dict:
        return {"frequency_Hz": float(self.frequency_Hz), "tan_delta": _clean(self.tan_delta),
                "tan_delta_over_mu": _clean(self.tan_delta_over_mu),
                "tan_delta_over_mu_stderr": _clean(self.tan_delta_over_mu_stderr),
                "model_tan_delta_over_mu": _clean(self.model_tan_delta_over_mu),
                "trustworthy": bool(self.trustworthy)}


@dataclass(frozen=True)
class LossPeak:
    """Where µ'' peaks: frequency, µ'' there, and where the number comes from ('data' or 'model')."""

    frequency_Hz: float | None
    mu_imag: float | None
    source: str
    model_frequency_Hz: float | None
    note: str

    def to_dict(self) -> dict:
        return {"frequency_Hz": _clean(self.frequency_Hz), "mu_imag": _clean(self.mu_imag), "source": self.source,
                "model_frequency_Hz": _clean(self.model_frequency_Hz), "note": self.note}


@dataclass(frozen=True, eq=False)
class CoreAnalysis:
    """Everything the single-winding method says about a core.

    initial_permeability     the plateau of the measured µ' (source 'plateau'), or the model's
                             µ(f → 0) when the data hold no plateau (source 'model extrapolation')
    plateau_band_Hz          the band the plateau was read from (None without a plateau)
    loss_peak                where µ'' peaks (data, else model, else None)
    spectrum                 per point: µ', µ'' with Rs, Ls, Cw removed, the error model's
                             uncertainty, and trustworthy (resolved to 10 % and below the
                             winding's self-resonance)
    """

    turns: int
    geometry: CoreGeometry
    method: str
    z0_ohm: float
    initial_permeability: float
    initial_permeability_stderr: float | None
    initial_permeability_source: str
    plateau_points: int
    plateau_band_Hz: tuple[float, float] | None
    rough_plateau: dict | None
    model: DispersionFit
    leads: LeadEstimate
    loss_peak: LossPeak
    self_resonance_Hz: float
    f_Hz: np.ndarray
    mu_real: np.ndarray
    mu_imag: np.ndarray
    mu_real_stderr: np.ndarray
    mu_imag_stderr: np.ndarray
    trustworthy: np.ndarray
    trustworthy_band_Hz: tuple[float, float] | None
    loss_factor: tuple[LossPoint, ...]
    errors: VnaErrorModel
    points: int
    material_class: object | None = None
    method_advice: dict | None = None
    other_windings: tuple[dict, ...] = ()
    warnings: tuple[str, ...] = ()
    source: dict = field(default_factory=dict)
    lcr: object | None = None

    @property
    def relaxation_frequency_Hz(self) -> float | None:
        """Where µ'' peaks (None when no peak lies where the data or the model can place it)."""
        return self.loss_peak.frequency_Hz

    @property
    def fit_is_poor(self) -> bool:
        return self.model.poor

    @property
    def inductance_factor_H_per_turn2(self) -> float:
        """A_L = µ0·µi/C1 from the headline µi."""
        return air_core_inductance_H(1, self.geometry) * self.initial_permeability

    def _material_permeability(self):
        """For an open core (a rod) the material's µi from the apparent one, else None."""
        nd = getattr(self.geometry, "demagnetising_factor", None)
        if nd is None:
            return None
        from rfmeas.magnetics.geometry import material_permeability

        with np.errstate(all="ignore"):
            value = complex(material_permeability(self.initial_permeability, nd)).real
        ok = np.isfinite(value) and value > 0 and self.initial_permeability * nd < 0.9
        return {"value": float(value) if ok else None, "demagnetising_factor": float(nd),
                "note": "an open core shows the apparent µ; the material's µ follows from Nd of the prolate "
                        "spheroid of the same length/diameter: an estimate" if ok else
                        "the apparent µ is too close to 1/Nd to give the material's µ"}

    def model_permeability(self, f_Hz) -> np.ndarray:
        """µ' − jµ'' of the fitted dispersion model."""
        return self.model.permeability(f_Hz)

    def model_impedance(self, f_Hz) -> np.ndarray:
        """The winding's impedance the fit describes (without the leads, when they were measured)."""
        return winding_impedance(f_Hz, self.model_permeability(f_Hz), self.turns, self.geometry,
                                 self.model.series_resistance_ohm, self.model.lead_inductance_H,
                                 self.model.winding_capacitance_F)

    def spectrum_at(self, f_Hz):
        """Measured µ', µ'' interpolated linearly in log f (NaN outside the sweep)."""
        x = np.log(np.asarray(f_Hz, dtype=float))
        xp = np.log(self.f_Hz)
        return (np.interp(x, xp, self.mu_real, left=np.nan, right=np.nan),
                np.interp(x, xp, self.mu_imag, left=np.nan, right=np.nan))

    def to_dict(self) -> dict:
        band = None if self.trustworthy_band_Hz is None else {
            "start_Hz": float(self.trustworthy_band_Hz[0]), "stop_Hz": float(self.trustworthy_band_Hz[1])}
        peak = self.loss_peak
        snoek = None if peak.frequency_Hz is None else (self.initial_permeability - 1) * peak.frequency_Hz
        initial = {**_estimate(self.initial_permeability, self.initial_permeability_stderr),
                   "source": self.initial_permeability_source, "plateau_points": int(self.plateau_points),
                   "plateau_band_Hz": None if self.plateau_band_Hz is None else
                   [float(self.plateau_band_Hz[0]), float(self.plateau_band_Hz[1])]}
        if self.initial_permeability_source != "plateau":
            initial["rough_plateau"] = self.rough_plateau
        model = self.model.to_dict()
        material = None if self.material_class is None else self.material_class.to_dict()
        return {
            "schema_version": SCHEMA_VERSION,
            "turns": int(self.turns),
            "core": self.geometry.to_dict(),
            "method": self.method,
            "reference_impedance_ohm": float(self.z0_ohm),
            "initial_permeability": initial,
            "inductance_factor_nH_per_turn2": float(self.inductance_factor_H_per_turn2 / _NH),
            "relaxation_frequency_Hz": {"value": _clean(peak.frequency_Hz), "stderr": None,
                                        "source": peak.source, "note": peak.note,
                                        "within_trustworthy_band": bool(
                                            band is not None and peak.frequency_Hz is not None
                                            and band["start_Hz"] <= peak.frequency_Hz <= band["stop_Hz"])},
            "loss_peak": peak.to_dict(),
            "snoek_product_Hz": _clean(snoek),
            "loss_factor": [p.to_dict() for p in self.loss_factor],
            "dispersion_model": model,
            "relaxation_model": model,
            "leads": self.leads.to_dict(),
            "winding": {
                "series_resistance_ohm": _estimate(self.model.series_resistance_ohm,
                                                   self.model.series_resistance_stderr_ohm),
                "self_capacitance_F": _estimate(self.model.winding_capacitance_F,
                                                self.model.winding_capacitance_stderr_F),
                "self_resonance_Hz": _clean(self.self_resonance_Hz),
            },
            "material_class": material,
            "spectrum": {
                "frequency_Hz": self.f_Hz.tolist(),
                "mu_real": self.mu_real.tolist(),
                "mu_imag": self.mu_imag.tolist(),
                "mu_real_stderr": self.mu_real_stderr.tolist(),
                "mu_imag_stderr": self.mu_imag_stderr.tolist(),
                "trustworthy": self.trustworthy.tolist(),
            },
            "trustworthy_band": band,
            "fit": {"points": int(self.points), "fit_points": int(self.model.points),
                    "misfit": float(self.model.misfit), "poor": bool(self.model.poor),
                    "error_model": self.errors.to_dict(),
                    "trust_relative_uncertainty": TRUST_RELATIVE_UNCERTAINTY},
            "other_windings": [dict(w) for w in self.other_windings],
            "lcr_readings": None if self.lcr is None else self.lcr.to_dict(),
            "material_permeability": self._material_permeability(),
            "method_advice": self.method_advice,
            "source": dict(self.source),
            "warnings": list(self.warnings),
        }


# ---------------------------------------------------------------- fitting

@dataclass(frozen=True)
class _Trial:
    name: str
    theta: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    jac: np.ndarray
    chi2: float
    n: int
    converged: bool = True   # False: the solver stopped at its evaluation budget (or failed)


NOT_CONVERGED_NOTE = ("the solver stopped at its evaluation budget before converging, so the model's "
                      "values are its last try, not a converged fit")


def _unpack(name, theta, fixed_ls):
    k = len(MODEL_PARAMETERS[name])
    values = tuple(float(v) for v in np.exp(theta[:k]))
    rs = float(theta[k])
    if fixed_ls is None:
        ls, cw = float(theta[k + 1]) * _NH, float(theta[k + 2]) * _PF
    else:
        ls, cw = fixed_ls, float(theta[k + 1]) * _PF
    return values, rs, ls, cw


class _Problem:
    """The weighted residual of one winding on the thinned grid, for any model of the family."""

    def __init__(self, f_Hz, z, sigma, turns, geometry, fixed_ls):
        self.f, self.z, self.turns, self.geometry, self.fixed_ls = f_Hz, z, turns, geometry, fixed_ls
        self.scale = 1.0 / sigma

    def residuals(self, name, theta):
        values, rs, ls, cw = _unpack(name, theta, self.fixed_ls)
        mu = model_permeability(name, self.f, values)
        d = (winding_impedance(self.f, mu, self.turns, self.geometry, rs, ls, cw) - self.z) * self.scale
        return np.concatenate([d.real, d.imag])

    def fit(self, name, theta0, lower, upper, budget=100) -> _Trial:
        from scipy.optimize import least_squares

        span = np.where(np.isfinite(upper - lower), upper - lower, 1.0)
        theta0 = np.clip(theta0, lower + 1e-6 * span, upper - 1e-6 * span)
        with np.errstate(all="ignore"):
            result = least_squares(lambda t: self.residuals(name, t), theta0, bounds=(lower, upper),
                                   x_scale="jac", method="trf", max_nfev=budget * len(theta0))
        chi2 = float(np.sum(result.fun**2))
        if not np.isfinite(chi2):
            chi2 = math.inf
        return _Trial(name, result.x, lower, upper, result.jac, chi2, result.fun.size, bool(result.status > 0))


def _start_values(f, z, sigma, turns, geometry, fixed_ls):
    """Rough µ(0), the µ'' peak and Cw from the raw data."""
    l0 = air_core_inductance_H(turns, geometry)
    mu_raw = permeability_from_impedance(f, z, turns, geometry, 0.0, fixed_ls or 0.0)
    resolved = np.abs(z) > 3 * sigma
    idx = np.flatnonzero(resolved)
    if idx.size < 3:
        idx = np.arange(f.size)
    mu_low = float(np.clip(np.median(mu_raw.real[idx[:5]]), 1.2, 1e6))
    x = z.imag
    cross = idx[:-1][(x[idx[:-1]] > 0) & (x[idx[1:]] <= 0)]
    srf = float(f[cross[0] + 1]) if cross.size else math.inf
    below = idx[f[idx] < srf]
    if below.size >= 3:
        k = below[int(np.argmax(-mu_raw.imag[below]))]
        f_pk = float(f[k])
        if k in (below[0], below[-1]):
            half = below[mu_raw.real[below] < 0.5 * mu_low]
            f_pk = float(f[half[0]]) if half.size else float(f[below[-1]] * 3)
    else:
        f_pk = float(np.sqrt(f[0] * f[-1]))
    if np.isfinite(srf):
        cw0 = 1.0 / ((2 * np.pi * srf) ** 2 * l0 * max(float(np.real(
            model_permeability(RELAXATION, srf, (mu_low - 1, f_pk)))), 1.0))
    else:
        cw0 = 1.0 * _PF
    return mu_low, f_pk, cw0, srf


def _bounds(name, f, fixed_ls):
    lo_f, hi_f = math.log(f[0] / 30), math.log(f[-1] * 30)
    chi = (math.log(1e-3), math.log(1e6))
    damping = (math.log(0.05), math.log(50.0))
    pieces = {RELAXATION: [chi, (lo_f, hi_f)], RESONANCE: [chi, (lo_f, hi_f), damping],
              SUM: [chi, (lo_f, hi_f), damping, chi, (lo_f, hi_f)]}[name]
    # series lead inductance up to 500 nH (a metre of wire); winding capacitance up to 100 nF
    circuit = [(0.0, np.inf)] + ([] if fixed_ls is not None else [(0.0, 500.0)]) + [(0.0, 1e5)]
    pieces = pieces + circuit
    return np.array([p[0] for p in pieces]), np.array([p[1] for p in pieces])


def _seed_theta(seed: DispersionFit, fixed_ls) -> np.ndarray:
    """A previous fit's parameters as a start in the internal coordinates (its lead L dropped
    when the series inductance is held)."""
    circuit = [seed.series_resistance_ohm] + ([] if fixed_ls is not None else [seed.lead_inductance_H / _NH])
    return np.array([math.log(max(v, 1e-300)) for v in seed.values] + circuit + [seed.winding_capacitance_F / _PF])


def _fit_family(problem: _Problem, f_all, z_all, sigma_all, turns, geometry, fixed_ls,
                seed: DispersionFit | None = None) -> dict:
    """Best trial of each model from a few starts (and from `seed`, a previous fit of the same data)."""
    mu_low, f_pk, cw0, _ = _start_values(f_all, z_all, sigma_all, turns, geometry, fixed_ls)
    if not np.all(np.isfinite([mu_low, f_pk, cw0])) or mu_low <= 0:
        raise FitError("the sweep gives no starting point for a core model: it does not look like a "
                       "wound core (a short or open circuit?)")
    chi0 = math.log(max(mu_low - 1.0, 1e-3))
    # the series resistance from the lowest points only (core loss grows with f; a linear grid's
    # first few percent can already reach the loss peak), clipped to what leads and copper can be
    rs0 = float(np.clip(np.min(z_all.real[:3]), 0.0, 1.0))

    def circuit(ls0_nH, cw_F):
        return [rs0] + ([] if fixed_ls is not None else [ls0_nH]) + [cw_F / _PF]

    starts = {
        RELAXATION: [[chi0, math.log(f_pk * m)] for m in (1.0, 3.0, 0.3)],
        RESONANCE: [[chi0, math.log(f_pk * m), math.log(b)] for m, b in ((1.2, 0.8), (2.0, 2.0), (4.0, 5.0))],
    }
    best = {}
    for name in (RELAXATION, RESONANCE):
        lower, upper = _bounds(name, f_all, fixed_ls)
        for head in starts[name]:
            # the raw reactance may cross zero where a resonant material's µ' turns negative, not
            # at the winding's self-resonance: Cw starts from a few typical values as well
            for ls0, cw in ((10.0, cw0), (30.0, 1e-12), (20.0, 5e-12)):
                trial = problem.fit(name, np.array(head + circuit(ls0, cw)), lower, upper, budget=20)
                if name not in best or trial.chi2 < best[name].chi2:
                    best[name] = trial
        best[name] = problem.fit(name, best[name].theta, lower, upper)
    lower, upper = _bounds(SUM, f_all, fixed_ls)
    res, rel = best[RESONANCE], best[RELAXATION]
    chi_res, f0, beta = res.theta[:3]
    heads = [[chi_res + math.log(share), f0, beta, chi_res + math.log(1 - share), fr]
             for share in (0.7, 0.3) for fr in (rel.theta[1], f0 - math.log(5.0))]
    # a resonance and a relaxation near the same frequency: a grid around the relaxation's peak
    chi_rel, ln_fr = rel.theta[0], rel.theta[1]
    heads += [[chi_rel + math.log(0.5), ln_fr + math.log(m0), math.log(b), chi_rel + math.log(0.5),
               ln_fr + math.log(mr)] for m0 in (1.0, 2.0) for b in (1.0, 0.5) for mr in (0.5, 1.5)]
    starts = [np.array(head + list(rel.theta[2:])) for head in heads]
    # and from the raw data alone, in case the single forms settled on a wrong winding capacitance
    half = chi0 + math.log(0.5)
    ln_pk = math.log(f_pk)
    starts += [np.array([half, ln_pk + math.log(m0), 0.0, half, ln_pk + math.log(mr)] + circuit(ls0, cw))
               for m0, mr in ((1.0, 0.5), (2.0, 1.0)) for ls0, cw in ((10.0, cw0), (30.0, 1e-12), (20.0, 5e-12))]
    for theta0 in starts:
        trial = problem.fit(SUM, theta0, lower, upper, budget=20)
        if SUM not in best or trial.chi2 < best[SUM].chi2:
            best[SUM] = trial
    best[SUM] = problem.fit(SUM, best[SUM].theta, lower, upper)
    if seed is not None:
        lower, upper = _bounds(seed.name, f_all, fixed_ls)
        trial = problem.fit(seed.name, _seed_theta(seed, fixed_ls), lower, upper)
        if trial.chi2 < best[seed.name].chi2:
            best[seed.name] = trial
    return best


def _bic(trial: _Trial) -> float:
    n, k = trial.n, trial.theta.size
    return n * math.log(max(trial.chi2, 1e-300) / n) + k * math.log(n)


def _covariance(trial: _Trial) -> np.ndarray:
    _, s, vt = np.linalg.svd(trial.jac, full_matrices=False)
    keep = s > s[0] * 1e-10 if s.size and s[0] > 0 else np.zeros(s.size, bool)
    cov = (vt[keep].T / s[keep] ** 2) @ vt[keep] if keep.any() else np.full((vt.shape[1],) * 2, np.inf)
    dof = max(1, trial.n - trial.theta.size)
    return cov * max(1.0, trial.chi2 / dof)


def _summarise(trial: _Trial, fixed_ls, comparison, reason) -> DispersionFit:
    name = trial.name
    k = len(MODEL_PARAMETERS[name])
    cov = _covariance(trial)
    se = np.sqrt(np.abs(np.diag(cov)))
    span = np.where(np.isfinite(trial.upper - trial.lower), trial.upper - trial.lower, np.inf)
    values, rs, ls, cw = _unpack(name, trial.theta, fixed_ls)
    undetermined, stderr = [], []
    for i, pname in enumerate(MODEL_PARAMETERS[name]):
        at_bound = (min(trial.theta[i] - trial.lower[i], trial.upper[i] - trial.theta[i]) < _BOUND_MARGIN * span[i])
        if at_bound or not (se[i] < _MAX_LOG_STDERR):
            undetermined.append(pname)
            stderr.append(None)
        else:
            stderr.append(values[i] * float(se[i]))
    def circuit_se(i, unit):
        # a circuit value pinned at its lower bound (0) or resolved worse than itself: no stderr
        value, err = float(trial.theta[i]), float(se[i])
        if value - trial.lower[i] < 1e-6 * max(1.0, abs(value)) or not (err < max(abs(value), 1e-30)):
            return None
        return err * unit

    rs_se = circuit_se(k, 1.0)
    if fixed_ls is None:
        ls_se, cw_se = circuit_se(k + 1, _NH), circuit_se(k + 2, _PF)
    else:
        ls_se, cw_se = None, circuit_se(k + 1, _PF)
    misfit = math.sqrt(trial.chi2 / trial.n)
    # µ(0) = 1 + Σ exp(θ_χ): first-order propagation through the covariance of the log parameters
    grad = np.zeros(trial.theta.size)
    for i, pname in enumerate(MODEL_PARAMETERS[name]):
        if pname.endswith("susceptibility"):
            grad[i] = values[i]
    mu0_se = float(math.sqrt(max(0.0, grad @ cov @ grad)))
    mu0 = static_permeability(name, values)
    mu0_se = mu0_se if np.isfinite(mu0_se) and mu0_se < 0.5 * mu0 else None
    return DispersionFit(name, values, tuple(stderr), tuple(undetermined), rs, rs_se, ls,
                         ls_se, fixed_ls is None, cw, cw_se, misfit, _bic(trial), trial.n // 2, comparison,
                         reason, mu0_se, trial.converged)


def fit_dispersion(f_Hz, impedance_ohm, sigma_ohm, turns: int, geometry: CoreGeometry,
                   lead_inductance_H: float | None = None, points_per_decade: float = POINTS_PER_DECADE,
                   seed: DispersionFit | None = None) -> DispersionFit:
    """Fit every model of the family to one winding's impedance and keep the one with the lowest BIC.

    `sigma_ohm` is the error model's size of the error on each point; the fit runs on a grid
    thinned to at most `points_per_decade`. `lead_inductance_H` holds the lead inductance at
    a measured value; None fits it. `seed`, a previous fit of the same data, is one more start.
    """
    f = np.asarray(f_Hz, dtype=float)
    z = np.asarray(impedance_ohm, dtype=complex)
    sigma = np.asarray(sigma_ohm, dtype=float)
    usable = np.isfinite(sigma) & (sigma > 0)
    idx = np.intersect1d(log_thin_indices(f, points_per_decade), np.flatnonzero(usable))
    if idx.size < 8:
        raise FitError(f"only {idx.size} points the VNA resolves; the dispersion fit needs at least 8")
    problem = _Problem(f[idx], z[idx], sigma[idx], turns, geometry, lead_inductance_H)
    best = _fit_family(problem, f[usable], z[usable], sigma[usable], turns, geometry, lead_inductance_H, seed)
    comparison = {name: {"bic": _bic(t), "misfit": math.sqrt(t.chi2 / t.n), "parameters": int(t.theta.size)}
                  for name, t in best.items()}
    chosen = min(best.values(), key=_bic)
    others = ", ".join(f"{n} {c['bic']:.1f}" for n, c in comparison.items() if n != chosen.name)
    reason = (f"lowest BIC ({_bic(chosen):.1f}; {others}); misfit {math.sqrt(chosen.chi2 / chosen.n):.2f}× "
              "the VNA error model")
    if not chosen.converged:
        reason += f"; {NOT_CONVERGED_NOTE}"
    return _summarise(chosen, lead_inductance_H, comparison, reason)


# ---------------------------------------------------------------- leads

def _robust_level(values, weights, f):
    """Weighted median, its scatter-based standard error and half the gap between the band's halves."""
    level = weighted_median(values, weights)
    mad = 1.4826 * float(np.median(np.abs(values - level)))
    se = mad / math.sqrt(values.size)
    half = values.size // 2
    if half >= 2:
        order = np.argsort(f)
        lo = weighted_median(values[order[:half]], weights[order[:half]])
        hi = weighted_median(values[order[half:]], weights[order[half:]])
        se = math.hypot(se, 0.5 * (hi - lo))
    return level, se


def leads_from_short(f_Hz, impedance_ohm, errors: VnaErrorModel = DEFAULT_VNA_ERRORS, z0_ohm: float = 50.0,
                     method: str = REFLECTION) -> LeadEstimate:
    """Rl and Ll from a sweep of the shorted test leads: Z = Rl + jω·Ll where the VNA resolves it,
    and the swept curve itself (`LeadEstimate.short`) for point-by-point removal."""
    f, z = _clean_input(f_Hz, impedance_ohm, [])
    sigma = errors.sigma_impedance(z, z0_ohm, method)
    w = 2 * np.pi * f
    ok = np.isfinite(z) & (np.abs(z.imag) > 3 * sigma) & (z.imag > 0)
    if ok.sum() < 3:
        return replace(NO_LEADS, source="shorted leads",
                       note="the shorted-leads sweep does not resolve the leads' reactance anywhere")
    l_f = z.imag[ok] / w[ok]
    weights = (w[ok] / sigma[ok]) ** 2
    ll, ll_se = _robust_level(l_f, weights, f[ok])
    rl, rl_se = _robust_level(z.real[ok], 1.0 / sigma[ok] ** 2, f[ok])
    # the VNA error on a few-ohm reactance swamps a lead resistance of tens of milliohms
    rl, rl_se, r_note = _resolved_resistance(rl, math.hypot(rl_se, float(np.median(sigma[ok])) / math.sqrt(2)))
    return LeadEstimate(ll, ll_se, rl, rl_se, "shorted leads", True, (float(f[ok][0]), float(f[ok][-1])),
                        "Rl + jω·Ll read from the shorted leads where the VNA resolves them; the swept curve "
                        "is taken off the winding point by point" + r_note,
                        short=_short_curve(f, z, ll, z0_ohm, method))


SHORT_SMOOTHING_POINTS = 21
"""Points averaged (at most) along the shorted-leads sweep: its trace noise falls by √21."""


def _short_curve(f, z, ll, z0_ohm, method) -> ShortCurve:
    """The short's impedance smoothed along frequency: jωLl plus a running mean of what is left.

    What is left (Rl and the calibration residue) changes slowly with frequency, so a running
    mean over a few percent of the sweep removes trace noise without bending it.
    """
    from scipy.ndimage import uniform_filter1d

    width = int(min(SHORT_SMOOTHING_POINTS, max(1, f.size // 20)))
    rest = z - 2j * np.pi * f * ll
    smooth = (uniform_filter1d(rest.real, width, mode="nearest")
              + 1j * uniform_filter1d(rest.imag, width, mode="nearest"))
    noise = _trace_noise_ohm(z, z0_ohm, method) / math.sqrt(width)
    return ShortCurve(f.copy(), smooth + 2j * np.pi * f * ll, noise)


def _trace_noise_ohm(z, z0_ohm, method) -> np.ndarray:
    """Per point: the size of the trace noise on Z, from the sweep's own neighbouring points
    (measurement.noise, never a model's residuals) carried through |dZ/dS|."""
    with np.errstate(all="ignore"):
        s = s_from_impedance(method, z, z0_ohm)
        sigma_s = trace_noise_sigma(s)
        sigma_s = sigma_s if np.isfinite(sigma_s) else 0.0
        out = np.abs(impedance_sensitivity(method, z, z0_ohm)) * math.sqrt(2) * sigma_s
    return np.where(np.isfinite(out), out, np.inf)


def _resolved_resistance(rl, rl_se):
    """(Rl, its stderr, a note): Rl is taken as 0 (not determined) when it is not 2 stderr from 0."""
    if not (abs(rl) > 2 * rl_se):
        return 0.0, None, f"; the lead resistance is not resolved ({rl:.3g} ± {rl_se:.2g} Ω) and is taken as 0"
    return rl, rl_se, ""


def _on_grid(f_target, f, z):
    return np.interp(f_target, f, z.real) + 1j * np.interp(f_target, f, z.imag)


def _raw_self_resonance(f, z, sigma) -> float:
    """The lowest frequency where the resolved reactance turns from inductive to capacitive (inf if none)."""
    from rfmeas.fit.start import first_resonance_Hz

    idx = np.flatnonzero(np.abs(z) > 3 * sigma)
    found = first_resonance_Hz(f[idx], z[idx]) if idx.size >= 2 else None
    return math.inf if found is None else found


def leads_from_turns(windings, errors: VnaErrorModel = DEFAULT_VNA_ERRORS, z0_ohm: float = 50.0,
                     capacitances_F=None, method: str = REFLECTION) -> LeadEstimate:
    """Separate the series lead impedance from the N²-scaling part, whatever µ(f) is.

    `windings` is a sequence of (f_Hz, impedance_ohm, turns) of the same core and leads with at
    least two different turn counts. Each is Z_k = a + Zc_k/(1 + jω·C_k·Zc_k) with
    Zc_k = N_k²·b(f): a = Rl + jω·Ll the leads, b(f) the core per turn², C_k each winding's
    capacitance. Rl, Ll and the C_k are fitted with b(f) eliminated at every frequency (its
    weighted least-squares value given the others), so no dispersion model enters. Weights
    come from the error model; the grid is thinned to equal weight per decade and kept below
    each winding's self-resonance, where every winding is resolved. `capacitances_F` are
    start values.
    """
    from scipy.optimize import least_squares

    turns = np.array([w[2] for w in windings], dtype=float)
    if np.unique(turns).size < 2:
        raise InputError("separating the leads needs windings with at least two different turn counts")
    lo = max(float(np.min(w[0])) for w in windings)
    hi = min(float(np.max(w[0])) for w in windings)
    ref = max(windings, key=lambda w: np.asarray(w[0]).size)
    f = np.asarray(ref[0], dtype=float)
    f = f[(f >= lo) & (f <= hi)]
    f = f[log_thin_indices(f, POINTS_PER_DECADE)] if f.size else f
    if f.size < 4:
        raise InputError("the windings' sweeps do not overlap in frequency")
    zs = np.stack([_on_grid(f, np.asarray(w[0], float), np.asarray(w[1], complex)) for w in windings])
    # the VNA's residue and each sweep's trace noise (read from its own neighbouring points)
    noise = [_trace_noise_ohm(np.asarray(w[1], complex), z0_ohm, method) for w in windings]
    sig = np.stack([np.hypot(errors.sigma_impedance(z, z0_ohm, method),
                             np.interp(f, np.asarray(w[0], float), n)) for z, w, n in zip(zs, windings, noise)])
    # each winding counts where it is resolved and below 1.5× its own self-resonance (its C_k is
    # modelled; further up, distributed effects take over); a frequency needs two turn counts
    srf = np.array([_raw_self_resonance(f, z, s) for z, s in zip(zs, sig)])
    valid = (np.abs(zs) > 3 * sig) & (f[None, :] < 1.5 * srf[:, None])
    two = np.array([np.unique(turns[valid[:, i]]).size >= 2 for i in range(f.size)])
    if two.sum() < 4:
        return replace(NO_LEADS, source="turn counts",
                       note="two turn counts are not both resolved in any common band below their self-resonance")
    f, zs, sig, valid = f[two], zs[:, two], sig[:, two], valid[:, two]
    sig = np.where(valid, sig, np.inf)
    zs = np.where(valid, zs, 1.0)
    w_rad = 2 * np.pi * f
    x = turns[:, None] ** 2
    k = len(windings)

    def residuals(p):
        a = p[1] + 1j * w_rad * p[0] * _NH
        with np.errstate(all="ignore"):
            zw = zs - a
            zc = 1.0 / (1.0 / zw - 1j * w_rad * (p[2:, None] * _PF))
            s = np.abs(zc / zw) ** 2 * sig
            wt = np.where(valid, 1.0 / s**2, 0.0)
            b = (wt * x * zc).sum(0) / (wt * x * x).sum(0)
            r = np.where(valid, (zc - x * b) / s, 0.0)
        r = r[valid]
        out = np.concatenate([r.real, r.imag])
        return np.where(np.isfinite(out), out, 1e6)

    c0 = np.full(k, 1.0) if capacitances_F is None else np.clip(np.asarray(capacitances_F) / _PF, 0.0, 1e4)
    lower = np.r_[0.0, -1.0, np.zeros(k)]
    upper = np.r_[1e4, 1e3, np.full(k, 1e5)]
    best = None
    for l0 in (10.0, 30.0, 80.0):
        result = least_squares(residuals, np.r_[l0, 0.05, c0], bounds=(lower, upper), x_scale="jac", method="trf",
                               max_nfev=200 * (k + 2))
        if best is None or result.cost < best.cost:
            best = result
    n = best.fun.size
    dof = max(1, n - (k + 2) - 2 * f.size)
    chi2 = float(np.sum(best.fun**2))
    _, s, vt = np.linalg.svd(best.jac, full_matrices=False)
    good = s > s[0] * 1e-10
    cov = (vt[good].T / s[good] ** 2) @ vt[good] * max(1.0, chi2 / dof)
    se = np.sqrt(np.abs(np.diag(cov)))
    ll, ll_se = float(best.x[0]) * _NH, float(se[0]) * _NH
    # The VNA's errors are systematic and do not average down over frequency: the lead is known
    # no better than the better single frequencies resolve it (lower quartile of the per-frequency
    # standard error of a from the error model alone).
    wt = np.where(valid, 1.0 / sig**2, 0.0)
    s0, s1, s2 = wt.sum(0), (wt * x).sum(0), (wt * x * x).sum(0)
    with np.errstate(all="ignore"):
        sigma_l = np.sqrt(0.5 * s2 / (s0 * s2 - s1**2)) / w_rad
    sigma_l = sigma_l[np.isfinite(sigma_l)]
    if sigma_l.size:
        ll_se = math.hypot(ll_se, float(np.percentile(sigma_l, 25)))
    rl, rl_se, r_note = _resolved_resistance(float(best.x[1]), float(se[1]))
    if not best.success:
        r_note += f"; {NOT_CONVERGED_NOTE}"
    at_bound = best.x[0] < 1e-3
    determined = bool(not at_bound and (ll_se < 0.3 * ll or ll_se < 1 * _NH))
    counts = ", ".join(str(int(t)) for t in sorted(set(turns.tolist())))
    return LeadEstimate(ll, ll_se, rl, rl_se, "turn counts", determined, (float(f[0]), float(f[-1])),
                        f"the part of Z that does not scale with N², from windings of {counts} turns "
                        f"(misfit {math.sqrt(chi2 / max(1, dof)):.2f}× the error model)" + r_note)


# ---------------------------------------------------------------- the analysis

def _clean_input(f_Hz, impedance_ohm, warnings: list):
    f = np.asarray(f_Hz, dtype=float).ravel()
    z = np.asarray(impedance_ohm, dtype=complex).ravel()
    if f.shape != z.shape:
        raise InputError(f"{f.size} frequencies but {z.size} impedance values")
    good = np.isfinite(f) & (f > 0) & np.isfinite(z)
    if not good.all():
        warnings.append(f"{int((~good).sum())} point(s) with a non-positive frequency or an infinite "
                        "impedance were left out")
        f, z = f[good], z[good]
    order = np.argsort(f, kind="stable")
    f, z = f[order], z[order]
    _, first = np.unique(f, return_index=True)
    if first.size < f.size:
        warnings.append(f"{f.size - first.size} repeated frequency point(s) were left out (first kept; "
                        "joined sweep segments repeat their common frequency)")
        f, z = f[first], z[first]
    if f.size < 8:
        raise InputError(f"only {f.size} usable points; the core analysis needs at least 8")
    return f, z


def _spectrum_uncertainty(f, z, sigma, zc, l0, fit: DispersionFit):
    """Per point: resolution of µ (error model alone) and the standard uncertainty of µ', µ''.

    δZc = (Zc/Zw)²·(δZ − jω·δLs) + jω·Zc²·δCw with Zw = Z − Rs − jωLs; the error model's δZ
    has unknown phase, so it contributes |.|/√2 to each of µ', µ''.
    """
    w = 2 * np.pi * f
    zw = z - fit.series_resistance_ohm - 1j * w * fit.lead_inductance_H
    with np.errstate(all="ignore"):
        g = (zc / zw) ** 2
        resolution = np.abs(g) * sigma / np.abs(zc)
        var_z = 0.5 * (np.abs(g) * sigma / (w * l0)) ** 2
        ls_se = fit.lead_inductance_stderr_H or 0.0
        cw_se = fit.winding_capacitance_stderr_F or 0.0
        d_ls = -1j * w * g * ls_se / (1j * w * l0)
        d_cw = 1j * w * zc**2 * cw_se / (1j * w * l0)
        real_se = np.sqrt(var_z + d_ls.real**2 + d_cw.real**2)
        imag_se = np.sqrt(var_z + d_ls.imag**2 + d_cw.imag**2)
    return resolution, real_se, imag_se


def _plateau(f, z, mu, real_se, noise_se, systematic_se, below_srf, compensated):
    """The lowest flat, low-loss, well-resolved band of µ': (value, stderr, first, last) or None.

    `real_se` is the whole standard uncertainty of µ' per point; `noise_se` (for µ', µ'') the
    trace noise's part, which averages down; `systematic_se` the VNA residue's part of µ', which
    does not. Below PLATEAU_MIN_IMPEDANCE_OHM a point counts only where a swept short was taken
    off (`compensated`): there the residue largely cancels. Loss and flatness are judged against
    each point's noise, so trace noise neither ends the band early nor passes a real slope.
    """
    with np.errstate(all="ignore"):
        rel = real_se / np.abs(mu.real)
        resolved = ((np.abs(z) > PLATEAU_MIN_IMPEDANCE_OHM) | compensated) & (rel < PLATEAU_RELATIVE_UNCERTAINTY)
        # low loss unless the point's µ'' is above µ'/10 by more than its own noise
        low_loss = (-mu.imag - 2.0 * noise_se[1] < PLATEAU_LOSS_RATIO * mu.real) & (mu.real > 0)
        candidate = resolved & low_loss & below_srf
    # only below the dispersion: once the resolved µ'' has risen past µ'/10, a flat µ' further up
    # (the tail far above the loss peak) is not the initial permeability
    lossy = first_run(resolved & ~low_loss & below_srf, PLATEAU_MIN_POINTS)
    if lossy is not None:
        candidate[lossy[0]:] = False
    run = first_run(candidate, PLATEAU_MIN_POINTS)
    if run is None:
        return None
    first, last = run
    # Keep at most a decade, then halve the log span until µ' is flat to PLATEAU_FLATNESS.
    decade = int(np.searchsorted(f, 10 * f[first], side="right") - 1)
    last = int(min(last, max(decade, first + 3 * PLATEAU_MIN_POINTS)))
    while last - first + 1 >= PLATEAU_MIN_POINTS:
        sl = slice(first, last + 1)
        x = np.log10(f[sl] / f[first])
        wts = 1.0 / real_se[sl] ** 2
        level = weighted_median(mu.real[sl], wts)
        if x[-1] > 0:
            slope = np.polyfit(x, mu.real[sl], 1, w=np.sqrt(wts))[0]
            # a slope the point-to-point scatter cannot tell from zero does not end the plateau
            wn = 1.0 / np.maximum(noise_se[0][sl], 1e-12 * level) ** 2
            slope_se = 1.0 / math.sqrt(float(np.sum(wn * (x - np.average(x, weights=wn)) ** 2)))
            change = max(0.0, abs(slope) - 2.0 * slope_se) * x[-1] / level
        else:
            change = 0.0
        if change <= PLATEAU_FLATNESS:
            values = mu.real[sl]
            n = values.size
            # a few points' spread says little: their own noise bounds it from below
            spread = 1.4826 * float(np.median(np.abs(values - level)))  # MAD → σ of a normal variable
            scatter = max(spread, float(np.median(noise_se[0][sl]))) / math.sqrt(n)
            systematic = float(np.median(systematic_se[sl]))  # the VNA's residue does not average down
            return level, math.hypot(scatter, systematic), first, last
        # not flat: drop the poorly resolved low end if it is much worse than the rest (the
        # VNA's error grows as |Z| falls), else the top half of the band (dispersion sets in)
        if real_se[first] > 2 * float(np.median(real_se[sl])):
            new_first = int(np.searchsorted(f, 1.25 * f[first], side="left"))
            first = new_first if new_first > first else first + 1
            continue
        mid = math.sqrt(f[first] * f[last])
        new_last = int(np.searchsorted(f, mid, side="right") - 1)
        last = new_last if new_last < last else last - 1
    return None


def _loss_peak(f, mu_imag, trust, roughly_resolved, fit: DispersionFit, f_lo, f_hi) -> LossPeak:
    """µ'' peak from the data inside the trustworthy band, else from the model where the data still
    resolve µ roughly (a model peak where nothing is resolved, e.g. above the self-resonance, is not given)."""
    grid = np.geomspace(f_lo, f_hi, 600)
    model_imag = -fit.permeability(grid).imag
    k = int(np.argmax(model_imag))
    model_f = float(grid[k]) if 0 < k < grid.size - 1 else None
    run = longest_run(trust)
    if run is not None and run[1] - run[0] >= 6:
        sl = slice(run[0], run[1] + 1)
        ff, mm = f[sl], mu_imag[sl]
        # smooth on the log-thinned grid (a running median of 5) so trace noise does not pick the peak
        idx = log_thin_indices(ff, POINTS_PER_DECADE)
        if idx.size >= 7:
            sm = np.median(np.lib.stride_tricks.sliding_window_view(np.pad(mm[idx], 2, mode="edge"), 5), axis=1)
            j = int(np.argmax(sm))
            if 2 <= j <= idx.size - 3:
                return LossPeak(float(ff[idx[j]]), float(sm[j]), "data", model_f,
                                "the largest µ'' inside the trustworthy band")
    near = None if model_f is None else int(np.clip(np.searchsorted(f, model_f), 0, f.size - 1))
    if model_f is not None and roughly_resolved[near]:
        return LossPeak(model_f, float(model_imag[k]), "model", model_f,
                        "the data's trustworthy band does not hold the peak; the fitted model places it where "
                        "the data still resolve µ roughly (to 30 %)")
    if model_f is not None:
        return LossPeak(None, None, "none", model_f,
                        "the model's µ'' peak lies where the data do not resolve µ (beyond the trustworthy "
                        "band, e.g. above the winding's self-resonance): not given; fewer turns may show it")
    side = "below" if k == 0 else "above"
    return LossPeak(None, None, "none", None,
                    f"µ'' rises to the {'lower' if k == 0 else 'upper'} end of the sweep: its peak lies {side} "
                    "the measured range and is not given")


def _default_loss_frequencies(band):
    if band is None:
        return []
    lo, hi = band
    decades = [10.0**k for k in range(math.ceil(math.log10(lo) - 1e-9), math.floor(math.log10(hi) + 1e-9) + 1)]
    return (decades or [math.sqrt(lo * hi)])[:4]


def _loss_points(f, mu_real, mu_imag, real_se, imag_se, trust, mu_i, fit, frequencies):
    x = np.log(f)
    out = []
    for fq in frequencies:
        fq = float(fq)
        model_mu = complex(fit.permeability(fq))
        model_value = (-model_mu.imag / model_mu.real) / mu_i if model_mu.real > 0 else math.nan
        if not (f[0] <= fq <= f[-1]):
            out.append(LossPoint(fq, None, None, None, model_value, False))
            continue
        xq = math.log(fq)
        mr, mi = np.interp(xq, x, mu_real), np.interp(xq, x, mu_imag)
        sr, si = np.interp(xq, x, real_se), np.interp(xq, x, imag_se)
        k = int(np.searchsorted(f, fq))
        near = trust[max(0, k - 1):k + 1]
        tan_d = mi / mr if mr > 0 else math.nan
        se = (abs(tan_d) * math.hypot(si / mi if mi != 0 else math.inf, sr / mr) / mu_i) if mr > 0 else math.nan
        out.append(LossPoint(fq, tan_d, tan_d / mu_i, se, model_value, bool(np.all(near))))
    return tuple(out)


def _match(materials, mu_i, mu_i_se, peak: LossPeak, dc_resistance, poor: bool, f_lo: float, f_hi: float):
    """The material match from the headline µi, the µ'' peak (None when not inside the sweep: then it
    lies above or below it) and the DC hint; a poor fit names no class with confidence."""
    from rfmeas.magnetics.materials import match_material

    return match_material(materials, mu_i, mu_i_se, peak.frequency_Hz, None, dc_resistance, fit_is_poor=poor,
                          sweep_top_Hz=f_hi, sweep_bottom_Hz=f_lo)


def analyze_core(f_Hz, impedance_ohm, turns: int, geometry: CoreGeometry, z0_ohm: float = 50.0,
                 method: str = REFLECTION, errors: VnaErrorModel = DEFAULT_VNA_ERRORS, loss_frequencies_Hz=None,
                 materials=None, dc_resistance: str | None = None, leads: LeadEstimate | None = None
                 ) -> CoreAnalysis:
    """Complex permeability, µi, loss peak and material class of a core from one winding's impedance.

    `impedance_ohm` is the winding's impedance at `f_Hz` as measured by `method` against
    `z0_ohm`; `errors` the VNA's residual errors. `leads` (from `leads_from_short`,
    `leads_from_turns` or given) holds the lead inductance fixed and takes the lead resistance
    off; without it the lead inductance is fitted. `loss_frequencies_Hz` chooses where tan δ/µi
    is reported (default: the decades inside the trustworthy band). `materials` (a
    MaterialTable) and `dc_resistance` ('conductive' | 'insulating') give a material-class guess.
    """
    if method not in METHODS:
        raise InputError(f"unknown impedance method {method!r} (use one of: {', '.join(METHODS)})")
    if isinstance(turns, bool) or not isinstance(turns, (int, np.integer)) or turns <= 0:
        raise InputError(f"turns must be a positive whole number, not {turns!r}")
    if not (np.isfinite(z0_ohm) and z0_ohm > 0):
        raise InputError(f"reference impedance must be positive, not {z0_ohm!r}")
    warnings: list[str] = []
    f, z = _clean_input(f_Hz, impedance_ohm, warnings)
    known = leads is not None and leads.determined and leads.source != "single sweep"
    compensated = np.zeros(f.shape, bool)
    if known:
        z_lead, lead_noise, compensated = leads.impedance_ohm(f)
        z_fit = z - z_lead
    else:
        z_fit, lead_noise = z, np.zeros(f.shape)
    # the VNA's systematic residue (what the short shares with the winding cancels) and the
    # trace noise of this sweep and of the smoothed short
    sigma_systematic = errors.sigma_impedance(z, z0_ohm, method)
    if compensated.any():
        sigma_systematic = np.where(compensated, errors.sigma_impedance_compensated(z, z_lead, z0_ohm, method),
                                    sigma_systematic)
        outside = int((~compensated).sum())
        if outside:
            warnings.append(f"{outside} point(s) lie outside the shorted-leads sweep: there only Rl + jω·Ll "
                            "is taken off, not the swept curve")
    sigma_noise = np.hypot(_trace_noise_ohm(z, z0_ohm, method), lead_noise)
    sigma = np.hypot(sigma_systematic, sigma_noise)
    # measured leads are already off z_fit: the fit holds its series inductance at 0
    fit = fit_dispersion(f, z_fit, sigma, int(turns), geometry, 0.0 if known else None)
    # the standard error of the lead inductance taken off, carried into µ one for one (δµ = δLl/L0)
    lead_se_H = 0.0
    if known:
        # where the swept short was taken off, its uncertainty is in sigma, not in Ll
        lead_se_H = 0.0 if compensated.all() else (leads.inductance_stderr_H or 0.0)
        fit = replace(fit, lead_inductance_stderr_H=lead_se_H or None)
        lead = leads
    else:
        # The fit treats the VNA's residue as independent per point; it is not: it drifts slowly, over
        # about a decade, so the fit's points per decade count as one (its standard error × √that), and a
        # series inductance is known no better than the better single frequencies resolve it.
        with np.errstate(all="ignore"):
            per_point = sigma_systematic / (2 * np.pi * f)
        resolved = per_point[np.abs(z) > 3 * sigma]
        floor_H = float(np.percentile(resolved, 25)) if resolved.size else math.inf
        if fit.lead_inductance_stderr_H is not None:
            fit = replace(fit, lead_inductance_stderr_H=math.hypot(
                fit.lead_inductance_stderr_H * math.sqrt(POINTS_PER_DECADE), floor_H))
        # kept when resolved to better than ±70 % (its uncertainty is carried into µ); else left in
        ls_ok = fit.lead_inductance_stderr_H is not None and fit.lead_inductance_stderr_H < 0.7 * max(
            fit.lead_inductance_H, 1e-30) and fit.lead_inductance_H > 1e-3 * _NH
        if ls_ok:
            lead_se_H = fit.lead_inductance_stderr_H
            lead = LeadEstimate(fit.lead_inductance_H, fit.lead_inductance_stderr_H, 0.0, None, "single sweep",
                                True, None, "fitted with the dispersion model of this one sweep")
        else:
            held = fit_dispersion(f, z_fit, sigma, int(turns), geometry, 0.0, seed=fit)
            if held.bic <= fit.bic + SERIES_INDUCTANCE_BIC:
                # Where µ hardly disperses inside the sweep, a series inductance and the core's are one
                # and the same to the data: the leads stay in (never a guessed split) and a warning says so.
                fit = held
                lead = replace(NO_LEADS, note="this one sweep cannot tell the lead inductance from the core's; "
                                              "the leads are left in")
            else:
                # the model without a series inductance misses the data: it is kept at its fitted value,
                # unresolved (known to about the residue's floor), and not claimed as the leads
                lead_se_H = min(floor_H, fit.lead_inductance_H)
                fit = replace(fit, lead_inductance_stderr_H=lead_se_H)
                lead = LeadEstimate(fit.lead_inductance_H, None, 0.0, None, "single sweep", False, None,
                                    f"a series inductance of about {fit.lead_inductance_H / _NH:.3g} nH is needed to "
                                    "describe this sweep but the sweep does not resolve it; it is taken off")
    l0 = air_core_inductance_H(int(turns), geometry)
    w = 2 * np.pi * f
    zc = permeability_from_impedance(f, z_fit, turns, geometry, fit.series_resistance_ohm, fit.lead_inductance_H,
                                     fit.winding_capacitance_F) * (1j * w * l0)
    mu = zc / (1j * w * l0)
    resolution, real_se, imag_se = _spectrum_uncertainty(f, z_fit, sigma, zc, l0, fit)
    with np.errstate(all="ignore"):
        srf_ratio = np.abs(w * fit.winding_capacitance_F * zc)
    below_srf = srf_ratio < 0.5
    trust = np.isfinite(resolution) & (resolution < TRUST_RELATIVE_UNCERTAINTY) & below_srf
    run = longest_run(trust)
    band = None if run is None else (float(f[run[0]]), float(f[run[1]]))
    grid = np.geomspace(f[0], f[-1] * 100, 4000)
    model_z = winding_impedance(grid, fit.permeability(grid), turns, geometry, 0.0, 0.0, fit.winding_capacitance_F)
    cross = np.flatnonzero((model_z.imag[:-1] > 0) & (model_z.imag[1:] <= 0))
    srf = float(grid[cross[0]]) if cross.size else math.inf

    systematic_se = _spectrum_uncertainty(f, z_fit, sigma_systematic, zc, l0, fit)[1]
    noise_se = _spectrum_uncertainty(f, z_fit, sigma_noise, zc, l0, replace(
        fit, lead_inductance_stderr_H=None, winding_capacitance_stderr_F=None))[1:]
    plateau = _plateau(f, z_fit, mu, real_se, noise_se, systematic_se, srf_ratio < 0.1, compensated)
    rough_plateau = None
    if plateau is not None and plateau[1] > PLATEAU_MAX_RELATIVE_UNCERTAINTY * plateau[0]:
        # a plateau the VNA resolves only roughly (few ohms): the model, fitted where the
        # resolution is better, is the better estimate; the rough plateau is kept beside it
        rough_plateau = {"value": float(plateau[0]), "stderr": float(plateau[1]),
                         "band_Hz": [float(f[plateau[2]]), float(f[plateau[3]])],
                         "note": "the data's plateau, resolved only roughly by the VNA here"}
        plateau = None
    if plateau is not None:
        mu_i, mu_i_se, first, last = plateau
        source, plateau_points, plateau_band = "plateau", last - first + 1, (float(f[first]), float(f[last]))
    else:
        mu_i, mu_i_se = fit.static_permeability, fit.static_permeability_stderr
        if mu_i_se is not None:
            # the model leans on the lowest resolved points, whose systematic VNA error does not
            # average down: their relative size is carried into µ(0)
            lowest = np.flatnonzero(trust)[:PLATEAU_MIN_POINTS * 2]
            if lowest.size:
                with np.errstate(all="ignore"):
                    rel = float(np.median(systematic_se[lowest] / np.abs(mu.real[lowest])))
                if np.isfinite(rel):
                    mu_i_se = math.hypot(mu_i_se, rel * mu_i)
        source, plateau_points, plateau_band = "model extrapolation", 0, None
        warnings.append("the data hold no flat, low-loss, well-resolved plateau of µ' at the low end; the initial "
                        "permeability is the dispersion model's extrapolation to f → 0: sweep lower or wind "
                        "more turns")
    if mu_i_se is not None and lead_se_H:
        # the lead inductance taken off moves µi one for one: δµ = δLl/L0
        mu_i_se = math.hypot(mu_i_se, lead_se_H / l0)
    if known or lead.determined:
        pass
    elif plateau is not None or fit.static_permeability > 0:
        share = 25 * _NH / (25 * _NH + l0 * mu_i)
        if share > 0.02:
            warnings.append(f"the lead inductance is not separated from this one sweep: a typical 20–40 nH of "
                            f"test leads would be about {100 * share:.0f} % of this {turns}-turn winding's "
                            "inductance; measure a second turn count or the shorted leads (--leads-short)")

    roughly = np.isfinite(resolution) & (resolution < ROUGH_RELATIVE_UNCERTAINTY) & below_srf
    peak = _loss_peak(f, -mu.imag, trust, roughly, fit, f[0], f[-1])
    if band is None:
        warnings.append("no frequency where the VNA's error model resolves µ to 10 %: the winding's impedance is "
                        f"too far from {z0_ohm:g} Ω for this method")
    if fit.poor:
        warnings.append(f"the dispersion fit is poor: its residuals are {fit.misfit:.1f}× the VNA's error model "
                        "(several mechanisms, a dimensional resonance, or a measurement problem); no material "
                        "class is named with confidence")
    if not fit.converged:
        warnings.append(f"the dispersion fit: {NOT_CONVERGED_NOTE}")
    if fit.undetermined:
        warnings.append("not determined by these data (at a bound or unresolved): " + ", ".join(fit.undetermined))
    if np.isfinite(srf) and peak.frequency_Hz is not None and srf < peak.frequency_Hz:
        warnings.append("the winding self-resonates below the loss peak: use fewer turns to see the core itself")

    advice = method_advice(z, z0_ohm)
    if advice.best != method and advice.median_uncertainty[method] > 2 * advice.median_uncertainty[advice.best]:
        warnings.append(advice.sentence)
    if loss_frequencies_Hz is None:
        loss_frequencies_Hz = _default_loss_frequencies(band)
    loss = _loss_points(f, mu.real, -mu.imag, real_se, imag_se, trust, mu_i, fit, loss_frequencies_Hz)

    material = None
    if materials is not None:
        material = _match(materials, mu_i, mu_i_se, peak, dc_resistance, fit.poor, float(f[0]), float(f[-1]))

    return CoreAnalysis(
        turns=int(turns), geometry=geometry, method=method, z0_ohm=float(z0_ohm),
        initial_permeability=float(mu_i), initial_permeability_stderr=mu_i_se, initial_permeability_source=source,
        plateau_points=int(plateau_points), plateau_band_Hz=plateau_band, rough_plateau=rough_plateau, model=fit, leads=lead, loss_peak=peak,
        self_resonance_Hz=srf, f_Hz=f, mu_real=mu.real.copy(), mu_imag=-mu.imag, mu_real_stderr=real_se,
        mu_imag_stderr=imag_se, trustworthy=trust, trustworthy_band_Hz=band, loss_factor=loss, errors=errors,
        points=int(f.size), material_class=material, method_advice=advice.to_dict(), warnings=tuple(warnings))


def _winding_summary(a: CoreAnalysis, label: str) -> dict:
    return {"label": label, "turns": a.turns,
            "initial_permeability": {**_estimate(a.initial_permeability, a.initial_permeability_stderr),
                                     "source": a.initial_permeability_source},
            "loss_peak_Hz": _clean(a.loss_peak.frequency_Hz), "misfit": float(a.model.misfit)}


def analyze_core_windings(windings, geometry: CoreGeometry, z0_ohm: float = 50.0, method: str = REFLECTION,
                          errors: VnaErrorModel = DEFAULT_VNA_ERRORS, loss_frequencies_Hz=None, materials=None,
                          dc_resistance: str | None = None, leads: LeadEstimate | None = None,
                          labels=None) -> CoreAnalysis:
    """One core measured with several windings: `windings` is a sequence of (f_Hz, impedance_ohm, turns).

    Without `leads`, two or more turn counts give the lead impedance (`leads_from_turns`); each
    winding is then analysed with it removed. The headline is the winding whose µi is best
    resolved (a plateau before a model extrapolation); the others are listed in `other_windings`.
    """
    windings = [(np.asarray(f, float), np.asarray(z, complex), int(n)) for f, z, n in windings]
    labels = list(labels) if labels is not None else [f"{n} turns" for _, _, n in windings]
    if not windings:
        raise InputError("no winding to analyse")
    common = dict(z0_ohm=z0_ohm, method=method, errors=errors, loss_frequencies_Hz=loss_frequencies_Hz,
                  materials=materials, dc_resistance=dc_resistance)
    if leads is None and len({n for _, _, n in windings}) >= 2:
        cleaned = []
        for f, z, n in windings:
            fc, zc = _clean_input(f, z, [])
            cleaned.append((fc, zc, n))
        leads = leads_from_turns(cleaned, errors, z0_ohm, None, method)
    results = [analyze_core(f, z, n, geometry, leads=leads, **common) for f, z, n in windings]

    def rank(a):
        # the best-resolved µi (a plateau carries the VNA's systematic error, a model extrapolation
        # its fit's), then the most turns
        rel = (a.initial_permeability_stderr or math.inf) / a.initial_permeability
        return (rel, -a.turns)

    order = sorted(range(len(results)), key=lambda i: rank(results[i]))
    head = results[order[0]]
    if head.loss_peak.source != "data":
        # the µ'' peak from the winding whose trustworthy band holds it (fewer turns resonate higher)
        seen = [results[i] for i in order if results[i].loss_peak.source == "data"]
        if seen:
            peak = seen[0].loss_peak
            peak = replace(peak, note=f"{peak.note} (of the {seen[0].turns}-turn winding)")
            material = head.material_class
            if materials is not None:
                material = _match(materials, head.initial_permeability, head.initial_permeability_stderr, peak,
                                  dc_resistance, head.model.poor, float(head.f_Hz[0]), float(head.f_Hz[-1]))
            head = replace(head, loss_peak=peak, material_class=material,
                           warnings=tuple(w for w in head.warnings if "self-resonates below the loss peak" not in w))
    others = tuple(_winding_summary(results[i], labels[i]) for i in order[1:])
    extra = []
    if leads is not None and not leads.determined:
        extra.append(f"the lead impedance could not be separated: {leads.note}")
    return replace(head, other_windings=others, warnings=tuple(extra) + head.warnings,
                   source={**head.source, "winding": labels[order[0]]})


# ---------------------------------------------------------------- LCR readings

LCR_RELATIVE_UNCERTAINTY = 0.01   # a bench LCR meter's basic accuracy on L, about 1 % (from memory)


@dataclass(frozen=True, eq=False)
class ReadingsAnalysis:
    """µ', µ'' and A_L at each LCR reading of one winding (leads removed when known).

    initial_permeability  the median µ' of the low-loss readings (µ''/µ' < 0.1) at the lowest
                          frequencies that agree within 3 %; None when no reading is low-loss
    """

    turns: int
    geometry: CoreGeometry
    f_Hz: np.ndarray
    mu_real: np.ndarray
    mu_imag: np.ndarray
    inductance_factor_H_per_turn2: np.ndarray
    initial_permeability: float | None
    initial_permeability_stderr: float | None
    readings_used: int
    leads: LeadEstimate
    form: str
    path: str
    warnings: tuple[str, ...] = ()

    def to_dict(self) -> dict:
        return {"turns": int(self.turns), "core": self.geometry.to_dict(), "form": self.form, "file": self.path,
                "initial_permeability": {**_estimate(self.initial_permeability, self.initial_permeability_stderr),
                                         "source": "LCR readings", "readings_used": int(self.readings_used)},
                "readings": [{"frequency_Hz": float(f), "mu_real": float(mr), "mu_imag": float(mi),
                              "inductance_factor_nH_per_turn2": float(al / _NH)}
                             for f, mr, mi, al in zip(self.f_Hz, self.mu_real, self.mu_imag,
                                                      self.inductance_factor_H_per_turn2)],
                "leads": self.leads.to_dict(), "warnings": list(self.warnings)}


def analyze_readings(f_Hz, impedance_ohm, turns: int, geometry: CoreGeometry, leads: LeadEstimate | None = None,
                     form: str = "", path: str = "") -> ReadingsAnalysis:
    """µ = (Z − Rl − jω·Ll)/(jω·L0) at each reading; A_L = Ls/N² with the leads removed."""
    if isinstance(turns, bool) or not isinstance(turns, (int, np.integer)) or turns <= 0:
        raise InputError(f"turns must be a positive whole number, not {turns!r}", path or None)
    f = np.asarray(f_Hz, dtype=float)
    z = np.asarray(impedance_ohm, dtype=complex)
    lead = leads if leads is not None else NO_LEADS
    warnings = []
    if leads is None or not leads.determined:
        warnings.append("the test leads' inductance is part of these readings (no lead measurement given)")
    mu = permeability_from_impedance(f, z, turns, geometry, lead.resistance_ohm, lead.inductance_H)
    l0 = air_core_inductance_H(turns, geometry)
    al = mu.real * l0 / turns**2
    low_loss = np.flatnonzero((-mu.imag < PLATEAU_LOSS_RATIO * mu.real) & (mu.real > 0))
    value = se = None
    used = 0
    if low_loss.size:
        base = mu.real[low_loss[0]]
        agree = low_loss[np.abs(mu.real[low_loss] / base - 1) <= PLATEAU_FLATNESS]
        value = float(np.median(mu.real[agree]))
        used = int(agree.size)
        scatter = 1.4826 * float(np.median(np.abs(mu.real[agree] - value))) / math.sqrt(used)
        lead_part = (lead.inductance_stderr_H or 0.0) / l0
        se = math.sqrt(scatter**2 + (LCR_RELATIVE_UNCERTAINTY * value) ** 2 + lead_part**2)
    else:
        warnings.append("no reading has µ'' ≪ µ': the readings lie above the core's low-frequency plateau")
    return ReadingsAnalysis(int(turns), geometry, f, mu.real.copy(), -mu.imag, al, value, se, used, lead, form,
                            path, tuple(warnings))


def analyze_readings_file(path, turns: int, geometry: CoreGeometry, leads: LeadEstimate | None = None
                          ) -> ReadingsAnalysis:
    """`analyze_readings` on a CSV or TOML file of LCR readings (rfmeas.io.readings)."""
    from rfmeas.io.readings import load_readings

    readings = load_readings(path)
    result = analyze_readings(readings.f_Hz, readings.impedance_ohm, turns, geometry, leads, readings.form,
                              str(path))
    return replace(result, warnings=tuple(readings.warnings) + result.warnings)


# ---------------------------------------------------------------- I/O wrapper

_CORE_SET_KEYS = {"name", "notes", "core", "winding", "leads", "vna"}
_WINDING_KEYS = {"file", "turns", "label", "method"}
_LEADS_KEYS = {"file", "inductance_H", "resistance_ohm"}
_VNA_KEYS = {"directivity_dB", "source_match_dB", "tracking_dB"}


def error_model_from_table(table: dict, path=None) -> VnaErrorModel:
    """A `[vna]` table (directivity_dB, source_match_dB, tracking_dB; each optional)."""
    from rfmeas.io.strict import check_keys

    check_keys(table, _VNA_KEYS, "[vna]", path)
    values = {}
    for key, field_name in (("directivity_dB", "directivity_db"), ("source_match_dB", "source_match_db"),
                            ("tracking_dB", "tracking_db")):
        if key in table:
            v = table[key]
            if isinstance(v, bool) or not isinstance(v, (int, float)):
                raise InputError(f"[vna] {key} must be a number", path)
            values[field_name] = float(v)
    try:
        return VnaErrorModel(**values)
    except InputError as exc:
        raise InputError(f"[vna] {exc.message}", path) from None


def _read_impedance(path: Path, method: str | None):
    """(f, Z, method, z0, warnings, points) of a Touchstone file of one winding."""
    from rfmeas.io.touchstone import read_touchstone

    data = read_touchstone(path)
    z, method, z0 = _network_impedance(data.network, method, path)
    return data.network.f, z, method, z0, list(data.warnings), int(data.network.f.size)


def _network_impedance(network, method: str | None, path):
    """(Z, method, z0) of a winding's sweep: S11 of a one-port, or S11/S21 of a two-port by `method`."""
    if network.nports == 2:
        method = method or REFLECTION
        s = network.s[:, 0, 0] if method == REFLECTION else network.s[:, 1, 0]
    else:
        if method not in (None, REFLECTION):
            raise InputError(f"method {method} needs a two-port (.s2p) sweep", path)
        method = REFLECTION
        s = network.s[:, 0, 0]
    z0 = float(np.real(network.z0[0, 0]))
    return impedance_from_s(method, s, z0), method, z0


def _core_set(path: Path) -> tuple[Path, dict] | None:
    """The core-set manifest behind `path` (a TOML with [[winding]], or a folder holding one) and its
    parsed document, else None."""
    from rfmeas.io.strict import read_toml

    candidate = path / "manifest.toml" if path.is_dir() else path
    if candidate.suffix.lower() != ".toml" or not candidate.is_file():
        return None
    _, doc = read_toml(candidate, "manifest")
    return (candidate, doc) if "winding" in doc else None


def load_core_set(path, doc: dict | None = None) -> dict:
    """Read a core-set manifest: [core], [[winding]] (file, turns, label, method), [leads], [vna].

    Returns {"geometry", "windings": [(file, turns, label, method)], "leads": dict|None,
    "errors": VnaErrorModel|None, "name"}; strict about keys, paths relative to the manifest.
    `doc` is the manifest already parsed (else it is read).
    """
    from rfmeas.io.strict import check_keys, read_toml
    from rfmeas.magnetics import geometry_from_table

    path = Path(path)
    if doc is None:
        _, doc = read_toml(path, "manifest")
    check_keys(doc, _CORE_SET_KEYS, "manifest", path, ["winding"])
    geometry = geometry_from_table(doc["core"], path) if "core" in doc else None
    entries = doc["winding"]
    if not isinstance(entries, list) or not entries:
        raise InputError("[[winding]] must be one or more tables", path)
    windings = []
    for i, entry in enumerate(entries, start=1):
        check_keys(entry, _WINDING_KEYS, f"[[winding]] {i}", path, ["file", "turns"])
        turns = entry["turns"]
        if isinstance(turns, bool) or not isinstance(turns, int) or turns <= 0:
            raise InputError(f"[[winding]] {i}: turns must be a positive whole number, not {turns!r}", path)
        if not isinstance(entry["file"], str):
            raise InputError(f"[[winding]] {i}: file must be a string", path)
        windings.append((path.parent / entry["file"], turns, str(entry.get("label", entry["file"])),
                         entry.get("method")))
    leads = None
    if "leads" in doc:
        table = doc["leads"]
        check_keys(table, _LEADS_KEYS, "[leads]", path)
        if "file" in table and ("inductance_H" in table or "resistance_ohm" in table):
            raise InputError("[leads]: give either file (a shorted-leads sweep) or inductance_H/resistance_ohm", path)
        leads = dict(table)
        if "file" in leads:
            leads["file"] = path.parent / leads["file"]
    errors = error_model_from_table(doc["vna"], path) if "vna" in doc else None
    return {"geometry": geometry, "windings": windings, "leads": leads, "errors": errors,
            "name": doc.get("name")}


def given_leads(inductance_H=None, resistance_ohm=None, path=None) -> LeadEstimate | None:
    """A LeadEstimate from values the user gives (None when neither is given)."""
    if inductance_H is None and resistance_ohm is None:
        return None
    for name, v in (("lead inductance", inductance_H), ("lead resistance", resistance_ohm)):
        if v is not None and (isinstance(v, bool) or not isinstance(v, (int, float)) or not (0 <= v < 1e3)
                              or not math.isfinite(v)):
            raise InputError(f"{name} must be a number ≥ 0, not {v!r}", path)
    return LeadEstimate(float(inductance_H or 0.0), 0.0, float(resistance_ohm or 0.0), 0.0, "given", True, None,
                        "given by the user")


def leads_from_short_file(path, errors: VnaErrorModel = DEFAULT_VNA_ERRORS) -> tuple[LeadEstimate, list[str]]:
    """The test leads from a sweep of them shorted where the winding goes, and the file's warnings.

    Refused (InputError) when the sweep does not resolve the leads.
    """
    fs, zs, ms, z0s, fw, _ = _read_impedance(Path(path), None)
    leads = leads_from_short(fs, zs, errors, z0s, ms)
    if not leads.determined:
        raise InputError(f"the shorted-leads sweep does not resolve the leads: {leads.note}", path)
    return leads, [f"{path}: {w}" for w in fw]


def analyze_core_file(path, turns: int | None = None, geometry: CoreGeometry | None = None,
                      method: str | None = None, errors: VnaErrorModel | None = None, loss_frequencies_Hz=None,
                      materials_file=None, dc_resistance: str | None = None, extra_files=(), extra_turns=(),
                      leads_short=None, leads: LeadEstimate | None = None) -> CoreAnalysis:
    """`analyze_core` (or `analyze_core_windings`) on files.

    `path` is a Touchstone file (.s1p, or .s2p with a two-port `method`), a measurement-set
    manifest (the primary-open one-port sweep, primary turns and [core]), or a core-set
    manifest with [[winding]] tables. `extra_files` with `extra_turns` add windings of other
    turn counts; `leads_short` is a sweep of the shorted leads; `leads` given values.
    """
    from rfmeas.magnetics.materials import load_materials

    path = Path(path)
    if method is not None and method not in METHODS:
        raise InputError(f"unknown impedance method {method!r} (use one of: {', '.join(METHODS)})", path)
    warnings: list[str] = []
    windings = []   # (f, z, turns, label, method, z0)
    file_warnings: list[str] = []
    points = 0
    found = None if path.suffix.lower() not in (".toml", "") and not path.is_dir() else _core_set(path)
    if found is not None:
        core_set = found[0]
        spec = load_core_set(*found)
        if geometry is None:
            geometry = spec["geometry"]
        elif spec["geometry"] is not None:
            warnings.append("the core given as an option replaces the manifest's [core] table")
        errors = errors or spec["errors"]
        for file, n, label, m in spec["windings"]:
            f, z, m, z0, fw, npts = _read_impedance(file, method or m)
            windings.append((f, z, n, label, m, z0))
            file_warnings += [f"{label}: {w}" for w in fw]
            points += npts
        if spec["leads"] is not None and leads is None and leads_short is None:
            if "file" in spec["leads"]:
                leads_short = spec["leads"]["file"]
            else:
                leads = given_leads(spec["leads"].get("inductance_H"), spec["leads"].get("resistance_ohm"), core_set)
        label0 = str(core_set)
    elif path.suffix.lower() == ".toml" or path.is_dir():
        from rfmeas.measurement.manifest import load_manifest
        from rfmeas.magnetics import geometry_from_table

        mset = load_manifest(path)
        sweep = _pick_sweep(mset, path)
        network = sweep.network
        file_warnings = list(sweep.warnings)
        n_manifest = mset.primary_turns if sweep.port1 == "primary" else mset.secondary_turns
        if turns is None:
            turns = n_manifest
        elif n_manifest not in (None, turns):
            warnings.append(f"--turns {turns} replaces the manifest's turn count")
        if geometry is None:
            if mset.core is None:
                raise InputError("the manifest has no [core] table: give the core size", path)
            geometry = geometry_from_table(mset.core, mset.manifest_path)
        elif mset.core is not None:
            warnings.append("the core given as an option replaces the manifest's [core] table")
        z, m, z0 = _network_impedance(network, method, path)
        if turns is None:
            raise InputError("the number of turns is needed (--turns N, or primary_turns in a manifest)", path)
        windings.append((network.f, z, int(turns), str(sweep.path), m, z0))
        points = int(network.f.size)
        label0 = str(sweep.path)
    else:
        if turns is None:
            raise InputError("the number of turns is needed (--turns N, or primary_turns in a manifest)", path)
        f, z, m, z0, fw, npts = _read_impedance(path, method)
        windings.append((f, z, int(turns), str(path), m, z0))
        file_warnings, points, label0 = fw, npts, str(path)
    if len(extra_files) != len(extra_turns):
        raise InputError(f"{len(extra_files) + 1} sweeps but {len(extra_turns) + 1} turn counts: give one "
                         "turn count per sweep (--turns 1,2)", path)
    for file, n in zip(extra_files, extra_turns):
        f, z, m, z0, fw, npts = _read_impedance(Path(file), method)
        windings.append((f, z, int(n), str(file), m, z0))
        file_warnings += [f"{file}: {w}" for w in fw]
        points += npts
    if geometry is None:
        raise InputError("the core size is needed (--toroid OD,ID,HEIGHT or --effective AE_MM2,LE_MM)", path)
    methods = {w[4] for w in windings}
    z0s = {w[5] for w in windings}
    if len(methods) > 1 or len(z0s) > 1:
        raise InputError("all windings must be measured the same way (one method, one reference impedance)", path)
    m, z0 = methods.pop(), z0s.pop()
    errors = errors or DEFAULT_VNA_ERRORS
    if leads_short is not None:
        leads, fw = leads_from_short_file(leads_short, errors)
        file_warnings += fw
    table = load_materials(materials_file)
    try:
        if len(windings) == 1:
            f, z, n, _, _, _ = windings[0]
            analysis = analyze_core(f, z, n, geometry, z0, m, errors, loss_frequencies_Hz, table, dc_resistance, leads)
        else:
            analysis = analyze_core_windings([(w[0], w[1], w[2]) for w in windings], geometry, z0, m, errors,
                                             loss_frequencies_Hz, table, dc_resistance, leads,
                                             labels=[w[3] for w in windings])
    except (InputError, FitError) as exc:
        raise type(exc)(exc.message, path=exc.path or path) from exc
    return replace(analysis, warnings=tuple(file_warnings + warnings) + analysis.warnings,
                   source={**analysis.source, "file": label0, "points_in_files": points})


def _pick_sweep(mset, path):
    candidates = [s for s in mset.sweeps if s.port1 == "primary" and not s.is_two_port
                  and s.termination.is_open]
    if candidates:
        return candidates[0]
    if len(mset.sweeps) == 1:
        return mset.sweeps[0]
    raise InputError("the manifest has no one-port sweep of the primary with the secondary open, "
                     "and more than one sweep to choose from", path)


__all__ = ["ReadingsAnalysis", "analyze_readings", "analyze_readings_file", "CoreAnalysis", "DispersionFit", "LeadEstimate", "LossPeak", "LossPoint", "MODELS", "analyze_core",
           "analyze_core_file", "analyze_core_windings", "fit_dispersion", "given_leads", "leads_from_short",
           "leads_from_turns", "load_core_set", "permeability_from_impedance", "winding_impedance",
           "VnaErrorModel", "RESONANCE", "RELAXATION", "SUM"]
