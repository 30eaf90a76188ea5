"""The fitted equivalent circuit out: a SPICE subcircuit and a Touchstone-ready two-port.

`spice_subcircuit` writes the topology of rfmeas.model.circuit with standard
SPICE elements only (R, L, C, K, E, F, V), so any SPICE reads it:

    .SUBCKT NAME P1 S1 GND

Lossless core (Rc = inf), form "coupled": L1 and L2 with a K statement
(coupling k), R1/R2 in series, C1, C2, C12. This is terminal-equivalent to
the T-model of rfmeas.model.circuit.

Lossy core, form "tee" (also available with Rc = inf): the T-model exactly,

    P1 -R1- Ll1 -+- m          x -VSENSE- y - Ll2 -R2- S1
                 Lm || Rc      E1: V(x) = a V(m)
    GND ---------+             F1: draws a I(VSENSE) from m to GND

Ll1 = L1 (1-k), Ll2 = L2 (1-k), Lm = k L1, a = sqrt(L2/L1). The E source sets
the secondary voltage to a times the magnetising voltage; the F source
draws a times the secondary current out of the magnetising node. Together they
are an ideal 1:a transformer with a common ground (power in = power out,
V(m) a I2 = a V(m) I2), so Rc sits across Lm exactly as in the model; a coupled
pair with K close to 1 would only approximate it.

floating=True writes the same circuit with four pins and no common ground,

    .SUBCKT NAME P_HI P_LO S_HI S_LO

L1 (or the T-model's primary side, Lm and Rc) returns to P_LO, L2 (or the
ideal transformer's secondary side) to S_LO; C1 sits across P_HI-P_LO, C2
across S_HI-S_LO and C12 between the hot ends P_HI and S_HI, as
rfmeas.model.circuit places it. With P_LO and S_LO on one node the
four-terminal model is the grounded one.
"""

from __future__ import annotations

import math
import re

import numpy as np

from rfmeas.errors import InputError
from rfmeas.model import TransformerParams, s_matrix

_NAME_RE = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*$")


def _v(value: float) -> str:
    return f"{value:.12g}"


def _series_chain(first: str, last: str, parts: list[tuple[str, str, float]]) -> list[str]:
    """Elements in series from node `first` to node `last`, skipping zero values (a wire).

    parts: (element name, internal node after it, value); the last part ends on `last`.
    """
    kept = [p for p in parts if p[2] > 0]
    if not kept:
        raise ValueError("a series chain needs at least one element")  # never: an inductance is always there
    lines, node = [], first
    for i, (name, after, value) in enumerate(kept):
        end = last if i == len(kept) - 1 else after
        lines.append(f"{name} {node} {end} {_v(value)}")
        node = end
    return lines


def spice_subcircuit(params: TransformerParams, name: str = "XFMR", comments=(),
                     form: str = "auto", floating: bool = False) -> str:
    """SPICE subcircuit text of the equivalent circuit, pins P1 (primary), S1 (secondary), GND;
    with `floating`, pins P_HI, P_LO, S_HI, S_LO (a secondary isolated from the primary).

    form: "auto" (coupled when Rc is infinite, else tee), "coupled" (Rc must be
    infinite) or "tee". Values are written with 12 significant digits.
    """
    if not _NAME_RE.match(name or ""):
        raise InputError(f"subcircuit name '{name}' must be letters, digits and '_' and start with a letter")
    if form not in ("auto", "coupled", "tee"):
        raise InputError(f"unknown subcircuit form '{form}' (use auto, coupled or tee)")
    lossless = math.isinf(params.Rc_ohm)
    if form == "auto":
        form = "coupled" if lossless else "tee"
    if form == "coupled" and not lossless:
        raise InputError("the coupled-inductor form cannot hold a core-loss resistance: use form 'tee'")

    p = params
    out = ["* rfmeas equivalent circuit of a two-winding transformer"]
    out += [f"* {line}" for c in comments for line in str(c).splitlines()]
    out.append(f"* L1={_v(p.L1_H)} H L2={_v(p.L2_H)} H k={_v(p.k)} R1={_v(p.R1_ohm)} ohm "
               f"R2={_v(p.R2_ohm)} ohm Rc={_v(p.Rc_ohm)} ohm")
    out.append(f"* C1={_v(p.C1_F)} F C2={_v(p.C2_F)} F C12={_v(p.C12_F)} F")
    out.append(f"* form: {form}"
               + ("" if form == "coupled" else
                  " (T-model, proportional leakage split; ideal 1:a transformer from E1 and F1)"))
    p_lo, s_lo = ("P_LO", "S_LO") if floating else ("GND", "GND")
    p_hi, s_hi = ("P_HI", "S_HI") if floating else ("P1", "S1")
    if floating:
        out.append("* floating secondary: pins P_HI P_LO (primary), S_HI S_LO (secondary); "
                   "C12 between P_HI and S_HI")
    out.append(f".SUBCKT {name} {p_hi} {s_hi} GND" if not floating else f".SUBCKT {name} P_HI P_LO S_HI S_LO")
    if form == "coupled":
        out += _series_chain(p_hi, p_lo, [("R1", "np1", p.R1_ohm), ("L1", "", p.L1_H)])
        out += _series_chain(s_hi, s_lo, [("R2", "ns1", p.R2_ohm), ("L2", "", p.L2_H)])
        out.append(f"K12 L1 L2 {_v(p.polarity * p.k)}")
    else:
        a = p.polarity * math.sqrt(p.L2_H / p.L1_H)  # a negative ratio reverses the secondary
        out += _series_chain(p_hi, "m", [("R1", "np1", p.R1_ohm), ("LL1", "", p.L1_H * (1 - p.k))])
        out.append(f"LM m {p_lo} {_v(p.k * p.L1_H)}")
        if not lossless:
            out.append(f"RC m {p_lo} {_v(p.Rc_ohm)}")
        out.append(f"E1 x {s_lo} m {p_lo} {_v(a)}")
        out.append("VSENSE x y 0")
        out.append(f"F1 m {p_lo} VSENSE {_v(a)}")
        out += _series_chain("y", s_hi, [("LL2", "ns2", p.L2_H * (1 - p.k)), ("R2", "", p.R2_ohm)])
    for elem, nodes, value in (("C1", f"{p_hi} {p_lo}", p.C1_F), ("C2", f"{s_hi} {s_lo}", p.C2_F),
                               ("C12", f"{p_hi} {s_hi}", p.C12_F)):
        if value > 0:
            out.append(f"{elem} {nodes} {_v(value)}")
    out.append(f".ENDS {name}")
    return "\n".join(out) + "\n"


def model_touchstone_network(params: TransformerParams, f_Hz, z0_ohm: float = 50.0,
                             port1: str = "primary", name: str = "model"):
    """scikit-rf two-port of the model's S parameters on the grid `f_Hz` (write it with write_touchstone)."""
    import skrf as rf

    f = np.asarray(f_Hz, dtype=float).ravel()
    if f.size == 0 or not np.all(np.isfinite(f)) or np.any(f <= 0) or np.any(np.diff(f) <= 0):
        raise InputError("model frequencies must be positive, finite and strictly increasing")
    if not (np.isfinite(z0_ohm) and z0_ohm > 0):
        raise InputError(f"reference impedance {z0_ohm} ohm must be positive and finite")
    s = s_matrix(params, f, port1=port1, z0_port1_ohm=z0_ohm, z0_port2_ohm=z0_ohm)
    frequency = rf.Frequency.from_f(f, unit="hz")
    return rf.Network(frequency=frequency, s=s, z0=z0_ohm, name=name)
