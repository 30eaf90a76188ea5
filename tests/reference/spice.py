"""ngspice AC analysis of the transformer netlist: an independent check of rfmeas.model.

The network is written as a SPICE subcircuit in one of three forms:

- "coupled": the coupled-inductor form, L1 and L2 with a `K` element of
  coupling k, R1 and R2 in series. It has no magnetising node, so it needs a
  lossless core (Rc = inf).
- "tee": the T-form with the proportional leakage split, Ll1 = L1(1-k) and
  Ll2 = L2(1-k) in series, and the magnetising inductance Lm = k L1 with Rc
  across it, made by a perfectly coupled pair (K = 1) of Lm and a²Lm,
  a = sqrt(L2/L1). A perfectly coupled pair is exactly Lm in parallel with an
  ideal 1:a transformer, so this is the same T-model rfmeas.model uses.
- "tee-controlled": the same T-form with Lm and Rc across the primary of an
  ideal transformer made of controlled sources (E: V2 = a V1, F: I1 = a I2).

C1 (primary hot to ground), C2 (secondary hot to ground) and C12 (between the
hot terminals) are added in every form. Elements of value zero are left out
(a zero resistance joins its nodes).

Port 1 is driven with 2 V behind its reference impedance and port 2 is
terminated in its own, so with real references z01, z02 (power waves):
S11 = V1 - 1 and S21 = V2 sqrt(z01/z02). A two-port netlist holds two copies
of the network, one driven at each port, so one run gives the whole matrix.

ngspice has no list sweep, so every frequency is its own one-point `ac`
analysis inside a control block, each appended to one binary rawfile (double
precision, unlike the 6-digit ASCII output). The frequencies ngspice reports
are checked against the ones asked for.
"""

from __future__ import annotations

import math
import os
import re
import shutil
import subprocess
import tempfile
from pathlib import Path

import numpy as np

from rfmeas.model.params import TransformerParams

from . import OnePort, SimulatorError, Sweep, TwoPort

FORMS = ("coupled", "tee", "tee-controlled")
TIMEOUT_S = 60.0
# relative tolerance between the frequencies asked for and those ngspice reports
FREQUENCY_RTOL = 1e-12


def spice_available() -> bool:
    """True when an `ngspice` executable is on PATH."""
    return shutil.which("ngspice") is not None


def _num(x: float) -> str:
    """A number ngspice reads back exactly (no engineering suffixes)."""
    return f"{float(x):.17g}"


def default_form(params: TransformerParams) -> str:
    """The coupled-inductor form when the core is lossless, else the T-form."""
    return "coupled" if math.isinf(params.Rc_ohm) else "tee"


def _subcircuit(params: TransformerParams, form: str) -> list[str]:
    """`.subckt xfmr p s` lines for the network, primary hot p, secondary hot s, ground 0."""
    if form not in FORMS:
        raise ValueError(f"form must be one of {FORMS}, not {form!r}")
    if form == "coupled" and not math.isinf(params.Rc_ohm):
        raise ValueError("the coupled-inductor form has no magnetising node: it needs Rc_ohm = inf")
    lines = [".subckt xfmr p s"]

    def series_r(name, node, value, inner):
        if value == 0.0:
            return node
        lines.append(f"{name} {node} {inner} {_num(value)}")
        return inner

    pa = series_r("R1", "p", params.R1_ohm, "pa")
    sb = series_r("R2", "s", params.R2_ohm, "sb")
    if form == "coupled":
        lines += [
            f"L1 {pa} 0 {_num(params.L1_H)}",
            f"L2 {sb} 0 {_num(params.L2_H)}",
            f"K12 L1 L2 {_num(params.k)}",
        ]
    else:
        a = math.sqrt(params.L2_H / params.L1_H)
        lm = params.magnetizing_inductance_H
        lines += [
            f"LL1 {pa} m {_num(params.primary_leakage_H)}",
            f"LL2 x {sb} {_num(params.secondary_leakage_H)}",
        ]
        if not math.isinf(params.Rc_ohm):
            lines.append(f"RC m 0 {_num(params.Rc_ohm)}")
        if form == "tee":
            lines += [
                f"LMP m 0 {_num(lm)}",
                f"LMS x 0 {_num(a * a * lm)}",
                "KM LMP LMS 1",
            ]
        else:
            lines += [
                f"LM m 0 {_num(lm)}",
                f"EI xe 0 m 0 {_num(a)}",
                "VI xe x DC 0",
                f"FI m 0 VI {_num(a)}",
            ]
    for name, nodes, value in (("C1", "p 0", params.C1_F), ("C2", "s 0", params.C2_F),
                               ("C12", "p s", params.C12_F)):
        if value > 0.0:
            lines.append(f"{name} {nodes} {_num(value)}")
    lines.append(".ends xfmr")
    return lines


