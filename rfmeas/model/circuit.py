"""Closed-form evaluation of the two-winding equivalent circuit, vectorised over frequency.

Topology (common ground, as a VNA sees the transformer):

    P ──R1──Ll1──┬──────────┐ ideal 1:a ┌──Ll2──R2── S
                 Lm ∥ Rc    │           │
    G ───────────┴──────────┘           └────────── G

plus C1 from P to ground, C2 from S to ground and C12 from P to S.
Lm = k L1, Ll1 = L1 (1-k), Ll2 = L2 (1-k), a = sqrt(L2/L1): terminal-equivalent
to coupled inductors L1, L2, M = k sqrt(L1 L2) with Rc across the magnetising
branch. Every function takes plain floats or numpy arrays that broadcast
against `f_Hz` (so a stack of parameter sets evaluates in one call).
"""

from __future__ import annotations

import numpy as np

from rfmeas.model.params import TransformerParams
from rfmeas.model.termination import Termination

"""Where Rc sits: across the magnetising branch Lm (the design's model), or across the whole
primary inductance L1 (between the inner end of R1 and ground, outside the leakage)."""


def y_elements(f_Hz, L1_H, L2_H, k, R1_ohm, R2_ohm, Rc_ohm, C1_F, C2_F, C12_F, polarity=1,
               core_loss="magnetizing"):
    """Two-port admittance matrix elements (y11, y12, y22) at the primary (1) and secondary (2).

    The network is reciprocal, so y21 = y12. `polarity` -1 reverses the
    secondary winding (M < 0). `core_loss` is one of rfmeas.model.params.CORE_LOSS_PLACEMENTS.
    """
    if core_loss == "primary":
        return _y_elements_loss_across_primary(f_Hz, L1_H, L2_H, k, R1_ohm, R2_ohm, Rc_ohm,
                                               C1_F, C2_F, C12_F, polarity)
    jw = 2j * np.pi * np.asarray(f_Hz, dtype=float)
    turns_ratio_sq = L2_H / L1_H
    turns_ratio = np.sqrt(turns_ratio_sq)
    ym = 1.0 / (jw * (k * L1_H)) + 1.0 / Rc_ohm
    zm = 1.0 / ym
    za = R1_ohm + jw * (L1_H * (1.0 - k))
    zb = R2_ohm + jw * (L2_H * (1.0 - k))
    # det(Z) = Z11 Z22 - Z12² written without the cancelling Zm² terms
    det = za * zb + zm * (zb + turns_ratio_sq * za)
    z11 = za + zm
    z22 = zb + turns_ratio_sq * zm
    z12 = polarity * turns_ratio * zm
    y11 = z22 / det + jw * (C1_F + C12_F)
    y22 = z11 / det + jw * (C2_F + C12_F)
    y12 = -z12 / det - jw * C12_F
    return y11, y12, y22


def _y_elements_loss_across_primary(f_Hz, L1_H, L2_H, k, R1_ohm, R2_ohm, Rc_ohm, C1_F, C2_F, C12_F,
                                    polarity=1):
    """y_elements with Rc across the whole primary inductance of the coupled pair.

    Coupled inductors (Z = jω[[L1, M], [M, L2]]), Rc from the inner primary
    node to ground, R1 and R2 in series outside, C1, C2, C12 at the terminals.
    """
    jw = 2j * np.pi * np.asarray(f_Hz, dtype=float)
    m = polarity * k * np.sqrt(L1_H * L2_H)
    det = jw * jw * L1_H * L2_H * (1.0 - k * k)
    # inverse of the inductance matrix, plus the core-loss conductance on the primary node
    a11 = jw * L2_H / det + 1.0 / Rc_ohm
    a12 = -jw * m / det
    a22 = jw * L1_H / det
    dy = a11 * a22 - a12 * a12
    z11 = a22 / dy + R1_ohm
    z22 = a11 / dy + R2_ohm
    z12 = -a12 / dy
    dz = z11 * z22 - z12 * z12
    y11 = z22 / dz + jw * (C1_F + C12_F)
    y22 = z11 / dz + jw * (C2_F + C12_F)
    y12 = -z12 / dz - jw * C12_F
    return y11, y12, y22


