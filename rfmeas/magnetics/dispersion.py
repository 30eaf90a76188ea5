"""Dispersion models of a core's permeability, the test winding around it, and a small VNA's error model.

Pure numerics on numpy arrays, vectorised over frequency (µ = µ' − jµ'', IEV 221-03-06).

Permeability models (χ = µ − 1, the susceptibility):

    relaxation  χ(f) = χr/(1 + j·f/fr)                        µ'' peaks at fr; µ' falls monotonically
    resonance   χ(f) = χs/(1 − (f/f0)² + j·β·f/f0)            damped resonance; µ' rises before it falls
                                                                 when β < 1 (about (1 − β²)(f/f0)² at first)
    sum         χ(f) = the two above added (two mechanisms in one core)

The damped resonance is exactly the impedance of a parallel L, C, G: with L = L0·χs,
C = 1/((2π·f0)²·L) and G = β/(2π·f0·L), jω·L0·χ(f) = 1/(1/(jωL) + jωC + G); a relaxation is
L in parallel with R = 2π·fr·L. So every model here is a lumped network a circuit simulator can
check.

The winding as measured:

    Z(f) = Rs + jω·Ls + Zc/(1 + jω·Cw·Zc),   Zc = jω·L0·µ(f),   L0 = µ0·N²/C1

Rs is the series resistance (leads and copper), Ls the series lead inductance (does not scale
with N²), Cw the winding's own capacitance across the N²-scaling part.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from rfmeas.errors import InputError
from rfmeas.magnetics.geometry import CoreGeometry
from rfmeas.magnetics.permeability import air_core_inductance_H

RELAXATION = "relaxation"
RESONANCE = "resonance"
SUM = "resonance + relaxation"
MODELS = (RELAXATION, RESONANCE, SUM)
MODEL_FORMS = {
    RELAXATION: "µ(f) = 1 + χr/(1 + j·f/fr)",
    RESONANCE: "µ(f) = 1 + χs/(1 − (f/f0)² + j·β·f/f0)",
    SUM: "µ(f) = 1 + χs/(1 − (f/f0)² + j·β·f/f0) + χr/(1 + j·f/fr)",
}
# names of each model's permeability parameters, in the order of its parameter vector
MODEL_PARAMETERS = {
    RELAXATION: ("relaxation_susceptibility", "relaxation_frequency_Hz"),
    RESONANCE: ("resonance_susceptibility", "resonance_frequency_Hz", "resonance_damping"),
    SUM: ("resonance_susceptibility", "resonance_frequency_Hz", "resonance_damping",
          "relaxation_susceptibility", "relaxation_frequency_Hz"),
}


def relaxation_susceptibility(f_Hz, chi, relaxation_frequency_Hz) -> np.ndarray:
    """χ = χr/(1 + j·f/fr) in the µ' − jµ'' convention (χ'' > 0)."""
    return chi / (1.0 + 1j * np.asarray(f_Hz, dtype=float) / relaxation_frequency_Hz)


def resonance_susceptibility(f_Hz, chi, resonance_frequency_Hz, damping) -> np.ndarray:
    """χ = χs/(1 − x² + j·β·x), x = f/f0: a damped resonance (χ'' > 0)."""
    x = np.asarray(f_Hz, dtype=float) / resonance_frequency_Hz
    return chi / (1.0 - x * x + 1j * damping * x)


def model_permeability(model: str, f_Hz, values) -> np.ndarray:
    """µ' − jµ'' of `model` with its parameter `values` (in MODEL_PARAMETERS order)."""
    if model == RELAXATION:
        return 1.0 + relaxation_susceptibility(f_Hz, *values)
    if model == RESONANCE:
        return 1.0 + resonance_susceptibility(f_Hz, *values)
    if model == SUM:
        return 1.0 + resonance_susceptibility(f_Hz, *values[:3]) + relaxation_susceptibility(f_Hz, *values[3:])
    raise InputError(f"unknown dispersion model {model!r} (use one of: {', '.join(MODELS)})")


def static_permeability(model: str, values) -> float:
    """µ(f → 0) = 1 + the sum of the susceptibilities."""
    if model == SUM:
        return 1.0 + values[0] + values[3]
    return 1.0 + values[0]


# ---------------------------------------------------------------- the winding