def _instance(name: str, port1: str, node1: str, node2: str) -> str:
    """Place the subcircuit with the `port1` winding on node1 and the other on node2."""
    primary, secondary = (node1, node2) if port1 == "primary" else (node2, node1)
    return f"X{name} {primary} {secondary} xfmr"


def _terminate(name: str, node: str, termination) -> list[str]:
    if termination == "open":
        return []
    if termination == "short":
        return [f"V{name} {node} 0 DC 0"]
    return [f"R{name} {node} 0 {_num(termination)}"]


def _check_frequencies(f_Hz) -> np.ndarray:
    f = np.atleast_1d(np.asarray(f_Hz, dtype=float))
    if f.ndim != 1 or f.size == 0 or not np.all(np.isfinite(f)) or np.any(f <= 0):
        raise ValueError("f_Hz must be a non-empty 1-D array of positive finite frequencies")
    return f


def spice_netlist(params: TransformerParams, f_Hz, sweep: Sweep, form: str | None = None,
                  rawfile: str = "out.raw") -> str:
    """The ngspice input deck for `sweep` at the frequencies `f_Hz` (written to `rawfile`)."""
    f = _check_frequencies(f_Hz)
    form = form or default_form(params)
    lines = [f"* rfmeas reference: {type(sweep).__name__} {sweep}, form {form}"]
    lines += _subcircuit(params, form)
    if isinstance(sweep, OnePort):
        lines += [
            "VA srcA 0 DC 0 AC 2",
            f"RA1 srcA a1 {_num(sweep.z0_ohm)}",
            _instance("A", sweep.port1, "a1", "a2"),
            *_terminate("A2", "a2", sweep.termination),
        ]
        saved = "v(a1)"
    elif isinstance(sweep, TwoPort):
        z01, z02 = _num(sweep.z0_port1_ohm), _num(sweep.z0_port2_ohm)
        lines += [
            "VA srcA 0 DC 0 AC 2",
            f"RA1 srcA a1 {z01}",
            f"RA2 a2 0 {z02}",
            _instance("A", sweep.port1, "a1", "a2"),
            "VB srcB 0 DC 0 AC 2",
            f"RB2 srcB b2 {z02}",
            f"RB1 b1 0 {z01}",
            _instance("B", sweep.port1, "b1", "b2"),
        ]
        saved = "v(a1) v(a2) v(b1) v(b2)"
    else:
        raise TypeError(f"sweep must be OnePort or TwoPort, not {type(sweep).__name__}")
    lines += [".control", "set filetype=binary", "set appendwrite"]
    for fi in f:
        lines += [f"ac lin 1 {_num(fi)} {_num(fi)}", f"write {rawfile} {saved}"]
    lines += ["quit", ".endc", ".end", ""]
    return "\n".join(lines)


