"""What is this core? Complex permeability of a wound core from one winding's impedance.

The single-winding method (IEC 62044-2 scope): a few turns on the core, the
winding's impedance swept, and

    Z(f) = Rw + [jω·L(f) ∥ 1/(jω·Cw)],   L(f) = µ(f)·µ0·N²·Ae/le = µ(f)·µ0·N²/C1

with µ = µ' − jµ'' (IEV 221-03-06). Rw (winding resistance) and Cw (winding
self-capacitance) are fitted together with a relaxation model of µ(f):

    first-order   µ(f) = 1 + (µi − 1)/(1 + j·f/fr)
    broadened     µ(f) = 1 + (µi − 1)/(1 + (j·f/fr)^(1−α))   (Cole–Cole, 0 ≤ α < 1)

In both, µ'' peaks at f = fr. The broadened form is kept only when an F-test
says the extra exponent lowers the weighted misfit significantly.

The fit works on the quantity the VNA measured (S11, or S21 for the two-port
methods), weighted by the S-parameter noise model of rfmeas.methods, so the
points where |Z| is far from Z0 (which move S very little) count for little.
The noise level is then rescaled so the residuals are consistent with it, and
that level is propagated point by point into µ'(f), µ''(f).

Everything above the I/O section is pure numerics on numpy arrays.
"""

from __future__ import annotations

import logging
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import FitError, InputError
from .units import format_engineering as eng
from .magnetics import MU0_H_per_m, CoreGeometry
from .methods import (
    DEFAULT_NOISE,
    METHODS,
    REFLECTION,
    SNoise,
    impedance_from_s,
    method_advice,
    s_from_impedance,
)

log = logging.getLogger(__name__)

FIRST_ORDER = "first-order"
BROADENED = "broadened"
MODEL_FORMS = {
    FIRST_ORDER: "µ(f) = 1 + (µi − 1)/(1 + j·f/fr)",
    BROADENED: "µ(f) = 1 + (µi − 1)/(1 + (j·f/fr)^(1−α))  (Cole–Cole)",
}
TRUST_RELATIVE_UNCERTAINTY = 0.05   # a point is trustworthy when |δµ|/|µ| is below this
PLATEAU_FRACTION = 0.99             # plateau: where the model's µ' is within 1 % of µi
F_TEST_P_VALUE = 0.01               # keep the broadened form only below this p-value
_MAX_ALPHA = 0.9
# The per-point uncertainty never assumes the S noise is below 0.3 × nominal, however clean the
# residuals look (smoothed or simulated files): a real VNA does not resolve |Z| ≪ Z0 that well.
MIN_NOISE_SCALE = 0.3


# ---------------------------------------------------------------- results

def _estimate(value, stderr) -> dict:
    def clean(x):
        return None if x is None or not np.isfinite(x) else float(x)
    return {"value": clean(value), "stderr": clean(stderr)}


@dataclass(frozen=True)
class RelaxationModel:
    """The chosen relaxation model, its parameters with standard errors, and why it was chosen.

    alpha is 0 for the first-order form. `comparison` holds the weighted
    misfit χ² of both forms, the F statistic and its p-value.
    """

    name: str
    mu_initial: float
    mu_initial_stderr: float
    relaxation_frequency_Hz: float
    relaxation_frequency_stderr_Hz: float
    alpha: float
    alpha_stderr: float
    reason: str
    comparison: dict

    def permeability(self, f_Hz) -> np.ndarray:
        """µ' − jµ'' of this model at `f_Hz`."""
        return relaxation_permeability(f_Hz, self.mu_initial, self.relaxation_frequency_Hz, self.alpha)

    def to_dict(self) -> dict:
        parameters = {
            "initial_permeability": _estimate(self.mu_initial, self.mu_initial_stderr),
            "relaxation_frequency_Hz": _estimate(self.relaxation_frequency_Hz,
                                                 self.relaxation_frequency_stderr_Hz),
        }
        if self.name == BROADENED:
            parameters["alpha"] = _estimate(self.alpha, self.alpha_stderr)
        return {"name": self.name, "form": MODEL_FORMS[self.name], "parameters": parameters,
                "reason": self.reason, "comparison": dict(self.comparison)}