def winding_impedance(f_Hz, mu, turns, geometry: CoreGeometry, series_resistance_ohm=0.0,
                      lead_inductance_H=0.0, winding_capacitance_F=0.0) -> np.ndarray:
    """Z = Rs + jωLs + Zc/(1 + jωCw·Zc), Zc = jω·L0·µ, for a complex permeability µ (µ' − jµ'')."""
    w = 2 * np.pi * np.asarray(f_Hz, dtype=float)
    zc = 1j * w * air_core_inductance_H(turns, geometry) * np.asarray(mu, dtype=complex)
    return series_resistance_ohm + 1j * w * lead_inductance_H + zc / (1.0 + 1j * w * winding_capacitance_F * zc)


def core_impedance(f_Hz, impedance_ohm, series_resistance_ohm=0.0, lead_inductance_H=0.0,
                   winding_capacitance_F=0.0) -> np.ndarray:
    """Zc: the measured Z with the series part and then the winding capacitance removed."""
    w = 2 * np.pi * np.asarray(f_Hz, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        zw = np.asarray(impedance_ohm, dtype=complex) - series_resistance_ohm - 1j * w * lead_inductance_H
        return 1.0 / (1.0 / zw - 1j * w * winding_capacitance_F)


def permeability_from_impedance(f_Hz, impedance_ohm, turns, geometry: CoreGeometry, series_resistance_ohm=0.0,
                                lead_inductance_H=0.0, winding_capacitance_F=0.0) -> np.ndarray:
    """Invert `winding_impedance`: µ = Zc/(jω·L0) with Rs, Ls and Cw removed."""
    w = 2 * np.pi * np.asarray(f_Hz, dtype=float)
    zc = core_impedance(f_Hz, impedance_ohm, series_resistance_ohm, lead_inductance_H, winding_capacitance_F)
    with np.errstate(divide="ignore", invalid="ignore"):
        return zc / (1j * w * air_core_inductance_H(turns, geometry))


# ---------------------------------------------------------------- the VNA's error model

def _db_to_linear(db: float) -> float:
    return 10.0 ** (db / 20.0)


@dataclass(frozen=True)
class VnaErrorModel:
    """Residual errors of a small VNA after its calibration, as the size of the error on a measured S.

    The one-port error model (three terms: directivity e00, source match e11, tracking e01e10;
    common practice) leaves, after an imperfect calibration, an error on S11 of about

        δS ≈ ed + (et − 1)·S + es·S²

    whose size we take as σ_S = sqrt(ed² + (et·|S|)² + (es·|S|²)²), with ed the residual
    directivity, es the residual source match and et the tracking error (relative). Near
    |S| ≈ 1 the absolute parts ed and es dominate: with −40 dB and −35 dB they are worth about
    25 Ω·0.021 ≈ 0.5 Ω on a low impedance, which is why R and X below about 0.5 Ω come out
    negative in real files. In mid-range the error is relative (et and ed).

    Defaults: −40 dB directivity, −35 dB source match, ±0.05 dB tracking: typical after a
    hobby-grade SOL calibration (from memory). The errors are systematic (they vary slowly
    with frequency), so they are not averaged down by taking more points.
    """

    directivity_db: float = -40.0
    source_match_db: float = -35.0
    tracking_db: float = 0.05

    def __post_init__(self):
        for name in ("directivity_db", "source_match_db"):
            value = getattr(self, name)
            if not (math.isfinite(value) and -140.0 <= value <= -6.0):
                raise InputError(f"VNA {name.replace('_db', '')} must be between −140 and −6 dB, not {value!r}")
        if not (math.isfinite(self.tracking_db) and 0.0 <= abs(self.tracking_db) <= 3.0):
            raise InputError(f"VNA tracking error must be 0 to 3 dB, not {self.tracking_db!r}")

    @property
    def directivity(self) -> float:
        return _db_to_linear(self.directivity_db)

    @property
    def source_match(self) -> float:
        return _db_to_linear(self.source_match_db)

    @property
    def tracking(self) -> float:
        return abs(_db_to_linear(abs(self.tracking_db)) - 1.0)

    def sigma_s(self, s) -> np.ndarray:
        """Size of the error on each measured S11."""
        a = np.abs(np.asarray(s, dtype=complex))
        return np.sqrt(self.directivity**2 + (self.tracking * a) ** 2 + (self.source_match * a * a) ** 2)

    def sigma_impedance(self, impedance_ohm, z0_ohm: float = 50.0, method: str = "reflection") -> np.ndarray:
        """Size of the error on Z: |dZ/dS|·σ_S (reflection: |dZ/dS| = |Z + Z0|²/(2·Z0)).

        For the two-port methods the same form is applied to the S21 they measure (isolation,
        tracking and match residues in the roles of ed, et, es): a rough but sized guess.
        """
        from rfmeas.model.methods import impedance_sensitivity, s_from_impedance

        z = np.asarray(impedance_ohm, dtype=complex)
        with np.errstate(divide="ignore", invalid="ignore"):
            s = s_from_impedance(method, z, z0_ohm)
            out = np.abs(impedance_sensitivity(method, z, z0_ohm)) * self.sigma_s(s)
        return np.where(np.isfinite(out), out, np.inf)

    def sigma_impedance_compensated(self, impedance_ohm, short_ohm, z0_ohm: float = 50.0,
                                    method: str = "reflection") -> np.ndarray:
        """Size of the error on Z − Zs when the shorted leads Zs were swept with the same calibration.

        Each residual term e_k (k = 0 directivity, 1 tracking, 2 source match) moves a measured Z
        by e_k·(dZ/dS)·S^k; the winding and the short share the terms, so only the difference
        of their moves is left: sqrt(Σ |e_k|²·|g(Z)·S(Z)^k − g(Zs)·S(Zs)^k|²), g = dZ/dS. Near a
        short both move almost alike (short compensation, common practice), which is what
        makes a one-turn winding of a fraction of an ohm measurable.
        """
        from rfmeas.model.methods import impedance_sensitivity, s_from_impedance

        z = np.asarray(impedance_ohm, dtype=complex)
        zs = np.asarray(short_ohm, dtype=complex)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            s, ss = s_from_impedance(method, z, z0_ohm), s_from_impedance(method, zs, z0_ohm)
            g, gs = impedance_sensitivity(method, z, z0_ohm), impedance_sensitivity(method, zs, z0_ohm)
            terms = (self.directivity, self.tracking, self.source_match)
            out = np.sqrt(sum((e * np.abs(g * s**k - gs * ss**k)) ** 2 for k, e in enumerate(terms)))
        return np.where(np.isfinite(out), out, np.inf)

    def to_dict(self) -> dict:
        return {"directivity_dB": float(self.directivity_db), "source_match_dB": float(self.source_match_db),
                "tracking_dB": float(self.tracking_db),
                "form": "σ_S = sqrt(ed² + (et·|S|)² + (es·|S|²)²); σ_Z = |Z + Z0|²/(2·Z0)·σ_S"}


DEFAULT_VNA_ERRORS = VnaErrorModel()


# ---------------------------------------------------------------- grids and the plateau

def log_thin_indices(f_Hz, points_per_decade: float = 50.0) -> np.ndarray:
    """Indices of at most `points_per_decade` points per decade of an ascending grid.

    A linear grid from 50 kHz to 300 MHz puts nearly every point in the top decade; the fit
    uses these indices so that every decade weighs the same (where the grid is sparser than
    this, every point is kept). Vectorised; the first and last points are always kept.
    """
    f = np.asarray(f_Hz, dtype=float)
    if f.size <= 2:
        return np.arange(f.size)
    cell = np.floor((np.log10(f) - math.log10(f[0])) * points_per_decade).astype(np.int64)
    first = np.flatnonzero(np.r_[True, cell[1:] != cell[:-1]])
    return np.unique(np.r_[first, f.size - 1])


def longest_run(mask) -> tuple[int, int] | None:
    """(first, last) index of the longest run of True values, or None (vectorised)."""
    m = np.asarray(mask, dtype=bool)
    if not m.any():
        return None
    edges = np.diff(np.r_[0, m.astype(np.int8), 0])
    starts, stops = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)
    k = int(np.argmax(stops - starts))
    return int(starts[k]), int(stops[k] - 1)


def first_run(mask, min_points: int = 1) -> tuple[int, int] | None:
    """(first, last) index of the lowest run of True values with at least `min_points` points."""
    m = np.asarray(mask, dtype=bool)
    if not m.any():
        return None
    edges = np.diff(np.r_[0, m.astype(np.int8), 0])
    starts, stops = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)
    long_enough = np.flatnonzero(stops - starts >= min_points)
    if long_enough.size == 0:
        return None
    k = int(long_enough[0])
    return int(starts[k]), int(stops[k] - 1)


def weighted_median(values, weights) -> float:
    """The weighted median (the value where the cumulative weight reaches half)."""
    v = np.asarray(values, dtype=float)
    w = np.asarray(weights, dtype=float)
    order = np.argsort(v)
    cum = np.cumsum(w[order])
    return float(v[order][np.searchsorted(cum, 0.5 * cum[-1])])
