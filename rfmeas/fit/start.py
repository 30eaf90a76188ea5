"""Start values for the joint fit, read off the sweeps so a user never supplies guesses.

Each estimate uses a textbook reading of one kind of sweep: the low-frequency
inductance of an open winding, the short-circuit inductance, the first
self-resonance for the capacitance, and the mid-band reflection of a
two-port for the turns ratio. They only need to land in the right basin.
"""

from __future__ import annotations

import math

import numpy as np

from rfmeas.model.methods import impedance_from_reflection
from rfmeas.measurement.sweep import Sweep, other_winding


def _low_band(f_Hz, fraction=0.08, minimum=3):
    n = max(minimum, int(len(f_Hz) * fraction))
    return slice(0, min(n, len(f_Hz)))


def inductance_at_low_frequency(f_Hz, z_ohm) -> float | None:
    """Median of Im(Z)/ω over the lowest points with a positive reactance."""
    band = _low_band(f_Hz)
    x = np.imag(z_ohm[band]) / (2 * np.pi * f_Hz[band])
    x = x[np.isfinite(x) & (x > 0)]
    return float(np.median(x)) if x.size else None


def parallel_inductance_at_low_frequency(f_Hz, z_ohm) -> float | None:
    """Median of −1/(ω·Im(1/Z)) over the lowest points: a winding loaded in parallel."""
    band = _low_band(f_Hz, fraction=0.05, minimum=5)
    with np.errstate(all="ignore"):
        x = -1.0 / (2 * np.pi * f_Hz[band] * np.imag(1.0 / z_ohm[band]))
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


def _below_resonance(f_Hz, z_ohm, fraction=0.5):
    """Points below `fraction` of the first parallel resonance (all points when there is none)."""
    fr = first_resonance_Hz(f_Hz, z_ohm)
    return f_Hz < (fraction * fr if fr else np.inf)


BAND_FRACTIONS = (0.5, 0.7, 0.9)
"""Shares of the first resonance frequency below which band_fit_LC reads L and C, widened in
turn until at least four points are left (the two-term reading holds up to the resonance)."""


def band_fit_LC(f_Hz, z_ohm, z0_ohm, short: bool = False) -> tuple[float | None, float | None]:
    """(L, C) of a winding read off its inductive band by a weighted straight-line fit.

    Open winding: ω·Im(Y) = −1/L + ω²·C (L in parallel with C). Shorted winding,
    a small L in series: Im(Z)/ω = L + ω²·L²·C. Each point is weighted by how well
    a `z0_ohm` reflection resolves it (|1 + Γ|² for admittance, |1 − Γ|² for
    impedance), so the poorly resolved ends of a sweep do not pull the estimate.
    """
    finite = np.isfinite(z_ohm) & (f_Hz > 0)
    for fraction in BAND_FRACTIONS:  # a coarse grid may hold only a few points below resonance
        ok = finite & _below_resonance(f_Hz, z_ohm, fraction)
        if np.count_nonzero(ok) >= 4:
            break
    if not short:
        # where the core loss (or a load) takes over from the inductance, the parallel L-C
        # reading no longer holds: keep the points whose susceptance is thrice the conductance
        with np.errstate(all="ignore"):
            y = 1.0 / z_ohm
        inductive = ok & (-np.imag(y) > 3.0 * np.real(y))
        ok = inductive if np.count_nonzero(inductive) >= 3 else ok
    f, z = f_Hz[ok], z_ohm[ok]
    if f.size < 2:  # two points fix the two terms exactly: enough for a start value
        return None, None
    w = 2 * np.pi * f
    gamma = (z - z0_ohm) / (z + z0_ohm)
    if short:
        q = np.imag(z) / w
        sigma = np.abs(1 - gamma) ** -2 / w
    else:
        q = w * np.imag(1.0 / z)
        sigma = w * np.abs(1 + gamma) ** -2
    A = np.stack([np.ones_like(w), w ** 2], axis=1) / sigma[:, None]
    col = np.linalg.norm(A, axis=0)
    if not np.all(col > 0):
        return None, None
    coef, *_ = np.linalg.lstsq(A / col, q / sigma, rcond=None)
    coef = coef / col
    if short:
        L = coef[0]
        C = coef[1] / L ** 2 if L > 0 else None
    else:
        L = -1.0 / coef[0] if coef[0] < 0 else None
        C = coef[1]
    L = float(L) if L is not None and L > 0 and math.isfinite(L) else None
    C = float(C) if L is not None and C is not None and C > 0 and math.isfinite(C) else None
    return L, C


