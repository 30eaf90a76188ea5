"""Start values for the joint fit, read off the sweeps so a user never supplies guesses.

Each estimate uses a textbook reading of one kind of sweep: the low-frequency
inductance of an open winding, the short-circuit inductance, the first
self-resonance for the capacitance, and the mid-band reflection of a
two-port for the turns ratio. They only need to land in the right basin.
"""

from __future__ import annotations

import math

import numpy as np

from .methods import impedance_from_reflection
from .sweep import Sweep, other_winding


def _low_band(f_Hz, fraction=0.08, minimum=3):
    n = max(minimum, int(len(f_Hz) * fraction))
    return slice(0, min(n, len(f_Hz)))


def inductance_at_low_frequency(f_Hz, z_ohm) -> float | None:
    """Median of Im(Z)/ω over the lowest points with a positive reactance."""
    band = _low_band(f_Hz)
    x = np.imag(z_ohm[band]) / (2 * np.pi * f_Hz[band])
    x = x[np.isfinite(x) & (x > 0)]
    return float(np.median(x)) if x.size else None


def first_resonance_Hz(f_Hz, z_ohm) -> float | None:
    """Frequency where the reactance first turns from inductive to capacitive (parallel resonance)."""
    x = np.imag(z_ohm)
    start = int(np.argmax(x > 0)) if np.any(x > 0) else None
    if start is None:
        return None
    crossings = np.nonzero((x[start:-1] > 0) & (x[start + 1:] <= 0))[0]
    if crossings.size == 0:
        return None
    i = start + int(crossings[0])
    # interpolate on log frequency
    t = x[i] / (x[i] - x[i + 1])
    return float(np.exp(np.log(f_Hz[i]) + t * (np.log(f_Hz[i + 1]) - np.log(f_Hz[i]))))


def shunt_conductance_S(f_Hz, z_ohm, resonance_Hz) -> float | None:
    """Re(1/Z) where the sweep measures best (|Z| nearest 50 Ω), well below resonance."""
    limit = resonance_Hz / 3 if resonance_Hz else f_Hz[-1]
    ok = f_Hz < limit
    if not np.any(ok):
        return None
    zz = z_ohm[ok]
    i = int(np.argmin(np.abs(np.log(np.abs(zz) / 50.0))))
    g = float(np.real(1.0 / zz[i]))
    return g if g > 0 else None