def _params_tuple(params: TransformerParams):
    return params.values() + (params.polarity, params.core_loss)


def admittance_matrix(params: TransformerParams, f_Hz) -> np.ndarray:
    """Y matrix, shape (F, 2, 2), port 1 = primary, port 2 = secondary, in siemens."""
    y11, y12, y22 = y_elements(np.asarray(f_Hz, float), *_params_tuple(params))
    y = np.empty(np.shape(y11) + (2, 2), dtype=complex)
    y[..., 0, 0], y[..., 0, 1], y[..., 1, 0], y[..., 1, 1] = y11, y12, y12, y22
    return y


def driving_point_admittance(y11, y12, y22, load_admittance_S):
    """Admittance into port 1 with `load_admittance_S` across port 2 (0 open, inf short)."""
    if np.isscalar(load_admittance_S) and np.isinf(load_admittance_S):
        return y11
    return y11 - y12 * y12 / (y22 + load_admittance_S)


def termination_admittance(termination) -> float:
    """Admittance in siemens of a Termination (or its JSON value: 'open', 'short', ohms)."""
    return Termination.coerce(termination).admittance_S()


def input_impedance(params: TransformerParams, f_Hz, port1: str = "primary",
                    termination="open") -> np.ndarray:
    """Impedance at the terminals of `port1` winding with the other winding terminated."""
    y11, y12, y22 = y_elements(np.asarray(f_Hz, float), *_params_tuple(params))
    if port1 == "secondary":
        y11, y22 = y22, y11
    yin = driving_point_admittance(y11, y12, y22, termination_admittance(termination))
    return 1.0 / yin


def reflection_from_admittance(yin, z0_ohm):
    """Γ = (1 - z0 Y) / (1 + z0 Y) for a real reference impedance."""
    x = z0_ohm * yin
    return (1.0 - x) / (1.0 + x)


def reflection(params: TransformerParams, f_Hz, port1: str = "primary",
               termination="open", z0_ohm: float = 50.0) -> np.ndarray:
    """One-port S11 seen at the `port1` winding, other winding terminated."""
    y11, y12, y22 = y_elements(np.asarray(f_Hz, float), *_params_tuple(params))
    if port1 == "secondary":
        y11, y22 = y22, y11
    yin = driving_point_admittance(y11, y12, y22, termination_admittance(termination))
    return reflection_from_admittance(yin, z0_ohm)


def s_from_y(y11, y12, y22, z0_port1_ohm=50.0, z0_port2_ohm=50.0):
    """(S11, S21, S12, S22) of a reciprocal two-port from its Y elements, real reference impedances."""
    g1 = np.sqrt(z0_port1_ohm)
    g2 = np.sqrt(z0_port2_ohm)
    a = z0_port1_ohm * y11
    d = z0_port2_ohm * y22
    b = g1 * g2 * y12
    den = (1.0 + a) * (1.0 + d) - b * b
    s11 = ((1.0 - a) * (1.0 + d) + b * b) / den
    s22 = ((1.0 + a) * (1.0 - d) + b * b) / den
    s21 = -2.0 * b / den
    return s11, s21, s21, s22


def pack_s(s11, s21, s12, s22) -> np.ndarray:
    """Stack four S elements into an (..., 2, 2) array."""
    s = np.empty(np.shape(s11) + (2, 2), dtype=complex)
    s[..., 0, 0], s[..., 1, 0], s[..., 0, 1], s[..., 1, 1] = s11, s21, s12, s22
    return s


def s_matrix(params: TransformerParams, f_Hz, port1: str = "primary",
             z0_port1_ohm: float = 50.0, z0_port2_ohm: float = 50.0) -> np.ndarray:
    """Two-port S matrix, shape (F, 2, 2), with the `port1` winding on port 1."""
    y11, y12, y22 = y_elements(np.asarray(f_Hz, float), *_params_tuple(params))
    if port1 == "secondary":
        y11, y22 = y22, y11
    return pack_s(*s_from_y(y11, y12, y22, z0_port1_ohm, z0_port2_ohm))