@dataclass(frozen=True)
class LossPoint:
    """tan δ = µ''/µ' and the relative loss factor tan δ/µi at one frequency.

    Measured values are interpolated (linear in log f) between the two nearest
    points of the spectrum; None outside the measured range. The model's value
    is always given.
    """

    frequency_Hz: float
    tan_delta: float | None
    tan_delta_over_mu: float | None
    tan_delta_over_mu_stderr: float | None
    model_tan_delta_over_mu: float
    trustworthy: bool

    def to_dict(self) -> dict:
        def clean(x):
            return None if x is None or not np.isfinite(x) else float(x)
        return {"frequency_Hz": float(self.frequency_Hz), "tan_delta": clean(self.tan_delta),
                "tan_delta_over_mu": clean(self.tan_delta_over_mu),
                "tan_delta_over_mu_stderr": clean(self.tan_delta_over_mu_stderr),
                "model_tan_delta_over_mu": clean(self.model_tan_delta_over_mu),
                "trustworthy": bool(self.trustworthy)}


@dataclass(frozen=True, eq=False)
class CoreAnalysis:
    """Everything the single-winding method says about a core.

    initial_permeability     from the low-frequency plateau of the measured
                             spectrum (weighted mean of µ'), or the model's µi
                             when the trustworthy data hold no plateau
                             (`initial_permeability_source` says which)
    relaxation_frequency_Hz  where µ'' peaks: the model's fr
    spectrum                 per point: µ', µ'' with the fitted Rw and Cw
                             removed, their standard uncertainties, and
                             whether the point is trustworthy (|δµ|/|µ| < 5 %
                             and below the winding's self-resonance)
    noise_scale              fitted S noise / nominal S noise (sqrt of the
                             reduced χ² of the fit); the spectrum's uncertainty
                             uses at least MIN_NOISE_SCALE of the nominal noise
    """

    turns: int
    geometry: CoreGeometry
    method: str
    z0_ohm: float
    initial_permeability: float
    initial_permeability_stderr: float
    initial_permeability_source: str
    plateau_points: int
    relaxation_frequency_Hz: float
    relaxation_frequency_stderr_Hz: float
    model: RelaxationModel
    series_resistance_ohm: float
    series_resistance_stderr_ohm: float
    self_capacitance_F: float
    self_capacitance_stderr_F: float
    self_resonance_Hz: float
    f_Hz: np.ndarray
    mu_real: np.ndarray
    mu_imag: np.ndarray
    mu_real_stderr: np.ndarray
    mu_imag_stderr: np.ndarray
    trustworthy: np.ndarray
    trustworthy_band_Hz: tuple[float, float] | None
    loss_factor: tuple[LossPoint, ...]
    noise_scale: float
    nominal_noise: SNoise
    points: int
    material_class: object | None = None
    method_advice: dict | None = None
    warnings: tuple[str, ...] = ()
    source: dict = field(default_factory=dict)

    def model_permeability(self, f_Hz) -> np.ndarray:
        """µ' − jµ'' of the fitted relaxation model."""
        return self.model.permeability(f_Hz)

    def model_impedance(self, f_Hz) -> np.ndarray:
        """The winding's impedance the fit describes, Rw + jωL(f) ∥ Cw."""
        return winding_impedance(f_Hz, self.model_permeability(f_Hz), self.turns, self.geometry,
                                 self.series_resistance_ohm, self.self_capacitance_F)

    @property
    def mu_complex(self) -> np.ndarray:
        return self.mu_real - 1j * self.mu_imag

    def spectrum_at(self, f_Hz):
        """Measured µ', µ'' interpolated linearly in log f (NaN outside the sweep)."""
        x = np.log(np.asarray(f_Hz, dtype=float))
        xp = np.log(self.f_Hz)
        return (np.interp(x, xp, self.mu_real, left=np.nan, right=np.nan),
                np.interp(x, xp, self.mu_imag, left=np.nan, right=np.nan))

    def to_dict(self) -> dict:
        band = None if self.trustworthy_band_Hz is None else {
            "start_Hz": float(self.trustworthy_band_Hz[0]), "stop_Hz": float(self.trustworthy_band_Hz[1])}
        fr_in_band = band is not None and band["start_Hz"] <= self.relaxation_frequency_Hz <= band["stop_Hz"]
        material = None if self.material_class is None else self.material_class.to_dict()
        return {
            "turns": int(self.turns),
            "core": self.geometry.to_dict(),
            "method": self.method,
            "reference_impedance_ohm": float(self.z0_ohm),
            "initial_permeability": {**_estimate(self.initial_permeability, self.initial_permeability_stderr),
                                     "source": self.initial_permeability_source,
                                     "plateau_points": int(self.plateau_points)},
            "relaxation_frequency_Hz": {
                **_estimate(self.relaxation_frequency_Hz, self.relaxation_frequency_stderr_Hz),
                "source": "peak of µ'' of the fitted relaxation model",
                "within_trustworthy_band": bool(fr_in_band)},
            "snoek_product_Hz": float((self.initial_permeability - 1) * self.relaxation_frequency_Hz),
            "loss_factor": [p.to_dict() for p in self.loss_factor],
            "relaxation_model": self.model.to_dict(),
            "winding": {
                "series_resistance_ohm": _estimate(self.series_resistance_ohm, self.series_resistance_stderr_ohm),
                "self_capacitance_F": _estimate(self.self_capacitance_F, self.self_capacitance_stderr_F),
                "self_resonance_Hz": None if not np.isfinite(self.self_resonance_Hz)
                else float(self.self_resonance_Hz),
            },
            "material_class": material,
            "spectrum": {
                "frequency_Hz": self.f_Hz.tolist(),
                "mu_real": self.mu_real.tolist(),
                "mu_imag": self.mu_imag.tolist(),
                "mu_real_stderr": self.mu_real_stderr.tolist(),
                "mu_imag_stderr": self.mu_imag_stderr.tolist(),
                "trustworthy": [bool(t) for t in self.trustworthy],
            },
            "trustworthy_band": band,
            "fit": {"points": int(self.points), "noise_scale": float(self.noise_scale),
                    "noise_scale_used": float(max(self.noise_scale, MIN_NOISE_SCALE)),
                    "nominal_s_noise": self.nominal_noise.to_dict(),
                    "trust_relative_uncertainty": TRUST_RELATIVE_UNCERTAINTY},
            "method_advice": self.method_advice,
            "source": dict(self.source),
            "warnings": list(self.warnings),
        }