def read_rawfile(data: bytes, path: str = "rawfile") -> list[dict[str, np.ndarray]]:
    """Parse every plot of an ngspice binary rawfile: a list of {variable name: complex array}."""
    plots = []
    pos = 0
    while pos < len(data):
        end = data.find(b"Binary:\n", pos)
        if end < 0:
            raise SimulatorError("rawfile has a header without a Binary: section", path=path)
        header = data[pos:end].decode("ascii", errors="replace")
        pos = end + len(b"Binary:\n")
        try:
            nvars = int(re.search(r"No\. Variables:\s*(\d+)", header).group(1))
            npoints = int(re.search(r"No\. Points:\s*(\d+)", header).group(1))
            flags = re.search(r"Flags:\s*(.*)", header).group(1)
            names = re.findall(r"^\s+\d+\s+(\S+)\s+\S+", header.split("Variables:", 2)[-1], re.M)
        except AttributeError:
            raise SimulatorError("rawfile header lacks Flags/No. Variables/No. Points", path=path) from None
        if "complex" not in flags or len(names) != nvars:
            raise SimulatorError(f"unexpected rawfile plot (flags {flags!r}, {len(names)} of {nvars} names)",
                                 path=path)
        nbytes = nvars * npoints * 16
        if pos + nbytes > len(data):
            raise SimulatorError("rawfile ends inside a data block", path=path)
        block = np.frombuffer(data, dtype="<f8", count=nvars * npoints * 2, offset=pos)
        values = block.reshape(npoints, nvars, 2)
        values = values[..., 0] + 1j * values[..., 1]
        plots.append({name.lower(): values[:, i].copy() for i, name in enumerate(names)})
        pos += nbytes
        while pos < len(data) and data[pos:pos + 1] in (b"\n", b"\r"):
            pos += 1
    return plots


def run_ngspice(netlist: str, timeout_s: float = TIMEOUT_S) -> list[dict[str, np.ndarray]]:
    """Run `netlist` in batch mode in a temporary folder and return the plots of its rawfile."""
    exe = shutil.which("ngspice")
    if exe is None:
        raise SimulatorError("ngspice is not installed (no `ngspice` on PATH)")
    with tempfile.TemporaryDirectory(prefix="rfmeas-spice-") as tmp:
        deck = Path(tmp) / "deck.cir"
        deck.write_text(netlist)
        env = dict(os.environ, HOME=tmp)  # no user .spiceinit
        try:
            proc = subprocess.run([exe, "-b", "-n", deck.name], cwd=tmp, env=env,
                                  capture_output=True, text=True, timeout=timeout_s)
        except subprocess.TimeoutExpired:
            raise SimulatorError(f"ngspice did not finish within {timeout_s:g} s", path=deck) from None
        raw = Path(tmp) / "out.raw"
        output = (proc.stdout + proc.stderr).strip()
        errors = [line for line in output.splitlines() if re.search(r"\berror\b", line, re.I)]
        if proc.returncode != 0 or errors or not raw.exists():
            detail = "; ".join(errors[:3]) or output[-400:] or "no output"
            raise SimulatorError(f"ngspice failed (exit {proc.returncode}): {detail}", path=deck)
        return read_rawfile(raw.read_bytes(), path=str(raw))


def simulate_spice(params: TransformerParams, f_Hz, sweep: Sweep, form: str | None = None,
                   timeout_s: float = TIMEOUT_S) -> np.ndarray:
    """S11 (shape (F,)) for a OnePort sweep or the S matrix (F, 2, 2) for a TwoPort, from ngspice."""
    f = _check_frequencies(f_Hz)
    plots = run_ngspice(spice_netlist(params, f, sweep, form), timeout_s)
    if len(plots) != f.size or any(p["frequency"].size != 1 for p in plots):
        raise SimulatorError(f"ngspice returned {len(plots)} analyses for {f.size} frequencies")
    data = {name: np.concatenate([p[name] for p in plots]) for name in plots[0]}
    f_sim = data["frequency"].real
    if not np.allclose(f_sim, f, rtol=FREQUENCY_RTOL, atol=0.0):
        worst = np.max(np.abs(f_sim / f - 1.0))
        raise SimulatorError(f"ngspice analysed other frequencies than asked (worst {worst:.2e} relative)")
    if isinstance(sweep, OnePort):
        return data["v(a1)"] - 1.0
    r = math.sqrt(sweep.z0_port1_ohm / sweep.z0_port2_ohm)
    s = np.empty((f.size, 2, 2), dtype=complex)
    s[:, 0, 0] = data["v(a1)"] - 1.0
    s[:, 1, 0] = data["v(a2)"] * r
    s[:, 1, 1] = data["v(b2)"] - 1.0
    s[:, 0, 1] = data["v(b1)"] / r
    return s
