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
                     form: str = "auto") -> str:
    """SPICE subcircuit text of the equivalent circuit, pins P1 (primary), S1 (secondary), GND.

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
    out.append(f".SUBCKT {name} P1 S1 GND")
    if form == "coupled":
        out += _series_chain("P1", "GND", [("R1", "np1", p.R1_ohm), ("L1", "", p.L1_H)])
        out += _series_chain("S1", "GND", [("R2", "ns1", p.R2_ohm), ("L2", "", p.L2_H)])
        out.append(f"K12 L1 L2 {_v(p.polarity * p.k)}")
    else:
        a = p.polarity * math.sqrt(p.L2_H / p.L1_H)  # a negative ratio reverses the secondary
        out += _series_chain("P1", "m", [("R1", "np1", p.R1_ohm), ("LL1", "", p.L1_H * (1 - p.k))])
        out.append(f"LM m GND {_v(p.k * p.L1_H)}")
        if not lossless:
            out.append(f"RC m GND {_v(p.Rc_ohm)}")
        out.append(f"E1 x GND m GND {_v(a)}")
        out.append("VSENSE x y 0")
        out.append(f"F1 m GND VSENSE {_v(a)}")
        out += _series_chain("y", "S1", [("LL2", "ns2", p.L2_H * (1 - p.k)), ("R2", "", p.R2_ohm)])
    for elem, nodes, value in (("C1", "P1 GND", p.C1_F), ("C2", "S1 GND", p.C2_F),
                               ("C12", "P1 S1", p.C12_F)):
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