def _weighted_median(x: np.ndarray, w: np.ndarray) -> float:
    order = np.argsort(x)
    c = np.cumsum(w[order])
    return float(x[order][np.searchsorted(c, 0.5 * c[-1])])


LOSSLESS_SHARE = 0.05
"""thru_low_band reads nothing when more than this share of the incident power is absorbed."""


def thru_low_band(f_Hz, s11, s21, z01_ohm: float, z02_ohm: float) -> tuple[float, float, float] | None:
    """(L of the port-1 winding, L of the port-2 winding, signed M) read off a thru's low band.

    Only S11 and S21 are needed (forward-only files): below the first resonance
    the thru is nearly lossless and reciprocal, so S is symmetric and unitary,
    which gives S22 = −S11*·S21/S21*; the whole S matrix then converts to Z
    (Z = Z0·(I + S)(I − S)⁻¹ in port-normalised form), whose reactances are
    ωL1, ωL2 and ωM (the sign of M is the winding polarity). Points are
    weighted by |det(I − S)|, which is small where the conversion amplifies the
    noise; the lower half (in log frequency) of the band where both
    self-reactances are inductive is used, and nothing is read when the thru there
    absorbs more than LOSSLESS_SHARE of the power.
    """
    with np.errstate(all="ignore"):
        s22 = -np.conj(s11) * s21 / np.conj(s21)
        a11, a12, a22 = 1.0 - s11, -s21, 1.0 - s22
        det = a11 * a22 - a12 * a12
        # (I + S)(I − S)⁻¹ for a symmetric 2×2 S, element by element
        z11 = ((1.0 + s11) * a22 - s21 * a12) / det
        z12 = (s21 * a11 - (1.0 + s11) * a12) / det
        z22 = (s21 * (-a12) + (1.0 + s22) * a11) / det
        w = 2 * np.pi * np.asarray(f_Hz, float)
        l1 = np.imag(z11) * z01_ohm / w
        l2 = np.imag(z22) * z02_ohm / w
        m = np.imag(z12) * math.sqrt(z01_ohm * z02_ohm) / w
    inductive = np.isfinite(l1) & np.isfinite(l2) & np.isfinite(m) & (l1 > 0) & (l2 > 0)
    if not inductive.any():
        return None
    first = int(np.argmax(inductive))
    ends = np.nonzero(~inductive[first:])[0]
    stop = first + int(ends[0]) if ends.size else len(inductive)
    if stop - first < 3:
        return None
    f_band = np.asarray(f_Hz[first:stop], float)
    if f_band[0] <= 0:
        return None
    keep = slice(first, first + max(3, int(np.searchsorted(f_band, math.sqrt(f_band[0] * f_band[-1])))))
    weight = np.abs(det[keep])
    if not np.all(np.isfinite(weight)) or not weight.sum() > 0:
        return None
    # the reading assumes a lossless thru: where the core loss or the windings' resistance takes
    # a noticeable share of the power (1 − |S11|² − |S21|²), it does not hold
    absorbed = 1.0 - np.abs(s11[keep]) ** 2 - np.abs(s21[keep]) ** 2
    if _weighted_median(absorbed, weight) > LOSSLESS_SHARE:
        return None
    return (_weighted_median(l1[keep], weight), _weighted_median(l2[keep], weight),
            _weighted_median(m[keep], weight))