# ---------------------------------------------------------------- models

def relaxation_permeability(f_Hz, mu_initial, relaxation_frequency_Hz, alpha=0.0) -> np.ndarray:
    """µ(f) = 1 + (µi − 1)/(1 + (j·f/fr)^(1−α)) as µ' − jµ''; α = 0 is the first-order form."""
    u = np.asarray(f_Hz, dtype=float) / relaxation_frequency_Hz
    b = 1.0 - alpha
    # (j·u)^b on the principal branch: u^b·e^(jπb/2)
    return 1.0 + (mu_initial - 1.0) / (1.0 + u**b * np.exp(0.5j * np.pi * b))


def air_core_inductance_H(turns, geometry: CoreGeometry) -> float:
    """µ0·N²·Ae/le: the winding's inductance per unit relative permeability."""
    return MU0_H_per_m * turns**2 / geometry.core_constant_per_m


def winding_impedance(f_Hz, mu, turns, geometry: CoreGeometry, series_resistance_ohm=0.0,
                      self_capacitance_F=0.0) -> np.ndarray:
    """Z = Rw + [jω·µ·L0 ∥ 1/(jω·Cw)] for a complex permeability µ (µ' − jµ'')."""
    w = 2 * np.pi * np.asarray(f_Hz, dtype=float)
    z_core = 1j * w * air_core_inductance_H(turns, geometry) * np.asarray(mu, dtype=complex)
    return series_resistance_ohm + z_core / (1.0 + 1j * w * self_capacitance_F * z_core)