def estimate_start(sweeps: list[Sweep]) -> tuple[dict, int]:
    """Start values for every circuit parameter, and the winding polarity (+1 / -1)."""
    est: dict[str, list[float]] = {}

    def add(key, value):
        if value is not None and math.isfinite(value) and value > 0:
            est.setdefault(key, []).append(float(value))

    polarity = 1
    for sweep in sweeps:
        f = sweep.f_Hz
        z0 = sweep.z0_ohm[0]
        s = sweep.measured()
        z = impedance_from_reflection(s[:, 0], z0) if sweep.is_two_port else sweep.impedance_ohm()
        side = "1" if sweep.port1 == "primary" else "2"
        if sweep.is_two_port:
            s21 = s[:, 1]
            i = int(np.argmax(np.abs(s21)))
            polarity = -1 if np.real(s21[i]) < 0 else 1
            # ideal 1:N between equal references: S11 = (1 − N²)/(1 + N²)
            g = float(np.real(s[i, 0]))
            g = min(max(g, -0.999), 0.999)
            n_sq = (1.0 - g) / (1.0 + g) * (sweep.z0_ohm[1] / z0)
            y_low = 1.0 / z[:3]
            l_port1 = float(np.median(-1.0 / (2 * np.pi * f[:3] * np.imag(y_low))))
            if l_port1 > 0:
                add(f"L{side}", l_port1)
                other = "2" if side == "1" else "1"
                add(f"L{other}", l_port1 * (n_sq if side == "1" else 1.0 / n_sq))
            continue
        if sweep.termination == "open":
            l_open = inductance_at_low_frequency(f, z)
            add(f"L{side}", l_open)
            fr = first_resonance_Hz(f, z)
            if l_open:
                c_total = 1.0 / ((2 * np.pi * (fr or 2 * f[-1])) ** 2 * l_open)
                add(f"Ctot{side}", c_total)
                g = shunt_conductance_S(f, z, fr)
                if g:
                    add(f"Rc{side}", 1.0 / g)
                w0 = 2 * np.pi * f[0]
                add(f"R{side}", float(np.real(z[0])) - (w0 * l_open) ** 2 * (g or 0.0))
        elif sweep.termination == "short":
            add(f"Lsc{side}", inductance_at_low_frequency(f, z))
            add(f"Rsc{side}", float(np.real(z[0])))
        else:  # resistive load R on the other winding: mid-band 1/Zin ≈ n'²/R
            r_load = float(sweep.termination)
            fr = first_resonance_Hz(f, z)
            g = shunt_conductance_S(f, z, fr)
            if g:
                add(f"nsq{side}", g * r_load)

    def pick(key, default=None):
        values = est.get(key)
        return float(np.median(values)) if values else default

    L1 = pick("L1")
    L2 = pick("L2")
    if L1 is None and L2 is None:
        L1 = L2 = 1e-6
    if L1 is not None and L2 is None:
        nsq = pick("nsq1")
        L2 = L1 * nsq if nsq else L1
    if L2 is not None and L1 is None:
        nsq = pick("nsq2")
        L1 = L2 * nsq if nsq else L2
    k = None
    if pick("Lsc1"):
        k = math.sqrt(max(1e-6, 1.0 - min(pick("Lsc1") / L1, 0.999)))
    elif pick("Lsc2"):
        k = math.sqrt(max(1e-6, 1.0 - min(pick("Lsc2") / L2, 0.999)))
    k = min(max(k if k is not None else 0.99, 0.2), 1 - 1e-5)

    n = math.sqrt(L2 / L1)
    R1 = pick("R1", 0.05)
    rsc = pick("Rsc1")
    if rsc is not None and rsc > 0:
        R1 = R1 if R1 < rsc else rsc / 2
        # shorted secondary at low frequency: R1 + R2/n²
        R2 = (rsc - R1) * n ** 2 if rsc > 1.2 * R1 else R1 * n
    else:
        R2 = pick("R2") or R1 * n  # copper grows with the turns (common practice)
    Rc = pick("Rc1") or pick("Rc2", 1e5) * L1 / L2
    # The open sweeps see one total capacitance, C1 + n²·C2 + (n ∓ 1)²·C12 referred to the
    # primary, whatever the split: start from three equal capacitances that give that total.
    f_max = max(float(s.f_Hz[-1]) for s in sweeps)
    c_referred = [c for c in (pick("Ctot1"), pick("Ctot2") and pick("Ctot2") / n ** 2) if c]
    c_total = float(np.median(c_referred)) if c_referred else 1.0 / ((2 * np.pi * 2 * f_max) ** 2 * L1)
    c_each = c_total / (1.0 + n ** 2 + (n - polarity) ** 2)
    start = {
        "L1_H": L1, "L2_H": L2, "k": k,
        "R1_ohm": max(R1, 1e-3), "R2_ohm": max(R2, 1e-3), "Rc_ohm": min(max(Rc, 10.0), 1e8),
        "C1_F": c_each, "C2_F": c_each, "C12_F": c_each,
    }
    return start, polarity


def sweeps_that_see(sweeps: list[Sweep], winding: str) -> bool:
    """Whether any sweep carries information about `winding`'s own inductance."""
    for s in sweeps:
        if s.is_two_port or s.port1 == winding:
            return True
        if other_winding(s.port1) == winding and s.termination not in ("open", "short"):
            return True
    return False