def _readings(sweeps: list[Sweep]) -> tuple[dict, int]:
    """Every textbook reading the sweeps offer (lists per key), and the winding polarity."""
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
        other = "2" if side == "1" else "1"
        if sweep.is_two_port:
            s21 = s[:, 1]
            i = int(np.argmax(np.abs(s21)))
            polarity = -1 if np.real(s21[i]) < 0 else 1
            # ideal 1:N between equal references: S11 = (1 − N²)/(1 + N²)
            g = float(np.real(s[i, 0]))
            g = min(max(g, -0.999), 0.999)
            n_sq = (1.0 - g) / (1.0 + g) * (sweep.z0_ohm[1] / z0)
            add(f"nsq_thru{side}", n_sq)
            low = thru_low_band(f, s[:, 0], s21, z0, sweep.z0_ohm[1])
            if low is not None:
                # the mutual inductance's sign is the polarity, and (M/L)² the ratio's square to
                # within k² (a few per cent): both more robust than the mid-band reading
                polarity = -1 if low[2] < 0 else 1
                add(f"nsqM_thru{side}", (low[2] / low[0]) ** 2)
            # low band: the winding's inductance (else: in parallel with the other port's load)
            l_parallel = parallel_inductance_at_low_frequency(f, z)
            l_port1 = low[0] if low is not None else l_parallel
            if l_port1:
                add(f"Lthru{side}", l_port1)
                add(f"Lthru{other}", l_port1 * n_sq)  # n_sq: port-2 winding over port-1 winding
            if low is not None and l_parallel:
                add(f"Lpar{side}", l_parallel)  # a second reading, for starts of its own
            continue
        if sweep.termination.is_open:
            l_open, c_open = band_fit_LC(f, z, z0)
            if l_open is None:
                l_open = inductance_at_low_frequency(f, z)
            add(f"L{side}", l_open)
            fr = first_resonance_Hz(f, z)
            if l_open:
                c_res = 1.0 / ((2 * np.pi * fr) ** 2 * l_open) if fr else None
                add(f"Ctot{side}", c_res or c_open or 1.0 / ((2 * np.pi * 2 * f[-1]) ** 2 * l_open))
                g = shunt_conductance_S(f, z, fr)
                if g:
                    add(f"Rc{side}", 1.0 / g)
                w0 = 2 * np.pi * f[0]
                add(f"R{side}", float(np.real(z[0])) - (w0 * l_open) ** 2 * (g or 0.0))
        elif sweep.termination.is_short:
            l_sc, c_sc = band_fit_LC(f, z, z0, short=True)
            add(f"Lsc{side}", l_sc or inductance_at_low_frequency(f, z))
            add(f"Csc{side}", c_sc)
            add(f"Rsc{side}", float(np.real(z[0])))
        else:  # resistive load R on the other winding: mid-band 1/Zin ≈ n'²/R
            r_load = sweep.termination.resistance_ohm
            fr = first_resonance_Hz(f, z)
            g = shunt_conductance_S(f, z, fr)
            if g:
                add(f"nsq{side}", g * r_load)
            l_in, _ = band_fit_LC(f, z, z0)
            add(f"Lload{side}", l_in)
    return est, polarity


CAPACITANCE_SPLITS = ((1 / 3, 1 / 3, 1 / 3), (0.8, 0.1, 0.1), (0.1, 0.8, 0.1), (0.1, 0.1, 0.8))
"""Shares of the open-circuit capacitance given to C1, n²·C2 and (n ∓ 1)²·C12 by the starts."""
SHORT_SPLITS = (0.2, 0.5, 0.8)
"""Shares of a shorted sweep's capacitance C1 + C12 (or C2 + C12) given to C12 by the starts that
keep it (see _short_capacitance_splits)."""
COUPLING_STARTS = (0.9, 0.99, 0.999)
"""Extra couplings tried when no shorted sweep gives k directly."""
RATIO_STARTS_APART = 0.1
"""Two readings of L1 or L2 further apart than this (natural log, ≈ 10 %) each get their own starts."""



