"""The transformer network solved by scikit-rf's circuit module (skrf.circuit.Circuit).

An independent solver of the same lumped network as rfmeas.model. Two forms:

- "coupled": coupled inductors as a two-port from their Z matrix
  (Z11 = R1 + jwL1, Z22 = R2 + jwL2, Z12 = Z21 = jwM), lossless core only;
- "tee": series R1 + jwLl1, shunt Lm || Rc to ground, an ideal 1:a
  transformer (given by its ABCD matrix, since it has no Z matrix), series
  R2 + jwLl2; proportional leakage split as in rfmeas.model.

Shunt capacitors are series impedances to a ground node; C12 is a series
impedance between the hot terminals. Elements of value zero are left out.
"""

from __future__ import annotations

import math

import numpy as np
import skrf as rf
from skrf.circuit import Circuit

from rfmeas.model.params import TransformerParams

from . import OnePort, Sweep, TwoPort, four_sweeps

FORMS = ("coupled", "tee")
# reference impedance of the internal elements; it drops out of the result
Z_INTERNAL_OHM = 50.0


def default_form(params: TransformerParams) -> str:
    """The coupled-inductor form when the core is lossless, else the T-form."""
    return "coupled" if math.isinf(params.Rc_ohm) else "tee"


def _transformer_elements(params: TransformerParams, freq: rf.Frequency, form: str):
    """Networks and internal connections of the bare transformer.

    Returns (primary hot, secondary hot, ground, internal connections); a
    "hot" or "ground" entry is a list of (network, port) tuples at that node.
    """
    jw = 2j * np.pi * freq.f
    if form == "coupled":
        if not math.isinf(params.Rc_ohm):
            raise ValueError("the coupled-inductor form has no magnetising node: it needs Rc_ohm = inf")
        z = np.empty((freq.npoints, 2, 2), dtype=complex)
        z[:, 0, 0] = params.R1_ohm + jw * params.L1_H
        z[:, 1, 1] = params.R2_ohm + jw * params.L2_H
        z[:, 0, 1] = z[:, 1, 0] = jw * params.mutual_inductance_H
        pair = rf.Network.from_z(z, frequency=freq, z0=Z_INTERNAL_OHM, name="coupled")
        return [(pair, 0)], [(pair, 1)], [], []
    if form != "tee":
        raise ValueError(f"form must be one of {FORMS}, not {form!r}")
    a = math.sqrt(params.L2_H / params.L1_H)
    za = Circuit.SeriesImpedance(freq, params.R1_ohm + jw * params.primary_leakage_H, "za", Z_INTERNAL_OHM)
    zb = Circuit.SeriesImpedance(freq, params.R2_ohm + jw * params.secondary_leakage_H, "zb", Z_INTERNAL_OHM)
    ym = 1.0 / (jw * params.magnetizing_inductance_H) + 1.0 / params.Rc_ohm
    zm = Circuit.SeriesImpedance(freq, 1.0 / ym, "zm", Z_INTERNAL_OHM)
    abcd = np.zeros((freq.npoints, 2, 2), dtype=complex)
    abcd[:, 0, 0] = 1.0 / a   # V1 = V2 / a
    abcd[:, 1, 1] = a         # I1 = a I2 (I2 leaving port 2)
    ideal = rf.Network(frequency=freq, a=abcd, z0=Z_INTERNAL_OHM, name="ideal")
    internal = [[(za, 1), (zm, 0), (ideal, 0)], [(ideal, 1), (zb, 0)]]
    return [(za, 0)], [(zb, 1)], [(zm, 1)], internal


def build_circuit(params: TransformerParams, f_Hz, sweep: Sweep, form: str | None = None,
                  auto_reduce: bool = True) -> Circuit:
    """The skrf Circuit of the transformer as `sweep` measures it."""
    freq = rf.Frequency.from_f(np.atleast_1d(np.asarray(f_Hz, dtype=float)), unit="Hz")
    form = form or default_form(params)
    primary, secondary, ground, connections = _transformer_elements(params, freq, form)
    if isinstance(sweep, OnePort) and sweep.termination == "short":
        # the other winding's hot terminal becomes the ground node
        if sweep.port1 == "primary":
            ground.extend(secondary)
            secondary = ground
        else:
            ground.extend(primary)
            primary = ground
    jw = 2j * np.pi * freq.f
    for name, value, node_a, node_b in (("c1", params.C1_F, primary, ground),
                                        ("c2", params.C2_F, secondary, ground),
                                        ("c12", params.C12_F, primary, secondary)):
        if value > 0.0 and node_a is not node_b:  # a capacitor across a short does nothing
            cap = Circuit.SeriesImpedance(freq, 1.0 / (jw * value), name, Z_INTERNAL_OHM)
            node_a.append((cap, 0))
            node_b.append((cap, 1))
    node1, node2 = (primary, secondary) if sweep.port1 == "primary" else (secondary, primary)
    if isinstance(sweep, OnePort):
        node1.append((Circuit.Port(freq, "port1", sweep.z0_ohm), 0))
        if sweep.termination not in ("open", "short"):
            load = Circuit.SeriesImpedance(freq, float(sweep.termination), "load", Z_INTERNAL_OHM)
            node2.append((load, 0))
            ground.append((load, 1))
    elif isinstance(sweep, TwoPort):
        node1.append((Circuit.Port(freq, "port1", sweep.z0_port1_ohm), 0))
        node2.append((Circuit.Port(freq, "port2", sweep.z0_port2_ohm), 0))
    else:
        raise TypeError(f"sweep must be OnePort or TwoPort, not {type(sweep).__name__}")
    if ground:
        ground.append((Circuit.Ground(freq, "gnd", Z_INTERNAL_OHM), 0))
    nodes = []
    for node in (node1, node2, ground):  # external ports in order of appearance
        if node and all(node is not seen for seen in nodes):
            nodes.append(node)
    return Circuit(nodes + connections, auto_reduce=auto_reduce)


def simulate_skrf(params: TransformerParams, f_Hz, sweep: Sweep, auto_reduce: bool = True,
                  form: str | None = None) -> np.ndarray:
    """S11 (shape (F,)) for a OnePort sweep or the S matrix (F, 2, 2) for a TwoPort, from skrf."""
    s = build_circuit(params, f_Hz, sweep, form, auto_reduce).s_external
    return s[:, 0, 0] if isinstance(sweep, OnePort) else s


def simulate_four_sweeps(params: TransformerParams, f_Hz, z0_ohm: float = 50.0,
                         auto_reduce: bool = True, form: str | None = None) -> dict[str, np.ndarray]:
    """Primary open, primary short, secondary open and the two-port thru, keyed like four_sweeps()."""
    return {name: simulate_skrf(params, f_Hz, sweep, auto_reduce, form)
            for name, sweep in four_sweeps(z0_ohm).items()}
