"""What a fitted transformer does in its circuit: transducer gain, return loss, corners, band edges.

The transformer is driven from a real source resistance on its primary and
works into a real load resistance on its secondary. With those as the port
reference impedances, |S21|² is the transducer power gain (power delivered to
the load over the power the source makes available) and S11 is the primary's
reflection against the source. Everything here is a pure function of the
circuit values; the frequency functions are vectorised over `f_Hz`.

Closed-form estimates (referred to the primary, n = sqrt(L2/L1), R_L' = R_L/n²):
- magnetising corner Rp/(2π·Lm), Rp = R_s ∥ R_L' (ideal transformer with a
  shunt magnetising inductance, a first-order high-pass);
- leakage corner (R_s + R_L')/(2π·L_leak), L_leak = L1(1 − k²);
- shunt-capacitance corner 1/(2π·Rp·C), C = C1 + n²·C2 + (1 − p·n)²·C12
  (p the polarity; the energy-equivalent capacitance at the primary);
- leakage–capacitance resonance 1/(2π·sqrt(L_leak·C)).
They only bracket the numerical search; the figures come from the full model.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from rfmeas.model.circuit import driving_point_admittance, s_from_y, y_elements
from rfmeas.model.params import TransformerParams

POINTS_PER_DECADE = 40
_ROOT_XTOL = 1e-13  # in log10(f): far below the finite-difference steps of the error propagation


def _y(params: TransformerParams, f_Hz):
    return y_elements(np.asarray(f_Hz, dtype=float), *params.values(), polarity=params.polarity,
                      core_loss=params.core_loss)


def transducer_gain_dB(params: TransformerParams, f_Hz, source_ohm: float, load_ohm: float) -> np.ndarray:
    """10·log10 of the transducer power gain from `source_ohm` (primary) into `load_ohm` (secondary)."""
    y11, y12, y22 = _y(params, f_Hz)
    _s11, s21, _s12, _s22 = s_from_y(y11, y12, y22, source_ohm, load_ohm)
    with np.errstate(divide="ignore"):
        return 20.0 * np.log10(np.abs(s21))


def return_loss_dB(params: TransformerParams, f_Hz, source_ohm: float, load_ohm: float) -> np.ndarray:
    """−20·log10|S11| at the primary against `source_ohm`, the secondary loaded by `load_ohm`."""
    y11, y12, y22 = _y(params, f_Hz)
    s11, _s21, _s12, _s22 = s_from_y(y11, y12, y22, source_ohm, load_ohm)
    with np.errstate(divide="ignore"):
        return -20.0 * np.log10(np.abs(s11))


def open_circuit_voltage_ratio(params: TransformerParams, f_Hz) -> np.ndarray:
    """|V2/V1| with the primary driven and the secondary open: |y21/y22|."""
    _y11, y12, y22 = _y(params, f_Hz)
    return np.abs(y12 / y22)


def winding_susceptance_S(params: TransformerParams, f_Hz, winding: str = "primary") -> np.ndarray:
    """Im(Y) into `winding` with the other winding open: negative below its self-resonance."""
    y11, y12, y22 = _y(params, f_Hz)
    if winding == "secondary":
        y11, y22 = y22, y11
    return np.imag(driving_point_admittance(y11, y12, y22, 0.0))


def reactance_limit_Hz(inductance_H, impedance_ohm, factor):
    """Lowest frequency at which 2π·f·L is still `factor` × the impedance: factor·R/(2π·L)."""
    return np.asarray(factor, float) * np.asarray(impedance_ohm, float) / (
        2.0 * math.pi * np.asarray(inductance_H, float))


def _parallel(a, b):
    return a * b / (a + b)


@dataclass(frozen=True)
class CornerEstimates:
    """Closed-form corners of the module docstring, in Hz (inf where an element is absent)."""

    magnetising_Hz: float
    leakage_Hz: float
    capacitance_Hz: float
    resonance_Hz: float
    shunt_capacitance_F: float

    @property
    def high_Hz(self) -> float:
        return min(self.leakage_Hz, self.capacitance_Hz, self.resonance_Hz)

    @property
    def high_limited_by(self) -> str:
        """'leakage' or 'capacitance': which element alone gives the lower upper corner."""
        return "leakage" if self.leakage_Hz <= self.capacitance_Hz else "capacitance"

    def to_dict(self) -> dict:
        return dict(self.__dict__)


def corner_estimates(params: TransformerParams, source_ohm: float, load_ohm: float) -> CornerEstimates:
    n = params.effective_turns_ratio
    reflected_ohm = load_ohm / n**2
    rp = _parallel(source_ohm, reflected_ohm)
    leak_H = params.leakage_inductance_H
    c_F = params.C1_F + n**2 * params.C2_F + (1.0 - params.polarity * n) ** 2 * params.C12_F
    two_pi = 2.0 * math.pi
    return CornerEstimates(
        magnetising_Hz=rp / (two_pi * params.magnetizing_inductance_H),
        leakage_Hz=(source_ohm + reflected_ohm) / (two_pi * leak_H) if leak_H > 0 else math.inf,
        capacitance_Hz=1.0 / (two_pi * rp * c_F) if c_F > 0 else math.inf,
        resonance_Hz=1.0 / (two_pi * math.sqrt(leak_H * c_F)) if c_F > 0 and leak_H > 0 else math.inf,
        shunt_capacitance_F=c_F,
    )


def log_grid(start_Hz: float, stop_Hz: float, points_per_decade: int = POINTS_PER_DECADE) -> np.ndarray:
    decades = max(math.log10(stop_Hz / start_Hz), 1e-3)
    return np.geomspace(start_Hz, stop_Hz, max(int(math.ceil(decades * points_per_decade)) + 1, 3))


def refine_crossing(func, f_a_Hz: float, f_b_Hz: float) -> float:
    """The frequency between f_a and f_b where the scalar function `func(f)` changes sign.

    Where the ends do not bracket a sign change (a value that cannot be evaluated,
    or one that lies exactly on the crossing), the crossing is known only to the
    grid: the geometric midpoint of the two points is returned.
    """
    with np.errstate(all="ignore"):
        value_a, value_b = float(func(f_a_Hz)), float(func(f_b_Hz))
    if value_a == 0.0:
        return float(f_a_Hz)
    if value_b == 0.0:
        return float(f_b_Hz)
    if not (math.isfinite(value_a) and math.isfinite(value_b)) or (value_a > 0) == (value_b > 0):
        return math.sqrt(f_a_Hz * f_b_Hz)
    with np.errstate(all="ignore"):
        return 10.0 ** brentq(lambda u: float(func(10.0 ** u)), math.log10(f_a_Hz), math.log10(f_b_Hz),
                              xtol=_ROOT_XTOL, rtol=4 * np.finfo(float).eps)


def edge_from(f_Hz: np.ndarray, values: np.ndarray, start: int, direction: int) -> int | None:
    """First index from `start` going `direction` (−1 down, +1 up) where `values` < 0, else None.

    `values` is a margin (≥ 0 inside the band); `start` must be inside it.
    """
    idx = np.arange(start, -1, -1) if direction < 0 else np.arange(start, f_Hz.size)
    outside = np.nonzero(values[idx] < 0)[0]
    return None if outside.size == 0 else int(idx[outside[0]])


def band_edges(func, f_Hz: np.ndarray, start: int) -> tuple[float | None, float | None]:
    """Lower and upper edge of the band around grid index `start` where `func(f) ≥ 0`.

    `func` is vectorised; edges are refined between grid points, None where the
    band runs off the grid.
    """
    values = np.asarray(func(f_Hz), dtype=float)
    values = np.where(np.isnan(values), -np.inf, values)
    edges = []
    for direction in (-1, 1):
        i = edge_from(f_Hz, values, start, direction)
        if i is None:
            edges.append(None)
            continue
        inner = i - direction
        edges.append(refine_crossing(func, f_Hz[min(i, inner)], f_Hz[max(i, inner)]))
    return edges[0], edges[1]


def first_upward_crossing(func, f_Hz: np.ndarray) -> float | None:
    """Lowest frequency of the grid where `func` goes from negative to ≥ 0, refined; else None."""
    values = np.asarray(func(f_Hz), dtype=float)
    ups = np.nonzero((values[:-1] < 0) & (values[1:] >= 0))[0]
    if ups.size == 0:
        return None
    i = int(ups[0])
    return refine_crossing(func, f_Hz[i], f_Hz[i + 1])


@dataclass(frozen=True)
class Response:
    """The transformer's band between given terminations (frequencies in Hz, None when not found).

    midband_Hz           geometric mean of the closed-form magnetising and upper corners
    midband_gain_dB      transducer gain there (≤ 0 dB; its negative is the insertion loss)
    low_1dB_Hz ...       where the gain has fallen 1 dB / 3 dB below mid-band, going
                         down (low) or up (high) from mid-band
    return_loss_start_Hz / _stop_Hz  the band around mid-band (or around the best
                         return loss) where the return loss is at least the threshold
    best_return_loss_dB  the highest return loss on the evaluated grid
    """

    midband_Hz: float
    midband_gain_dB: float
    low_1dB_Hz: float | None
    low_3dB_Hz: float | None
    high_1dB_Hz: float | None
    high_3dB_Hz: float | None
    return_loss_threshold_dB: float
    return_loss_start_Hz: float | None
    return_loss_stop_Hz: float | None
    best_return_loss_dB: float
    estimates: CornerEstimates

    def to_dict(self) -> dict:
        d = dict(self.__dict__)
        d["estimates"] = self.estimates.to_dict()
        return d


def band_response(params: TransformerParams, source_ohm: float, load_ohm: float,
                  return_loss_threshold_dB: float) -> Response:
    """Corners and return-loss band of `params` driven from `source_ohm` into `load_ohm`."""
    est = corner_estimates(params, source_ohm, load_ohm)
    f_low = est.magnetising_Hz
    f_high = est.high_Hz if math.isfinite(est.high_Hz) else f_low * 1e6
    f_high = max(f_high, f_low * 10.0)
    f_mid = math.sqrt(f_low * f_high)
    grid = np.unique(np.concatenate([log_grid(f_low / 1e3, f_high * 1e2), [f_mid]]))
    mid = int(np.searchsorted(grid, f_mid))
    g_mid = float(transducer_gain_dB(params, f_mid, source_ohm, load_ohm))

    corners = {}
    for drop_dB in (1.0, 3.0):
        low, high = band_edges(
            lambda f, d=drop_dB: transducer_gain_dB(params, f, source_ohm, load_ohm) - g_mid + d, grid, mid)
        corners[drop_dB] = (low, high)

    def rl_margin(f):
        return return_loss_dB(params, f, source_ohm, load_ohm) - return_loss_threshold_dB

    margins = rl_margin(grid)
    start, stop = None, None
    best = int(mid if margins[mid] >= 0 else np.nanargmax(margins))
    if margins[best] >= 0:
        start, stop = band_edges(rl_margin, grid, best)
    return Response(
        midband_Hz=f_mid, midband_gain_dB=g_mid,
        low_1dB_Hz=corners[1.0][0], low_3dB_Hz=corners[3.0][0],
        high_1dB_Hz=corners[1.0][1], high_3dB_Hz=corners[3.0][1],
        return_loss_threshold_dB=float(return_loss_threshold_dB),
        return_loss_start_Hz=start, return_loss_stop_Hz=stop,
        best_return_loss_dB=float(np.nanmax(margins) + return_loss_threshold_dB),
        estimates=est,
    )


def self_resonance_Hz(params: TransformerParams, winding: str = "primary") -> float | None:
    """Lowest parallel resonance of `winding` with the other winding open (its susceptance turns positive)."""
    n = params.effective_turns_ratio
    c_F = params.C1_F + n**2 * params.C2_F + (1.0 - params.polarity * n) ** 2 * params.C12_F
    if winding == "secondary":
        c_F /= n**2
    inductance_H = params.L1_H if winding == "primary" else params.L2_H
    if c_F <= 0:
        return None
    estimate = 1.0 / (2.0 * math.pi * math.sqrt(inductance_H * c_F))
    return first_upward_crossing(lambda f: winding_susceptance_S(params, f, winding),
                                 log_grid(estimate / 100.0, estimate * 100.0))


def minimum_return_loss_dB(params: TransformerParams, source_ohm: float, load_ohm: float,
                           start_Hz: float, stop_Hz: float, points: int = 400) -> tuple[float, float]:
    """(lowest return loss in dB, the frequency where it occurs) over start..stop."""
    f = np.geomspace(start_Hz, stop_Hz, points)
    rl = return_loss_dB(params, f, source_ohm, load_ohm)
    i = int(np.nanargmin(rl))
    return float(rl[i]), float(f[i])