def permeability_from_impedance(f_Hz, impedance_ohm, turns, geometry: CoreGeometry,
                                series_resistance_ohm=0.0, self_capacitance_F=0.0) -> np.ndarray:
    """Invert `winding_impedance`: remove Rw, then Cw, then divide by jω·L0."""
    w = 2 * np.pi * np.asarray(f_Hz, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        z_core = 1.0 / (1.0 / (np.asarray(impedance_ohm, dtype=complex) - series_resistance_ohm)
                        - 1j * w * self_capacitance_F)
        return z_core / (1j * w * air_core_inductance_H(turns, geometry))


def self_resonance_Hz(model_f_Hz, impedance_ohm) -> float:
    """Lowest frequency where the reactance of `impedance_ohm` turns from inductive to capacitive."""
    x = np.imag(impedance_ohm)
    cross = np.flatnonzero((x[:-1] > 0) & (x[1:] <= 0))
    if cross.size == 0:
        return math.inf
    i = cross[0]
    # interpolate the zero crossing in log f
    t = x[i] / (x[i] - x[i + 1])
    return float(np.exp(np.log(model_f_Hz[i]) + t * (np.log(model_f_Hz[i + 1]) - np.log(model_f_Hz[i]))))


# ---------------------------------------------------------------- fitting

@dataclass(frozen=True)
class _Fit:
    theta: np.ndarray       # [ln(µi − 1), ln fr, Rw, Cw in pF, (α)]
    cov: np.ndarray         # unscaled: (JᵀJ)⁻¹
    chi2: float
    dof: int


_PF = 1e-12


def _unpack(theta):
    mu_i = 1.0 + math.exp(theta[0])
    fr = math.exp(theta[1])
    alpha = theta[4] if len(theta) > 4 else 0.0
    return mu_i, fr, float(theta[2]), float(theta[3]) * _PF, float(alpha)


def _residuals_factory(f_Hz, measured, sigma, turns, geometry, method, z0_ohm):
    scale = math.sqrt(2.0) / sigma  # real and imaginary parts each carry sigma²/2

    def residuals(theta):
        mu_i, fr, rw, cw, alpha = _unpack(theta)
        mu = relaxation_permeability(f_Hz, mu_i, fr, alpha)
        z = winding_impedance(f_Hz, mu, turns, geometry, rw, cw)
        d = (s_from_impedance(method, z, z0_ohm) - measured) * scale
        return np.concatenate([d.real, d.imag])

    return residuals


def _least_squares(residuals, theta0, lower, upper) -> _Fit:
    from scipy.optimize import least_squares

    margin = 1e-9 * (1 + np.abs(np.where(np.isfinite(upper - lower), upper - lower, 1.0)))
    theta0 = np.clip(theta0, lower + margin, upper - margin)
    with np.errstate(all="ignore"):
        result = least_squares(residuals, theta0, bounds=(lower, upper), x_scale="jac", method="trf",
                               max_nfev=400 * len(theta0))
    jac = result.jac
    _, s, vt = np.linalg.svd(jac, full_matrices=False)
    keep = s > s[0] * 1e-10
    cov = (vt[keep].T / s[keep] ** 2) @ vt[keep]
    chi2 = float(np.sum(result.fun**2))
    return _Fit(result.x, cov, chi2, max(1, result.fun.size - len(theta0)))


def _start_values(f_Hz, z, turns, geometry):
    """Rough µi, fr, Rw, Cw from the raw data: low-frequency µ', the µ'' peak, the reactance zero."""
    mu_raw = permeability_from_impedance(f_Hz, z, turns, geometry)
    low = max(3, f_Hz.size // 10)
    mu_i0 = float(np.clip(np.median(mu_raw.real[:low]), 1.5, 1e6))
    rw0 = float(max(0.0, np.min(z.real[:low])))
    srf = self_resonance_Hz(f_Hz, z)
    below = f_Hz < (srf if np.isfinite(srf) else np.inf)
    mu_imag = -mu_raw.imag
    if below.sum() >= 3:
        k = int(np.argmax(np.where(below, mu_imag, -np.inf)))
        fr0 = float(f_Hz[k])
        if k in (0, int(below.sum()) - 1):  # peak at an edge: use where µ' has fallen to half
            half = np.flatnonzero(below & (mu_raw.real < 0.5 * mu_i0))
            fr0 = float(f_Hz[half[0]]) if half.size else float(f_Hz[below][-1] * 3)
    else:
        fr0 = float(f_Hz[-1])
    if np.isfinite(srf):
        mu_srf = relaxation_permeability(srf, mu_i0, fr0)
        l_srf = air_core_inductance_H(turns, geometry) * max(float(np.real(mu_srf)), 1.0)
        cw0 = 1.0 / ((2 * np.pi * srf) ** 2 * l_srf)
    else:
        w_top = 2 * np.pi * f_Hz[-1]
        cw0 = 0.05 / (w_top * max(np.abs(z[-1]), 1e-3))  # a small fraction of the top admittance
    return mu_i0, fr0, rw0, cw0


def _fit_models(f_Hz, z, measured, sigma, turns, geometry, method, z0_ohm):
    """Fit the first-order model from several starts, then the broadened one from its result."""
    residuals = _residuals_factory(f_Hz, measured, sigma, turns, geometry, method, z0_ohm)
    mu_i0, fr0, rw0, cw0 = _start_values(f_Hz, z, turns, geometry)
    if not np.all(np.isfinite([mu_i0, fr0, rw0, cw0])):
        raise FitError("the sweep gives no starting point for a core model: it does not look like a "
                       "wound core (a short or open circuit?)")
    lower = np.array([math.log(1e-3), math.log(f_Hz[0] / 1e3), 0.0, 0.0])
    upper = np.array([math.log(1e7), math.log(f_Hz[-1] * 1e3), np.inf, 1e7])
    best = None
    for fr_start in (fr0, fr0 * 4, fr0 / 4):
        for cw_start in (cw0, cw0 / 10, cw0 * 3):
            theta0 = np.array([math.log(mu_i0 - 1 + 1e-3), math.log(fr_start), rw0, cw_start / _PF])
            fit = _least_squares(residuals, theta0, lower, upper)
            if best is None or fit.chi2 < best.chi2:
                best = fit
    debye = best
    broad = None
    if f_Hz.size > 8:
        lower_b = np.append(lower, 0.0)
        upper_b = np.append(upper, _MAX_ALPHA)
        for alpha0 in (0.15, 0.4):
            fit = _least_squares(residuals, np.append(debye.theta, alpha0), lower_b, upper_b)
            if broad is None or fit.chi2 < broad.chi2:
                broad = fit
    return debye, broad


def _choose_model(debye: _Fit, broad: _Fit | None):
    """F-test of the nested models: keep the extra exponent only if it pays for itself."""
    from scipy.stats import f as f_dist

    comparison = {"first_order_chi2": debye.chi2}
    if broad is None:
        return debye, FIRST_ORDER, "too few points to test a broadened form", comparison
    comparison["broadened_chi2"] = broad.chi2
    gain = max(0.0, debye.chi2 - broad.chi2)
    f_stat = gain / (broad.chi2 / broad.dof) if broad.chi2 > 0 else math.inf
    p_value = float(f_dist.sf(f_stat, 1, broad.dof)) if np.isfinite(f_stat) else 0.0
    comparison.update({"f_statistic": f_stat, "p_value": p_value, "threshold_p_value": F_TEST_P_VALUE})
    alpha = broad.theta[4]
    if p_value < F_TEST_P_VALUE and alpha > 1e-3:
        reason = (f"the broadened form lowers the weighted misfit from {debye.chi2:.4g} to {broad.chi2:.4g} "
                  f"(F = {f_stat:.3g}, p = {p_value:.2g} < {F_TEST_P_VALUE}): the relaxation is wider "
                  "than a single time constant")
        return broad, BROADENED, reason, comparison
    reason = (f"the broadened form does not lower the weighted misfit significantly "
              f"(F = {f_stat:.3g}, p = {p_value:.2g} ≥ {F_TEST_P_VALUE}): one time constant describes the data")
    return debye, FIRST_ORDER, reason, comparison


# ---------------------------------------------------------------- uncertainty of the spectrum

def _spectrum_uncertainty(f_Hz, z, mu, method, z0_ohm, sigma_s, turns, geometry, rw, cw, cov_rc):
    """Standard uncertainty of µ' and µ'' per point: S noise plus the fitted Rw, Cw.

    δµ = g_S·δS + g_R·δRw + g_C·δCw with, from Zc = 1/(1/(Z − Rw) − jωCw) and µ = Zc/(jωL0),
    g_S = Zc²/(Z − Rw)²·(dZ/dS)/(jωL0),  g_R = −Zc²/(Z − Rw)²/(jωL0),  g_C = jω·Zc²/(jωL0).
    Complex circular S noise stays circular, so it adds |g_S|²σ²/2 to each of µ', µ''.
    """
    from .methods import impedance_sensitivity

    w = 2 * np.pi * f_Hz
    jwl0 = 1j * w * air_core_inductance_H(turns, geometry)
    zc = mu * jwl0
    with np.errstate(all="ignore"):
        ratio = zc**2 / (z - rw) ** 2
        g_s = ratio * impedance_sensitivity(method, z, z0_ohm) / jwl0
        g_r = -ratio / jwl0
        g_c = 1j * w * zc**2 / jwl0
    var_noise = 0.5 * (np.abs(g_s) * sigma_s) ** 2

    def parameter_variance(part):
        # δµ' = Re(g)·δp, δµ'' = −Im(g)·δp: same variance either sign
        a = np.stack([part(g_r), part(g_c)], axis=1)
        return np.einsum("ni,ij,nj->n", a, cov_rc, a)

    var_real = var_noise + parameter_variance(np.real)
    var_imag = var_noise + parameter_variance(np.imag)
    return np.sqrt(np.abs(var_real)), np.sqrt(np.abs(var_imag))


def _longest_run(mask: np.ndarray):
    """(first, last) index of the longest run of True, or None."""
    best, start = None, None
    for i, value in enumerate(np.append(mask, False)):
        if value and start is None:
            start = i
        elif not value and start is not None:
            if best is None or i - start > best[1] - best[0] + 1:
                best = (start, i - 1)
            start = None
    return best


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
        warnings.append(f"{f.size - first.size} repeated frequency point(s) were left out (first kept)")
        f, z = f[first], z[first]
    if f.size < 6:
        raise InputError(f"only {f.size} usable points; the core analysis needs at least 6")
    return f, z


def _default_loss_frequencies(band):
    """Decade frequencies (1·10^k) inside the trustworthy band, at most four."""
    if band is None:
        return []
    lo, hi = band
    decades = [10.0**k for k in range(math.ceil(math.log10(lo) - 1e-9), math.floor(math.log10(hi) + 1e-9) + 1)]
    if not decades:
        decades = [math.sqrt(lo * hi)]
    return decades[:4]


def _loss_points(analysis_f, mu_real, mu_imag, mu_real_se, mu_imag_se, trust, mu_i, model, frequencies):
    x = np.log(analysis_f)
    out = []
    for fq in frequencies:
        fq = float(fq)
        model_mu = complex(model.permeability(fq))
        model_value = (-model_mu.imag / model_mu.real) / mu_i if model_mu.real > 0 else math.nan
        if not (analysis_f[0] <= fq <= analysis_f[-1]):
            out.append(LossPoint(fq, None, None, None, model_value, False))
            continue
        xq = math.log(fq)
        mr, mi = np.interp(xq, x, mu_real), np.interp(xq, x, mu_imag)
        sr, si = np.interp(xq, x, mu_real_se), np.interp(xq, x, mu_imag_se)
        k = int(np.searchsorted(analysis_f, fq))
        near = trust[max(0, k - 1):k + 1]
        tan_d = mi / mr if mr > 0 else math.nan
        se = abs(tan_d) * math.hypot(si / mi if mi != 0 else math.inf, sr / mr) / mu_i if mr > 0 else math.nan
        out.append(LossPoint(fq, tan_d, tan_d / mu_i, se, model_value, bool(np.all(near))))
    return tuple(out)


def analyze_core(f_Hz, impedance_ohm, turns: int, geometry: CoreGeometry, z0_ohm: float = 50.0,
                 method: str = REFLECTION, noise: SNoise = DEFAULT_NOISE, loss_frequencies_Hz=None,
                 materials=None, dc_resistance: str | None = None) -> CoreAnalysis:
    """Complex permeability, relaxation and material class of a core from one winding's impedance.

    `impedance_ohm` is the winding's measured impedance at `f_Hz`, obtained
    by `method` (reflection, series-through, shunt-through) with reference
    impedance `z0_ohm`; `noise` is the nominal S-parameter noise of that
    measurement (its level is re-estimated from the fit residuals).
    `loss_frequencies_Hz` chooses where tan δ/µi is reported (default: the
    decades inside the trustworthy band). `materials` (a MaterialTable) and
    `dc_resistance` ('conductive' | 'insulating') give a material-class guess.
    """
    if method not in METHODS:
        raise InputError(f"unknown impedance method {method!r} (use one of: {', '.join(METHODS)})")
    if isinstance(turns, bool) or not isinstance(turns, (int, np.integer)) or turns <= 0:
        raise InputError(f"turns must be a positive whole number, not {turns!r}")
    if not (np.isfinite(z0_ohm) and z0_ohm > 0):
        raise InputError(f"reference impedance must be positive, not {z0_ohm!r}")
    warnings: list[str] = []
    f, z = _clean_input(f_Hz, impedance_ohm, warnings)
    measured = s_from_impedance(method, z, z0_ohm)
    sigma_nominal = noise.sigma(measured)

    debye, broad = _fit_models(f, z, measured, sigma_nominal, turns, geometry, method, z0_ohm)
    fit, name, reason, comparison = _choose_model(debye, broad)
    mu_i, fr, rw, cw, alpha = _unpack(fit.theta)
    if not all(np.isfinite([mu_i, fr, rw, cw])):
        raise FitError("the relaxation fit did not converge to finite values")
    noise_scale = math.sqrt(fit.chi2 / fit.dof)
    cov = fit.cov * noise_scale**2
    se = np.sqrt(np.abs(np.diag(cov)))
    mu_i_se = (mu_i - 1) * se[0]
    fr_se = fr * se[1]
    alpha_se = float(se[4]) if name == BROADENED else 0.0
    model = RelaxationModel(name, mu_i, mu_i_se, fr, fr_se, alpha, alpha_se, reason, comparison)

    # spectrum from the measurement with the fitted winding removed
    mu = permeability_from_impedance(f, z, turns, geometry, rw, cw)
    used_scale = max(noise_scale, MIN_NOISE_SCALE)
    cov_rc = fit.cov[2:4, 2:4] * used_scale**2 * np.array([[1, _PF], [_PF, _PF**2]])
    mu_real_se, mu_imag_se = _spectrum_uncertainty(f, z, mu, method, z0_ohm, used_scale * sigma_nominal,
                                                    turns, geometry, rw, cw, cov_rc)
    model_grid = np.geomspace(f[0], f[-1] * 100, 4000)
    srf = self_resonance_Hz(model_grid, winding_impedance(model_grid, model.permeability(model_grid),
                                                          turns, geometry, rw, cw))
    with np.errstate(all="ignore"):
        relative = np.hypot(mu_real_se, mu_imag_se) / np.abs(mu)
    trust = np.isfinite(relative) & (relative < TRUST_RELATIVE_UNCERTAINTY) & (f < srf)
    run = _longest_run(trust)
    band = None if run is None else (float(f[run[0]]), float(f[run[1]]))

    # initial permeability from the low-frequency plateau
    model_real = model.permeability(f).real
    plateau = trust & (model_real >= PLATEAU_FRACTION * mu_i)
    if plateau.sum() >= 3:
        # each point lifted by the model's own droop below µi (at most 1 %), so the mean is not biased low
        values = mu.real[plateau] + (mu_i - model_real[plateau])
        w = 1.0 / mu_real_se[plateau] ** 2
        value = float(np.sum(w * values) / np.sum(w))
        scatter = np.sum(w * (values - value) ** 2) / (plateau.sum() - 1)
        stderr = float(math.sqrt(max(1.0, scatter) / np.sum(w)))
        mu_init, mu_init_se = value, stderr
        source = (f"low-frequency plateau: weighted mean of µ' over {int(plateau.sum())} trustworthy points "
                  "where the model's µ' is within 1 % of µi, each corrected by the model's droop")
    else:
        mu_init, mu_init_se = mu_i, mu_i_se
        source = "relaxation model (no low-frequency plateau among the trustworthy points)"
        warnings.append("the trustworthy data hold no low-frequency plateau of µ'; the initial permeability "
                        "is the model's extrapolation: sweep lower in frequency or wind more turns")

    if band is None:
        warnings.append("no frequency where µ is resolved to 5 %: the impedance is too far from "
                        f"{z0_ohm:g} Ω or too noisy for this method")
    elif not (band[0] <= fr <= band[1]):
        warnings.append(f"µ'' peaks at {eng(fr, 'Hz', 3)}, outside the trustworthy band "
                        f"({eng(band[0], 'Hz', 3)} – {eng(band[1], 'Hz', 3)}): the relaxation frequency "
                        "is an extrapolation")
    if fr_se > 0.3 * fr:
        warnings.append(f"the relaxation frequency is poorly determined (±{100 * fr_se / fr:.0f} %)")
    if np.isfinite(srf) and srf < fr:
        warnings.append("the winding self-resonates below the core's relaxation: use fewer turns to see "
                        "the relaxation itself")
    if noise_scale > 10:
        warnings.append(f"the residuals are {noise_scale:.0f}× the nominal S noise: the model describes "
                        "the data only roughly (several relaxations, or a dimensional resonance?)")

    advice = method_advice(z, z0_ohm, noise)
    if advice.best != method and advice.median_uncertainty[method] > 2 * advice.median_uncertainty[advice.best]:
        warnings.append(advice.sentence)

    if loss_frequencies_Hz is None:
        loss_frequencies_Hz = _default_loss_frequencies(band)
    loss = _loss_points(f, mu.real, -mu.imag, mu_real_se, mu_imag_se, trust, mu_init, model,
                        loss_frequencies_Hz)

    material = None
    if materials is not None:
        from .materials import match_material

        material = match_material(materials, mu_init, mu_init_se, fr, fr_se, dc_resistance)

    return CoreAnalysis(
        turns=int(turns), geometry=geometry, method=method, z0_ohm=float(z0_ohm),
        initial_permeability=mu_init, initial_permeability_stderr=mu_init_se,
        initial_permeability_source=source, plateau_points=int(plateau.sum()),
        relaxation_frequency_Hz=fr, relaxation_frequency_stderr_Hz=fr_se, model=model,
        series_resistance_ohm=rw, series_resistance_stderr_ohm=float(se[2]),
        self_capacitance_F=cw, self_capacitance_stderr_F=float(se[3]) * _PF, self_resonance_Hz=srf,
        f_Hz=f, mu_real=mu.real.copy(), mu_imag=-mu.imag, mu_real_stderr=mu_real_se,
        mu_imag_stderr=mu_imag_se, trustworthy=trust, trustworthy_band_Hz=band, loss_factor=loss,
        noise_scale=noise_scale, nominal_noise=noise, points=int(f.size), material_class=material,
        method_advice=advice.to_dict(), warnings=tuple(warnings),
    )


# ---------------------------------------------------------------- I/O wrapper

def analyze_core_file(path, turns: int | None = None, geometry: CoreGeometry | None = None,
                      method: str | None = None, noise: SNoise = DEFAULT_NOISE, loss_frequencies_Hz=None,
                      materials_file=None, dc_resistance: str | None = None) -> CoreAnalysis:
    """`analyze_core` on a Touchstone file (.s1p, or .s2p with a two-port `method`) or a manifest.

    From a manifest (.toml or its folder): the primary-open one-port sweep (or
    the only sweep), the primary turns and the `[core]` table; `turns` and
    `geometry` given here replace the manifest's. The shipped material table
    is used, extended by `materials_file` or the RFMEAS_MATERIALS variable.
    """
    from .magnetics import geometry_from_table
    from .materials import load_materials

    path = Path(path)
    if method is not None and method not in METHODS:
        raise InputError(f"unknown impedance method {method!r} (use one of: {', '.join(METHODS)})", path)
    warnings: list[str] = []
    if path.suffix.lower() == ".toml" or path.is_dir():
        from .io.manifest import load_manifest

        mset = load_manifest(path)
        sweep = _pick_sweep(mset, path)
        network, file_warnings, label = sweep.network, list(sweep.warnings), sweep.path
        if sweep.is_two_port and method in (None, REFLECTION):
            network = network.s11
        if turns is None:
            turns = mset.primary_turns if sweep.port1 == "primary" else mset.secondary_turns
        elif (mset.primary_turns if sweep.port1 == "primary" else mset.secondary_turns) not in (None, turns):
            warnings.append(f"--turns {turns} replaces the manifest's turn count")
        if geometry is None:
            if mset.core is None:
                raise InputError("the manifest has no [core] table: give the core size (--toroid or "
                                 "--effective)", path)
            geometry = geometry_from_table(mset.core, mset.manifest_path)
        elif mset.core is not None:
            warnings.append("the core given as an option replaces the manifest's [core] table")
    else:
        from .io.touchstone import read_touchstone

        data = read_touchstone(path)
        network, file_warnings, label = data.network, list(data.warnings), str(path)
    if turns is None:
        raise InputError("the number of turns is needed (--turns N, or primary_turns in a manifest)", path)
    if geometry is None:
        raise InputError("the core size is needed (--toroid OD,ID,HEIGHT or --effective AE_MM2,LE_MM)", path)

    if network.nports == 2:
        method = method or REFLECTION
        s = network.s[:, 0, 0] if method == REFLECTION else network.s[:, 1, 0]
    else:
        if method not in (None, REFLECTION):
            raise InputError(f"--method {method} needs a two-port (.s2p) sweep", path)
        method = REFLECTION
        s = network.s[:, 0, 0]
    z0 = float(np.real(network.z0[0, 0]))
    z = impedance_from_s(method, s, z0)
    table = load_materials(materials_file)
    try:
        analysis = analyze_core(network.f, z, int(turns), geometry, z0, method, noise, loss_frequencies_Hz,
                                table, dc_resistance)
    except (InputError, FitError) as exc:
        raise type(exc)(exc.message, path=exc.path or path) from exc
    from dataclasses import replace

    return replace(analysis, warnings=tuple(file_warnings + warnings) + analysis.warnings,
                   source={"file": label, "points_in_file": int(network.f.size)})


def _pick_sweep(mset, path):
    candidates = [s for s in mset.sweeps if s.port1 == "primary" and not s.is_two_port
                  and s.termination == "open"]
    if candidates:
        return candidates[0]
    if len(mset.sweeps) == 1:
        return mset.sweeps[0]
    raise InputError("the manifest has no one-port sweep of the primary with the secondary open, "
                     "and more than one sweep to choose from", path)