def start_candidates(sweeps: list[Sweep], polarity: int | None = None) -> tuple[list[dict], int]:
    """Start points for the fit (best reading first), and the winding polarity.

    The readings pin L1, L2 and (with a shorted sweep) k; what the open sweeps
    cannot split — the capacitance C1 + n²·C2 + (n ∓ 1)²·C12 referred to the
    primary, and the coupling when nothing is shorted — is spread over several
    starts, from which the fit keeps the one that ends with the lowest cost; a shorted sweep's
    C1 + C12 (or C2 + C12) gives starts of its own along that reading.
    With a thru, both ratio readings (low band and mid band) get starts when
    they differ. `polarity` given: the starts for that polarity, not the one read.
    """
    est, read_polarity = _readings(sweeps)
    polarity = read_polarity if polarity is None else polarity

    def pick(key, default=None):
        values = est.get(key)
        return float(np.median(values)) if values else default

    L1 = pick("L1") or pick("Lthru1")
    L2 = pick("L2") or pick("Lthru2")
    if L1 is None and L2 is None:
        L1 = L2 = pick("Lload1") or pick("Lload2") or 1e-6
    # ratio readings of a thru (low band, then mid band), for a winding no open sweep reads
    ratios = {side: [r for r in (pick(f"nsqM_thru{side}"), pick(f"nsq_thru{side}")) if r]
              for side in ("1", "2")}
    pairs = []  # (L1, L2) from each ratio reading, the first preferred
    if pick("L1") is None and pick("L2") is None:  # a thru alone: each inductance reading with each ratio
        if ratios["1"]:
            pairs = [(l, l * r) for l in (pick("Lthru1"), pick("Lpar1")) if l for r in ratios["1"]]
        elif ratios["2"]:
            pairs = [(l * r, l) for l in (pick("Lthru2"), pick("Lpar2")) if l for r in ratios["2"]]
    elif pick("L1") and not pick("L2") and ratios["1"]:
        pairs = [(L1, L1 * r) for r in ratios["1"]]
    elif pick("L2") and not pick("L1") and ratios["2"]:
        pairs = [(L2 * r, L2) for r in ratios["2"]]
    if pairs:
        L1, L2 = pairs[0]
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
    k_known = k is not None
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
    # primary, whatever the split.
    f_max = max(float(s.f_Hz[-1]) for s in sweeps)
    c_referred = [c for c in (pick("Ctot1"), pick("Ctot2") and pick("Ctot2") * n ** 2) if c]
    c_total = float(np.median(c_referred)) if c_referred else 1.0 / ((2 * np.pi * 2 * f_max) ** 2 * L1)
    base = {
        "L1_H": L1, "L2_H": L2, "k": k,
        "R1_ohm": max(R1, 1e-3), "R2_ohm": max(R2, 1e-3), "Rc_ohm": min(max(Rc, 10.0), 1e8),
    }
    weights = (1.0, n ** 2, max((n - polarity) ** 2, 0.25))
    starts = []
    for split in CAPACITANCE_SPLITS:
        c1, c2, c12 = (share * c_total / wgt for share, wgt in zip(split, weights))
        starts.append(dict(base, C1_F=c1, C2_F=c2, C12_F=c12))
    if c_referred:
        starts += [dict(base, C1_F=c1, C2_F=c2, C12_F=c12) for c1, c2, c12 in
                   _short_capacitance_splits(c_total, pick("Csc1"), pick("Csc2"), n, weights[2])]
    if not k_known:
        starts += [dict(st, k=kk) for kk in COUPLING_STARTS for st in starts]
    # another reading of the inductances that differs clearly gives its own starts (R2 and C2
    # scaled with the ratio)
    first = list(starts)
    taken = [(L1, L2)]
    for l1, l2 in pairs[1:]:
        if all(abs(math.log(l1 / a)) > RATIO_STARTS_APART or abs(math.log(l2 / b)) > RATIO_STARTS_APART
               for a, b in taken):
            taken.append((l1, l2))
            scale = (l2 / l1) / (L2 / L1)
            starts += [dict(st, L1_H=l1, L2_H=l2, R2_ohm=st["R2_ohm"] * scale, C2_F=st["C2_F"] / scale)
                       for st in first]
    return starts, polarity


def _short_capacitance_splits(c_total: float, csc1: float | None, csc2: float | None, n: float,
                              w12: float) -> list[tuple[float, float, float]]:
    """(C1, C2, C12) splits that keep what a shorted sweep reads, besides the open-circuit total.

    A winding swept with the other one shorted sees C1 + C12 (C2 + C12 from the secondary: the
    shorted side's own capacitance drops out), a second reading of the split that the open
    sweeps' total C1 + n²·C2 + w12·C12 (primary-referred) cannot give. With one such reading the
    splits run along it (SHORT_SPLITS of it to C12); with both, the three readings fix the split.
    Splits needing a negative capacitance are left out.
    """
    out = []
    for t in SHORT_SPLITS if csc1 or csc2 else ():
        if csc1:
            c1, c12 = (1.0 - t) * csc1, t * csc1
            c2 = (c_total - c1 - w12 * c12) / n ** 2
        else:
            c2, c12 = (1.0 - t) * csc2, t * csc2
            c1 = c_total - n ** 2 * c2 - w12 * c12
        out.append((c1, c2, c12))
    if csc1 and csc2 and abs(w12 - 1.0 - n ** 2) > 0:
        c12 = (c_total - csc1 - n ** 2 * csc2) / (w12 - 1.0 - n ** 2)
        out.append((csc1 - c12, csc2 - c12, c12))
    return [c for c in out if min(c) > 0]


def sweeps_that_see(sweeps: list[Sweep], winding: str) -> bool:
    """Whether any sweep carries information about `winding`'s own inductance."""
    for s in sweeps:
        if s.is_two_port or s.port1 == winding:
            return True
        if other_winding(s.port1) == winding and s.termination.is_load:
            return True
    return False
