"""Impedance of one winding from reflection or two-port (series-through, shunt-through) sweeps.

A single winding measured as a two-port element between two Z0 ports:

- reflection      the winding on port 1 to ground:   S11 = (Z - Z0)/(Z + Z0)
- series-through  the winding in series, port 1 to port 2:  S21 = 2 Z0/(2 Z0 + Z)
- shunt-through   the winding from the through line to ground: S21 = 2 Z/(2 Z + Z0)

The two-port forms follow from the ABCD matrix of a series impedance
[[1, Z], [0, 1]] and of a shunt admittance [[1, 0], [1/Z, 1]] converted to S
with equal real reference impedances (Pozar, Microwave Engineering, ABCD
table and ABCD-to-S conversion).

Sensitivity. A measured S carries complex noise n with E|n|^2 = sigma_S^2;
to first order the impedance error is dZ/dS * n, so the relative standard
uncertainty of Z is |dZ/dS| sigma_S / |Z|:

- reflection      |dZ/dS| = |Z + Z0|^2 / (2 Z0)
- series-through  |dZ/dS| = |2 Z0 + Z|^2 / (2 Z0)
- shunt-through   |dZ/dS| = |2 Z + Z0|^2 / (2 Z0)

With a purely additive noise of the same sigma on every S parameter the
reflection method is never worse than either two-port method (compare the
three numerators). What makes the two-port methods better at the extremes is
that a VNA's error is not purely additive: it has a floor (receiver noise,
residual directivity) plus a part proportional to |S| (trace noise, drift of
the calibration). Near |S11| = 1 that proportional part swamps the small
change a very high or very low impedance makes to S11, while a small S21 is
measured against the floor alone. `SNoise(floor, relative)` models both:
sigma_S = sqrt(floor^2 + (relative |S|)^2).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rfmeas.errors import InputError

REFLECTION = "reflection"
SERIES_THROUGH = "series-through"
SHUNT_THROUGH = "shunt-through"
METHODS = (REFLECTION, SERIES_THROUGH, SHUNT_THROUGH)


@dataclass(frozen=True)
class SNoise:
    """Standard uncertainty of a measured S parameter: sqrt(floor^2 + (relative |S|)^2).

    floor     additive complex noise, linear (1e-4 is -80 dB)
    relative  noise proportional to |S| (2e-3 is about 0.017 dB and 0.11 degrees)
    """

    floor: float = 1e-4
    relative: float = 2e-3

    def __post_init__(self):
        if not (self.floor >= 0 and self.relative >= 0) or not np.isfinite(self.floor + self.relative):
            raise InputError("S-parameter noise floor and relative noise must be finite and not negative")
        if self.floor == 0 and self.relative == 0:
            raise InputError("S-parameter noise must not be zero in both floor and relative part")

    def sigma(self, s) -> np.ndarray:
        """Standard uncertainty of each measured S value (E|n|^2 = sigma^2)."""
        return np.hypot(self.floor, self.relative * np.abs(s))

    def to_dict(self) -> dict:
        return {"floor": float(self.floor), "relative": float(self.relative)}


# Typical of a small two-port VNA after a full calibration (from memory):
# -80 dB floor, about 0.02 dB / 0.1 degree proportional error. Pass your own.
DEFAULT_NOISE = SNoise()


def _check_method(method: str) -> str:
    if method not in METHODS:
        raise InputError(f"unknown impedance method '{method}' (use one of: {', '.join(METHODS)})")
    return method


# ---------------------------------------------------------------- forward models (Z -> S)

def reflection_s11(impedance_ohm, z0_ohm: float = 50.0) -> np.ndarray:
    """S11 of an impedance to ground on a Z0 port."""
    z = np.asarray(impedance_ohm, dtype=complex)
    return (z - z0_ohm) / (z + z0_ohm)


def series_through_s21(impedance_ohm, z0_ohm: float = 50.0) -> np.ndarray:
    """S21 of an impedance in series between two Z0 ports."""
    z = np.asarray(impedance_ohm, dtype=complex)
    return 2.0 * z0_ohm / (2.0 * z0_ohm + z)


def shunt_through_s21(impedance_ohm, z0_ohm: float = 50.0) -> np.ndarray:
    """S21 of an impedance from the through line to ground between two Z0 ports."""
    z = np.asarray(impedance_ohm, dtype=complex)
    return 2.0 * z / (2.0 * z + z0_ohm)


_FORWARD = {REFLECTION: reflection_s11, SERIES_THROUGH: series_through_s21,
            SHUNT_THROUGH: shunt_through_s21}


def s_from_impedance(method: str, impedance_ohm, z0_ohm: float = 50.0) -> np.ndarray:
    """The S parameter `method` measures (S11 or S21) for an impedance: the forward model."""
    return _FORWARD[_check_method(method)](impedance_ohm, z0_ohm)


# ---------------------------------------------------------------- inverse (S -> Z)

def impedance_from_reflection(s11, z0_ohm: float = 50.0) -> np.ndarray:
    """Z = Z0 (1 + S11)/(1 - S11); S11 = 1 gives inf."""
    s = np.asarray(s11, dtype=complex)
    with np.errstate(divide="ignore", invalid="ignore"):
        return z0_ohm * (1.0 + s) / (1.0 - s)


def impedance_from_series_through(s21, z0_ohm: float = 50.0) -> np.ndarray:
    """Z = 2 Z0 (1 - S21)/S21 for a series element; S21 = 0 gives inf."""
    s = np.asarray(s21, dtype=complex)
    with np.errstate(divide="ignore", invalid="ignore"):
        return 2.0 * z0_ohm * (1.0 - s) / s


def impedance_from_shunt_through(s21, z0_ohm: float = 50.0) -> np.ndarray:
    """Z = Z0 S21 / (2 (1 - S21)) for a shunt element; S21 = 1 gives inf."""
    s = np.asarray(s21, dtype=complex)
    with np.errstate(divide="ignore", invalid="ignore"):
        return z0_ohm * s / (2.0 * (1.0 - s))


_INVERSE = {REFLECTION: impedance_from_reflection, SERIES_THROUGH: impedance_from_series_through,
            SHUNT_THROUGH: impedance_from_shunt_through}


def impedance_from_s(method: str, s, z0_ohm: float = 50.0) -> np.ndarray:
    """Impedance of the winding from the S parameter `method` measures."""
    return _INVERSE[_check_method(method)](s, z0_ohm)


# ---------------------------------------------------------------- sensitivity

def impedance_sensitivity(method: str, impedance_ohm, z0_ohm: float = 50.0) -> np.ndarray:
    """dZ/dS (ohms per unit S) of `method` at the impedance Z, complex."""
    z = np.asarray(impedance_ohm, dtype=complex)
    _check_method(method)
    if method == REFLECTION:
        return (z + z0_ohm) ** 2 / (2.0 * z0_ohm)
    if method == SERIES_THROUGH:
        # Z = 2 Z0 (1/S - 1): dZ/dS = -2 Z0 / S^2 = -(2 Z0 + Z)^2 / (2 Z0)
        return -((2.0 * z0_ohm + z) ** 2) / (2.0 * z0_ohm)
    # Z = (Z0/2) S/(1 - S): dZ/dS = (Z0/2)/(1 - S)^2 = (2 Z + Z0)^2 / (2 Z0)
    return (2.0 * z + z0_ohm) ** 2 / (2.0 * z0_ohm)


def relative_uncertainty(method: str, impedance_ohm, z0_ohm: float = 50.0,
                         noise: SNoise | float = DEFAULT_NOISE) -> np.ndarray:
    """Relative standard uncertainty of Z, |dZ/dS| sigma_S / |Z|, to first order.

    `noise` is an SNoise or a float: a purely additive complex sigma on S.
    A fit weights each point by the inverse of this (times |Z| for an
    absolute weight). Z = 0 or inf gives inf.
    """
    if not isinstance(noise, SNoise):
        noise = SNoise(floor=float(noise), relative=0.0)
    z = np.asarray(impedance_ohm, dtype=complex)
    sigma_s = noise.sigma(s_from_impedance(method, z, z0_ohm))
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.abs(impedance_sensitivity(method, z, z0_ohm)) * sigma_s / np.abs(z)
    return np.where(np.isfinite(out), out, np.inf)


def uncertainty_table(impedance_ohm, z0_ohm: float = 50.0,
                      noise: SNoise | float = DEFAULT_NOISE) -> dict[str, np.ndarray]:
    """Relative uncertainty of Z for every method: {method: array}."""
    return {m: relative_uncertainty(m, impedance_ohm, z0_ohm, noise) for m in METHODS}


# ---------------------------------------------------------------- choosing a method

def best_method(impedance_ohm, z0_ohm: float = 50.0, noise: SNoise | float = DEFAULT_NOISE,
                per_point: bool = True):
    """The method with the smallest relative uncertainty of Z.

    Per point: a str for a scalar, else an array of str. With per_point=False,
    one str for the whole range: the method with the lowest median uncertainty.
    """
    table = uncertainty_table(impedance_ohm, z0_ohm, noise)
    stacked = np.stack([table[m] for m in METHODS])
    if not per_point:
        return METHODS[int(np.argmin(_median_per_method(stacked)))]
    choice = np.asarray(METHODS, dtype=object)[np.argmin(stacked, axis=0)]
    return str(choice) if np.ndim(choice) == 0 else choice.astype(str)


def _median_per_method(stacked: np.ndarray) -> np.ndarray:
    """Median over points (last axis), inf where a method never resolves."""
    return np.median(stacked.reshape(len(METHODS), -1), axis=-1)


@dataclass(frozen=True)
class MethodAdvice:
    """Which method resolves a winding's impedance best over a sweep, and why.

    low_ohm, high_ohm  10th and 90th percentile of |Z| ("most of the sweep")
    best               the method with the lowest median relative uncertainty
    median_uncertainty median relative uncertainty of Z per method
    gain_over_reflection  median uncertainty of reflection / that of `best`
    """

    low_ohm: float
    high_ohm: float
    best: str
    median_uncertainty: dict
    gain_over_reflection: float
    sentence: str

    def to_dict(self) -> dict:
        return {
            "low_ohm": float(self.low_ohm), "high_ohm": float(self.high_ohm),
            "best": self.best,
            "median_uncertainty": {k: float(v) for k, v in self.median_uncertainty.items()},
            "gain_over_reflection": float(self.gain_over_reflection),
            "sentence": self.sentence,
        }


def method_advice(impedance_ohm, z0_ohm: float = 50.0,
                  noise: SNoise | float = DEFAULT_NOISE) -> MethodAdvice:
    """Compare the three methods over the impedances of a sweep."""
    from rfmeas.units import format_engineering

    z = np.asarray(impedance_ohm, dtype=complex).ravel()
    mag = np.abs(z)
    good = np.isfinite(mag) & (mag > 0)
    if not good.any():
        raise InputError("no finite, non-zero impedance to advise on")
    z = z[good]
    table = uncertainty_table(z, z0_ohm, noise)
    medians = {m: float(np.median(table[m])) for m in METHODS}
    best = min(METHODS, key=lambda m: medians[m])
    low, high = np.percentile(np.abs(z), [10.0, 90.0])
    span = "–".join(format_engineering(float(v), "Ω", 2) for v in (low, high))
    gain = medians[REFLECTION] / medians[best]
    if best == REFLECTION:
        others = ", ".join(f"{m} about {_ratio(medians[m] / medians[best])} worse"
                           for m in METHODS if m != REFLECTION)
        sentence = (f"this winding is {span} over most of the sweep: reflection resolves it best "
                    f"({others})")
    else:
        sentence = (f"this winding is {span} over most of the sweep: a {best} measurement would "
                    f"resolve it about {_ratio(gain)} better than reflection")
    return MethodAdvice(float(low), float(high), best, medians, float(gain), sentence)


def _ratio(x: float) -> str:
    if not np.isfinite(x):
        return "infinitely"
    return f"{x:.0f}×" if x >= 10 else f"{x:.1f}×"


def advise_method(impedance_ohm, z0_ohm: float = 50.0,
                  noise: SNoise | float = DEFAULT_NOISE) -> str:
    """One plain sentence: which method to use for this winding, and how much it gains."""
    return method_advice(impedance_ohm, z0_ohm, noise).sentence
