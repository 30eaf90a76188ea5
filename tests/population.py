"""A seeded population of random, plausible hand-wound transformers, measured as a small VNA would.

Each unit is drawn log-uniformly over the range a user can bring (see
`draw_unit`), simulated with ngspice (tests/reference/spice.py runs it), given
small-VNA noise, sometimes a calibration residue, and written as a measurement
folder: Touchstone files in RI, MA or DB, in Hz, kHz or MHz, v1 or v2, most
thrus forward-only with their unmeasured columns written the way exporters do
(-300 or -600 dB, tiny magnitudes or exact zeros), plus manifest.toml and
truth.json. The sweeps come from ngspice, never from rfmeas's model; only the
yardsticks `information_limit` (the Cramer-Rao bound) and `model_limit` (the
model's best fit to the noise-free data) use the model, whose closed form
matches ngspice to 1e-12 (tests/test_model_reference.py). `judge` compares an
analysis's JSON with the truth.

Two core-loss placements:
- "magnetizing": Rc across the magnetising inductance Lm = k L1 (the model's
  own T-form, so the model can represent the unit exactly);
- "primary": Rc across the whole primary inductance L1 (coupled inductors with
  a resistor across L1 after R1), which the model cannot represent exactly.
In both, the core-loss corner Rc / (2 pi L) is drawn (L = Lm or L1), and the
truth's L1, L2, k, leakage L1 (1 - k^2) and ratio sqrt(L2/L1) are the coils'.

Typical use:

    specs = draw_population(200, seed=1)
    truths = [write_unit(spec, root / spec.name) for spec in specs]
    truth = make_unit(7, folder, core_loss="primary", sweeps="thru")
"""

from __future__ import annotations

import json
import math
from dataclasses import asdict, dataclass, field, fields, replace
from pathlib import Path

import numpy as np

from rfmeas.model.params import CORE_LOSS_PLACEMENTS, TransformerParams

from reference.spice import _num, run_ngspice

Z0_OHM = 50.0
GENERATOR_VERSION = 3   # bump when the same spec would give other files
SWEEP_KINDS = ("pri_open", "pri_short", "sec_open", "thru")
# The sweep subsets a user may bring; the value lists the sweeps in each.
SUBSETS = {
    "four": ("pri_open", "pri_short", "sec_open", "thru"),
    "three": ("pri_open", "pri_short", "thru"),
    "three-oneport": ("pri_open", "pri_short", "sec_open"),
    "two": ("pri_open", "thru"),
    "two-oneport": ("pri_open", "pri_short"),
    "thru": ("thru",),
}
SUBSET_WEIGHTS = {"four": 0.7, "three": 0.06, "three-oneport": 0.06, "two": 0.06,
                  "two-oneport": 0.06, "thru": 0.06}
# The key quantities each subset determines whatever the unit (others may or may not be).
DETERMINED_BY = {
    "four": ("L1", "L2", "leakage", "ratio"),
    "three": ("L1", "L2", "leakage", "ratio"),
    "three-oneport": ("L1", "L2", "leakage", "ratio"),
    "two": ("L1", "L2", "ratio"),
    "two-oneport": ("L1", "leakage"),
    "thru": ("ratio",),
}
STARTS_HZ = (10e3, 50e3, 100e3)
STOPS_HZ = (30e6, 50e6, 100e6)
FILE_UNITS = {"Hz": 1.0, "kHz": 1e3, "MHz": 1e6}
FILE_FORMATS = ("RI", "MA", "DB")
# How the unmeasured S12/S22 of a forward-only file are written, per format.
UNMEASURED = {"DB": ("-300 0", "-600 0", "-200 0"), "MA": ("1e-15 0", "1e-20 0", "0 0"),
              "RI": ("1e-15 0", "0 0", "1e-18 1e-18")}


def _loguniform(rng: np.random.Generator, low: float, high: float) -> float:
    return float(math.exp(rng.uniform(math.log(low), math.log(high))))


@dataclass(frozen=True)
class Calibration:
    """A mild residue of a careful SOL calibration (from memory: typical magnitudes).

    directivity_dB ~ -45..-55, source/load match ~ -40 dB, tracking within
    +-0.02 dB; each error term turns slowly with frequency (delay_s).
    """

    directivity_dB: float
    source_match_dB: float
    load_match_dB: float
    tracking_dB: float
    transmission_tracking_dB: float
    phases_rad: tuple[float, float, float]
    delay_s: float

    def terms(self, f_Hz: np.ndarray, port: int):
        """(e00, e11, e10e01, e22, e10e32) at each frequency, for a measurement driven at `port` (0 or 1)."""
        turn = np.exp(2j * np.pi * f_Hz * self.delay_s)
        shift = 0.7 * port
        e00 = 10 ** (self.directivity_dB / 20) * np.exp(1j * (self.phases_rad[0] + shift)) * turn
        e11 = 10 ** (self.source_match_dB / 20) * np.exp(1j * (self.phases_rad[1] + shift)) * turn
        e22 = 10 ** (self.load_match_dB / 20) * np.exp(1j * (self.phases_rad[2] - shift)) * turn
        span = f_Hz / f_Hz[-1]
        e10e01 = 10 ** (self.tracking_dB * (1 - 2 * span) / 20) * np.ones_like(turn)
        e10e32 = 10 ** (self.transmission_tracking_dB * (1 - 2 * span) / 20) * np.ones_like(turn)
        return e00, e11, e10e01, e22, e10e32


def draw_calibration(rng: np.random.Generator) -> Calibration:
    return Calibration(
        directivity_dB=float(rng.uniform(-55, -45)),
        source_match_dB=float(rng.uniform(-43, -37)),
        load_match_dB=float(rng.uniform(-43, -37)),
        tracking_dB=float(rng.uniform(-0.02, 0.02)),
        transmission_tracking_dB=float(rng.uniform(-0.02, 0.02)),
        phases_rad=tuple(float(x) for x in rng.uniform(-math.pi, math.pi, 3)),
        delay_s=float(rng.uniform(0, 2e-9)),
    )


@dataclass(frozen=True)
class UnitSpec:
    """Everything drawn for one unit: the circuit, how it was swept, how the files were written."""

    name: str
    params: TransformerParams          # coil values; Rc_ohm sits where `core_loss` says
    core_loss: str                     # "magnetizing" | "primary"
    subset: str                        # a key of SUBSETS
    start_Hz: float
    stop_Hz: float
    points: int
    spacing: str                       # "log" | "linear"
    noise: float                       # rms of each real component of the additive noise
    file_format: str                   # RI | MA | DB
    file_unit: str                     # Hz | kHz | MHz
    version: int                       # Touchstone 1 or 2
    forward_only: bool
    unmeasured: str                    # how the unmeasured columns are written
    calibration: Calibration | None
    stitch_at: int | None              # index of a frequency read twice (segment boundary)
    option_order: tuple[str, ...]      # option-line tokens in the order written
    noise_seed: int

    @property
    def sweeps(self) -> tuple[str, ...]:
        return SUBSETS[self.subset]

    def to_dict(self) -> dict:
        d = asdict(self)
        d["params"] = self.params.to_dict()
        d["sweeps"] = list(self.sweeps)
        return d


@dataclass(frozen=True)
class Truth:
    """What a fit of the unit should find (coil values, whatever the core-loss placement)."""

    name: str
    params: TransformerParams
    core_loss: str
    subset: str
    sweeps: tuple[str, ...]
    noise: float
    folder: str
    spec: dict = field(repr=False, compare=False)

    @property
    def L1_H(self) -> float:
        return self.params.L1_H

    @property
    def L2_H(self) -> float:
        return self.params.L2_H

    @property
    def leakage_H(self) -> float:
        return self.params.leakage_inductance_H

    @property
    def ratio(self) -> float:
        return self.params.effective_turns_ratio

    @property
    def manifest(self) -> Path:
        return Path(self.folder) / "manifest.toml"

    @property
    def determined(self) -> tuple[str, ...]:
        """Key quantities the sweeps determine for any unit (see DETERMINED_BY)."""
        return DETERMINED_BY[self.subset]

    def to_dict(self) -> dict:
        return {
            "generator_version": GENERATOR_VERSION, "name": self.name, "core_loss": self.core_loss,
            "subset": self.subset, "sweeps": list(self.sweeps), "noise": self.noise,
            "params": self.params.to_dict(),
            "leakage_inductance_H": self.leakage_H, "effective_turns_ratio": self.ratio,
            "spec": self.spec,
        }


_PARAM_FIELDS = {f.name for f in fields(TransformerParams)}
_SPEC_FIELDS = {f.name for f in fields(UnitSpec)}
_DRAWN = {"ratio", "one_minus_k", "corner_Hz"}


def draw_unit(rng: np.random.Generator, name: str = "unit", quirks: bool = True, **overrides) -> UnitSpec:
    """One random unit. Overrides: any UnitSpec field, any TransformerParams field, or
    `ratio` (sqrt(L2/L1)), `one_minus_k`, `corner_Hz` (Rc / (2 pi L)); `sweeps` may be
    a SUBSETS key.

    `quirks=False` gives issue 12's population exactly: noise, RI/MA/DB files in
    Hz/kHz/MHz, forward-only thrus with their fillers, linear and log grids, both
    core-loss placements, the sweep subsets; no calibration residue, no stitched
    repeat, no option line in odd order, no Touchstone v2. The same draws are made,
    so each unit is its quirky twin without the quirks."""
    unknown = set(overrides) - _PARAM_FIELDS - _SPEC_FIELDS - _DRAWN - {"sweeps"}
    if unknown:
        raise TypeError(f"unknown overrides {sorted(unknown)}")
    if "sweeps" in overrides:
        overrides["subset"] = overrides.pop("sweeps")
    # every draw is made, whatever is overridden, so one override leaves the rest unchanged
    d = {
        "L1_H": _loguniform(rng, 2e-6, 2e-3),
        "ratio": _loguniform(rng, 1 / 4, 5.0),
        "one_minus_k": _loguniform(rng, 5e-4, 5e-2),
        "R1_ohm": _loguniform(rng, 0.01, 1.0),
        "r2_scale": _loguniform(rng, 0.5, 2.0),
        "C1_F": _loguniform(rng, 1e-12, 20e-12),
        "C2_F": _loguniform(rng, 1e-12, 20e-12),
        "C12_F": _loguniform(rng, 0.5e-12, 20e-12),
        "corner_Hz": _loguniform(rng, 0.3e6, 30e6),
        "polarity": -1 if rng.uniform() < 0.15 else 1,
        "core_loss": CORE_LOSS_PLACEMENTS[int(rng.integers(2))],
        "subset": str(rng.choice(list(SUBSET_WEIGHTS), p=list(SUBSET_WEIGHTS.values()))),
        "start_Hz": float(rng.choice(STARTS_HZ)),
        "stop_Hz": float(rng.choice(STOPS_HZ)),
        "points": int(rng.integers(401, 1602)),
        "spacing": "linear" if rng.uniform() < 0.4 else "log",
        "noise": _loguniform(rng, 3e-4, 3e-3),
        "file_format": str(rng.choice(FILE_FORMATS)),
        "file_unit": str(rng.choice(list(FILE_UNITS))),
        "version": 2 if rng.uniform() < 0.15 else 1,
        "forward_only": bool(rng.uniform() < 0.75),
        "unmeasured_choice": int(rng.integers(3)),
        "calibration": draw_calibration(rng) if rng.uniform() < 0.25 else None,
        "stitch": rng.uniform() < 0.2,
        "stitch_fraction": float(rng.uniform(0.3, 0.7)),
        "odd_options": rng.uniform() < 0.2,
        "option_perm": tuple(int(i) for i in rng.permutation(4)),
        "noise_seed": int(rng.integers(2**31)),
    }
    if not quirks:
        d.update(calibration=None, stitch=False, odd_options=False, version=1)
    for key in ("L1_H", "ratio", "one_minus_k", "R1_ohm", "C1_F", "C2_F", "C12_F", "corner_Hz",
                "polarity", "core_loss", "subset", "start_Hz", "stop_Hz", "points", "spacing", "noise",
                "file_format", "file_unit", "version", "forward_only", "calibration", "noise_seed"):
        if key in overrides:
            d[key] = overrides.pop(key)
    if d["subset"] not in SUBSETS:
        raise ValueError(f"sweeps must be one of {sorted(SUBSETS)}, not {d['subset']!r}")
    ratio = d["ratio"]
    k = overrides.pop("k", 1.0 - d["one_minus_k"])
    L1 = d["L1_H"]
    L2 = overrides.pop("L2_H", L1 * ratio ** 2)
    R2 = overrides.pop("R2_ohm", d["R1_ohm"] * (L2 / L1) * d["r2_scale"])
    inductance_across_rc = k * L1 if d["core_loss"] == "magnetizing" else L1
    Rc = overrides.pop("Rc_ohm", 2 * math.pi * d["corner_Hz"] * inductance_across_rc)
    params = TransformerParams(L1_H=L1, L2_H=L2, k=k, R1_ohm=d["R1_ohm"], R2_ohm=R2, Rc_ohm=Rc,
                               C1_F=d["C1_F"], C2_F=d["C2_F"], C12_F=d["C12_F"], polarity=d["polarity"])
    fmt = d["file_format"]
    options = [d["file_unit"].upper(), "S", fmt, f"R {Z0_OHM:g}"]
    if d["odd_options"]:
        options = [options[i] for i in d["option_perm"]]
    spec = UnitSpec(
        name=name, params=params, core_loss=d["core_loss"], subset=d["subset"],
        start_Hz=d["start_Hz"], stop_Hz=d["stop_Hz"], points=d["points"], spacing=d["spacing"],
        noise=d["noise"], file_format=fmt, file_unit=d["file_unit"], version=d["version"],
        forward_only=d["forward_only"], unmeasured=UNMEASURED[fmt][d["unmeasured_choice"]],
        calibration=d["calibration"],
        stitch_at=int(d["stitch_fraction"] * d["points"]) if d["stitch"] else None,
        option_order=tuple(options), noise_seed=d["noise_seed"],
    )
    rest = {k: v for k, v in overrides.items() if k in _SPEC_FIELDS}
    leftover = set(overrides) - set(rest)
    if leftover:
        raise TypeError(f"overrides {sorted(leftover)} cannot be combined this way")
    return replace(spec, **rest) if rest else spec


def draw_population(n: int, seed: int, quirks: bool = True, **overrides) -> list[UnitSpec]:
    """`n` units; unit i is drawn from its own stream (seed, i), so a prefix is stable.
    `quirks=False`: issue 12's population as specified (see draw_unit)."""
    return [draw_unit(np.random.default_rng([seed, i]), name=f"unit-{seed}-{i:03d}", quirks=quirks,
                      **dict(overrides)) for i in range(n)]


# --------------------------------------------------------------------------- simulation


def _subcircuit(params: TransformerParams, core_loss: str) -> list[str]:
    """`.subckt xfmr p s`: the unit with Rc across Lm (T-form) or across all of L1 (coupled form)."""
    p = params
    lines = [".subckt xfmr p s", f"R1 p pa {_num(p.R1_ohm)}", f"R2 s sb {_num(p.R2_ohm)}"]
    if core_loss == "magnetizing":
        a = math.sqrt(p.L2_H / p.L1_H)
        lm = p.magnetizing_inductance_H
        lines += [f"LL1 pa m {_num(p.primary_leakage_H)}", f"LL2 x sb {_num(p.secondary_leakage_H)}",
                  f"RC m 0 {_num(p.Rc_ohm)}", f"LMP m 0 {_num(lm)}",
                  # a perfectly coupled pair is Lm across an ideal 1:a transformer;
                  # the reversed secondary inductor makes an inverting unit
                  f"LMS x 0 {_num(a * a * lm)}" if p.polarity > 0 else f"LMS 0 x {_num(a * a * lm)}",
                  "KM LMP LMS 1"]
    elif core_loss == "primary":
        lines += [f"L1 pa 0 {_num(p.L1_H)}", f"RC pa 0 {_num(p.Rc_ohm)}",
                  f"L2 sb 0 {_num(p.L2_H)}" if p.polarity > 0 else f"L2 0 sb {_num(p.L2_H)}",
                  f"K12 L1 L2 {_num(p.k)}"]
    else:
        raise ValueError(f"core_loss must be one of {CORE_LOSS_PLACEMENTS}, not {core_loss!r}")
    lines += [f"C1 p 0 {_num(p.C1_F)}", f"C2 s 0 {_num(p.C2_F)}", f"C12 p s {_num(p.C12_F)}",
              ".ends xfmr"]
    return lines


# node saved for each quantity: S11 = V - 1 (2 V source behind Z0), S21 = V at the other port
_CIRCUITS = {
    "pri_open": (["VPO spo 0 DC 0 AC 2", f"RPO spo po1 {Z0_OHM:g}", "XPO po1 po2 xfmr"], ["po1"]),
    "pri_short": (["VPS sps 0 DC 0 AC 2", f"RPS sps ps1 {Z0_OHM:g}", "XPS ps1 0 xfmr"], ["ps1"]),
    "sec_open": (["VSO sso 0 DC 0 AC 2", f"RSO sso so2 {Z0_OHM:g}", "XSO so1 so2 xfmr"], ["so2"]),
    "thru": (["VTA sta 0 DC 0 AC 2", f"RTA1 sta ta1 {Z0_OHM:g}", f"RTA2 ta2 0 {Z0_OHM:g}",
              "XTA ta1 ta2 xfmr",
              "VTB stb 0 DC 0 AC 2", f"RTB2 stb tb2 {Z0_OHM:g}", f"RTB1 tb1 0 {Z0_OHM:g}",
              "XTB tb1 tb2 xfmr"], ["ta1", "ta2", "tb1", "tb2"]),
}


def simulate_unit(params: TransformerParams, core_loss: str, f_Hz, sweeps=SWEEP_KINDS) -> dict:
    """Noise-free sweeps from one ngspice run: {kind: S11 (F,) or S (F, 2, 2)}, and "f_Hz".

    "f_Hz" holds the frequencies ngspice analysed: those asked for to 1e-8 (a
    native sweep accumulates rounding); write them, not the ones asked for.

    A linear grid, or a log grid with a whole number of points per decade, is
    one AC analysis; otherwise every frequency is its own
    one-point analysis (ngspice has no list sweep), and `destroy all` after each
    write keeps the run linear in the number of points.
    """
    f = np.asarray(f_Hz, dtype=float)
    lines = ["* rfmeas population unit"] + _subcircuit(params, core_loss)
    nodes = []
    for kind in sweeps:
        elements, saved = _CIRCUITS[kind]
        lines += elements
        nodes += saved
    saved = " ".join(f"v({n})" for n in nodes)
    lines += [".control", "set filetype=binary", "set appendwrite"]
    native = _native_sweep(f)
    if native:  # one analysis; its frequencies differ from f by rounding only
        # a stop a hair above the last point, so rounding cannot drop it
        stop = f[-1] * (1 + 1e-9) if native.startswith("dec") else f[-1]
        lines += [f"ac {native} {_num(f[0])} {_num(stop)}", f"write out.raw {saved}"]
    else:
        for fi in f:
            lines += [f"ac lin 1 {_num(fi)} {_num(fi)}", f"write out.raw {saved}", "destroy all"]
    lines += ["quit", ".endc", ".end", ""]
    plots = run_ngspice("\n".join(lines), timeout_s=120.0)
    if len(plots) != (1 if native else f.size):
        raise RuntimeError(f"ngspice returned {len(plots)} analyses for {f.size} frequencies")
    data = {name: np.concatenate([p[name] for p in plots]) for name in plots[0]}
    got = data["frequency"].real
    if got.size != f.size or not np.allclose(got, f, rtol=1e-8, atol=0):
        raise RuntimeError(f"ngspice analysed other frequencies than asked ({got.size} for {f.size}, "
                           f"{got[0]:.12g}..{got[-1]:.12g} Hz for {f[0]:.12g}..{f[-1]:.12g} Hz)")
    out = {"f_Hz": got}
    for kind in sweeps:
        v = [data[f"v({n})"] for n in _CIRCUITS[kind][1]]
        if kind == "thru":
            s = np.empty((f.size, 2, 2), dtype=complex)
            s[:, 0, 0], s[:, 1, 0], s[:, 0, 1], s[:, 1, 1] = v[0] - 1, v[1], v[2], v[3] - 1
            out[kind] = s
        else:
            out[kind] = v[0] - 1
    return out


def _native_sweep(f: np.ndarray) -> str | None:
    """'lin N' or 'dec N' when ngspice's own sweep gives the grid `f`, else None."""
    if f.size < 3:
        return None
    step = np.diff(f)
    if np.allclose(step, step.mean(), rtol=1e-8, atol=0):
        return f"lin {f.size}"
    nd = round((f.size - 1) / math.log10(f[-1] / f[0]))
    if nd >= 1 and np.allclose(f[0] * 10.0 ** (np.arange(f.size) / nd), f, rtol=1e-9, atol=0):
        return f"dec {nd}"
    return None


def frequency_grid(spec: UnitSpec) -> np.ndarray:
    """The sweep's frequencies in Hz (ngspice analyses them to 1e-8, see `simulate_unit`).

    A log grid has a whole number of points per decade (as many VNAs define a
    log sweep), close to `points` in all, and ends at its last point not above
    the stop frequency (within one step of it)."""
    if spec.spacing == "linear":
        f = np.linspace(spec.start_Hz, spec.stop_Hz, spec.points)
    else:
        decades = math.log10(spec.stop_Hz / spec.start_Hz)
        per_decade = max(1, round((spec.points - 1) / decades))
        count = int(math.floor(per_decade * decades + 1e-9)) + 1
        f = spec.start_Hz * 10.0 ** (np.arange(count) / per_decade)
    return f


def _apply_calibration(cal: Calibration, f_Hz, s, two_port: bool):
    """What an imperfectly calibrated VNA reads for the true S (one-port (F,) or (F, 2, 2))."""
    if not two_port:
        e00, e11, t, _, _ = cal.terms(f_Hz, 0)
        return e00 + t * s / (1 - e11 * s)
    out = np.empty_like(s)
    for port in (0, 1):
        a, b = (port, 1 - port)
        s11, s21, s12, s22 = s[:, a, a], s[:, b, a], s[:, a, b], s[:, b, b]
        e00, e11, t, e22, tt = cal.terms(f_Hz, port)
        ds = s11 * s22 - s21 * s12
        den = 1 - e11 * s11 - e22 * s22 + e11 * e22 * ds
        out[:, a, a] = e00 + t * (s11 - e22 * ds) / den
        out[:, b, a] = tt * s21 / den
    return out


def format_pair(value: complex, fmt: str, digits: int = 9) -> str:
    """One complex value as the two numbers of a Touchstone RI, MA or DB column (angle in degrees)."""
    value = complex(value)
    if fmt == "RI":
        return f"{value.real:.{digits}g} {value.imag:.{digits}g}"
    angle = math.degrees(math.atan2(value.imag, value.real))
    if fmt == "MA":
        return f"{abs(value):.{digits}g} {angle:.{digits}g}"
    return f"{20 * math.log10(abs(value)):.{digits}g} {angle:.{digits}g}"


def touchstone_text(spec: UnitSpec, kind: str, f_text: list[str], s, repeat=None) -> str:
    """The file as an exporter would write it; `repeat` is (index, second reading) for a stitch."""
    two_port = kind == "thru"
    lines = [f"! invented test unit {spec.name}: ngspice simulation plus simulated VNA noise",
             f"! sweep {kind}"]
    rows = [(f_text[i], s[i]) for i in range(len(f_text))]
    if repeat is not None:
        index, second = repeat
        rows.insert(index + 1, (f_text[index], second))
    order_12_21 = spec.version == 2
    if spec.version == 2:
        lines += ["[Version] 2.0", "# " + " ".join(spec.option_order),
                  f"[Number of Ports] {2 if two_port else 1}"]
        if two_port:
            lines.append("[Two-Port Data Order] 12_21")
        lines += [f"[Number of Frequencies] {len(rows)}", "[Network Data]"]
    else:
        lines.append("# " + " ".join(spec.option_order))
    fmt = spec.file_format
    for f_str, value in rows:
        if not two_port:
            lines.append(f"{f_str} {format_pair(value, fmt)}")
            continue
        s11, s21, s12, s22 = (format_pair(value[i, j], fmt) for i, j in ((0, 0), (1, 0), (0, 1), (1, 1)))
        if spec.forward_only:
            s12 = s22 = spec.unmeasured
        cols = (s11, s12, s21, s22) if order_12_21 else (s11, s21, s12, s22)
        lines.append(f"{f_str} " + " ".join(cols))
    if spec.version == 2:
        lines.append("[End]")
    return "\n".join(lines) + "\n"


def _manifest(spec: UnitSpec) -> str:
    lines = [f"# invented test unit (tests/population.py), core loss across the {spec.core_loss} "
             "inductance", "[transformer]", f'name = "{spec.name}"', ""]
    for kind in spec.sweeps:
        lines.append("[[sweep]]")
        if kind == "thru":
            lines += ['file = "thru.s2p"', 'port1 = "primary"', 'port2 = "secondary"']
        else:
            port1 = "secondary" if kind == "sec_open" else "primary"
            term = "short" if kind == "pri_short" else "open"
            lines += [f'file = "{kind}.s1p"', f'port1 = "{port1}"', f'termination = "{term}"']
        lines.append("")
    return "\n".join(lines)


def write_unit(spec: UnitSpec, folder, clean: dict | None = None) -> Truth:
    """Simulate `spec` and write its folder (Touchstone files, manifest.toml, truth.json, and
    clean.npz: the noise-free sweeps before any calibration residue, see `load_clean`).

    `clean` may pass noise-free sweeps from an earlier `simulate_unit` call of the
    same spec (to redraw only the noise)."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    f_Hz = frequency_grid(spec)
    if clean is None:
        clean = simulate_unit(spec.params, spec.core_loss, f_Hz, spec.sweeps)
    f_Hz = clean["f_Hz"]
    scale = FILE_UNITS[spec.file_unit]
    # 15 significant digits: a file frequency within 1e-14 of the one simulated
    f_text = [f"{x / scale:.15g}" for x in f_Hz]
    rng = np.random.default_rng(spec.noise_seed)

    def noisy(s):
        if spec.calibration is not None:
            s = _apply_calibration(spec.calibration, f_Hz, s, s.ndim == 3)
        return s + spec.noise * (rng.standard_normal(s.shape) + 1j * rng.standard_normal(s.shape))

    for kind in spec.sweeps:
        s = noisy(clean[kind])
        repeat = None
        if spec.stitch_at is not None:
            # the next segment starts where the last ended: a second reading of one frequency
            repeat = (spec.stitch_at, noisy(clean[kind])[spec.stitch_at])
        ext = "s2p" if kind == "thru" else "s1p"
        (folder / f"{kind}.{ext}").write_text(touchstone_text(spec, kind, f_text, s, repeat))
    (folder / "manifest.toml").write_text(_manifest(spec))
    np.savez(folder / "clean.npz", **clean)
    truth = Truth(name=spec.name, params=spec.params, core_loss=spec.core_loss, subset=spec.subset,
                  sweeps=spec.sweeps, noise=spec.noise, folder=str(folder), spec=spec.to_dict())
    (folder / "truth.json").write_text(json.dumps(truth.to_dict(), indent=1))
    return truth


def make_unit(rng_or_seed, folder, **overrides) -> Truth:
    """Draw one unit (a Generator or an int seed; see `draw_unit` for overrides) and write it."""
    rng = rng_or_seed if isinstance(rng_or_seed, np.random.Generator) else np.random.default_rng(rng_or_seed)
    name = overrides.pop("name", Path(folder).name)
    return write_unit(draw_unit(rng, name=name, **overrides), folder)


def load_truth(folder) -> Truth:
    """The Truth written by `write_unit` into `folder`."""
    d = json.loads((Path(folder) / "truth.json").read_text())
    params = TransformerParams(**d["params"])
    return Truth(name=d["name"], params=params, core_loss=d["core_loss"], subset=d["subset"],
                 sweeps=tuple(d["sweeps"]), noise=d["noise"], folder=str(folder), spec=d["spec"])


# --------------------------------------------------------------------------- Cramer-Rao bound

_LOG_NAMES = ("L1_H", "L2_H", "one_minus_k", "R1_ohm", "R2_ohm", "Rc_ohm", "C1_F", "C2_F", "C12_F")
KEY_QUANTITIES = ("L1", "L2", "leakage", "ratio", "C1", "C2", "C12")
# prior spread (natural log) that keeps the information matrix invertible along directions the
# sweeps do not see; a quantity with a bound near this size is not determined by the data
PRIOR_LOG_SD = 10.0


def _params_from_log(x: np.ndarray, polarity: int) -> TransformerParams:
    v = dict(zip(_LOG_NAMES, np.exp(x)))
    k = 1.0 - v.pop("one_minus_k")
    return TransformerParams(k=k, polarity=polarity, **v)


def _model_rows(params: TransformerParams, f_Hz, sweeps, forward_only: bool) -> np.ndarray:
    from rfmeas.model import circuit

    parts = []
    for kind in sweeps:
        if kind == "thru":
            s = circuit.s_matrix(params, f_Hz, "primary", Z0_OHM, Z0_OHM)
            parts += [s[:, 0, 0], s[:, 1, 0]] + ([] if forward_only else [s[:, 0, 1], s[:, 1, 1]])
        else:
            port1 = "secondary" if kind == "sec_open" else "primary"
            parts.append(circuit.reflection(params, f_Hz, port1, "short" if kind == "pri_short" else "open",
                                            Z0_OHM))
    z = np.concatenate(parts)
    return np.concatenate([z.real, z.imag])


def _log_of(name: str, x: np.ndarray) -> float:
    v = dict(zip(_LOG_NAMES, np.exp(x)))
    k = 1.0 - v["one_minus_k"]
    return math.log({"L1": v["L1_H"], "L2": v["L2_H"], "leakage": v["L1_H"] * (1 - k * k),
                     "ratio": math.sqrt(v["L2_H"] / v["L1_H"]), "C1": v["C1_F"], "C2": v["C2_F"],
                     "C12": v["C12_F"]}[name])


def information_limit(spec: UnitSpec) -> dict[str, float]:
    """Cramer-Rao bound: the relative standard deviation of each key quantity an unbiased fit can reach.

    cov = sigma^2 (J^T J)^-1 with J the Jacobian of the model's measured values
    (real and imaginary parts of every fitted S element) in log coordinates at the
    truth, sigma the known noise. Exact for the model's core-loss placement
    without calibration residue; an approximation otherwise.
    """
    p = spec.params
    x0 = np.log([p.L1_H, p.L2_H, 1.0 - p.k, p.R1_ohm, p.R2_ohm, p.Rc_ohm, p.C1_F, p.C2_F, p.C12_F])
    f_Hz = frequency_grid(spec)
    step = 1e-6
    cols = []
    for j in range(x0.size):
        dx = np.zeros_like(x0)
        dx[j] = step
        hi = _model_rows(_params_from_log(x0 + dx, p.polarity), f_Hz, spec.sweeps, spec.forward_only)
        lo = _model_rows(_params_from_log(x0 - dx, p.polarity), f_Hz, spec.sweeps, spec.forward_only)
        cols.append((hi - lo) / (2 * step))
    jac = np.stack(cols, axis=1)
    info = jac.T @ jac / spec.noise ** 2 + np.eye(x0.size) / PRIOR_LOG_SD ** 2
    cov = np.linalg.inv(info)
    out = {}
    for name in KEY_QUANTITIES:
        g = np.empty_like(x0)
        for j in range(x0.size):
            dx = np.zeros_like(x0)
            dx[j] = step
            g[j] = (_log_of(name, x0 + dx) - _log_of(name, x0 - dx)) / (2 * step)
        out[name] = float(math.sqrt(max(g @ cov @ g, 0.0)))
    return out


# --------------------------------------------------------------------------- judging a fit

# the tolerances on the key quantities (relative), and on the capacitances
TOLERANCES = {"L1": 0.01, "L2": 0.01, "leakage": 0.03, "ratio": 0.005}
CAPACITANCE_TOLERANCE = 0.15
SILENT_SIGMAS = 5.0
JSON_KEYS = {"L1": "primary_inductance_H", "L2": "secondary_inductance_H",
             "leakage": "leakage_inductance_H", "ratio": "effective_turns_ratio",
             "C1": "primary_capacitance_F", "C2": "secondary_capacitance_F",
             "C12": "interwinding_capacitance_F"}


def true_value(truth: Truth, name: str) -> float:
    p = truth.params
    return {"L1": p.L1_H, "L2": p.L2_H, "leakage": p.leakage_inductance_H, "ratio": p.effective_turns_ratio,
            "C1": p.C1_F, "C2": p.C2_F, "C12": p.C12_F}[name]


@dataclass(frozen=True)
class Verdict:
    """How a fit's JSON compares with the truth.

    recovered    every key quantity the sweeps determine (Truth.determined) is
                 reported determined and within TOLERANCES, and no other one is
                 reported determined outside them
    silent       key quantities reported determined that are more than
                 SILENT_SIGMAS standard errors from the truth (or wrong beyond
                 tolerance with no or a zero standard error) while the fit's
                 quality grade is not "poor" (a missing grade counts as not poor)
    wrong        key quantities that spoil `recovered`, with the reason
    capacitances_ok  C1, C2 and C12 all determined and within CAPACITANCE_TOLERANCE
    """

    recovered: bool
    silent: tuple[str, ...]
    wrong: tuple[str, ...]
    capacitances_ok: bool
    grade: str | None
    polarity_ok: bool | None
    details: dict
    refused: str | None = None

    def describe(self) -> str:
        if self.refused:
            return f"refused: {self.refused}"
        parts = []
        for name, d in self.details.items():
            if name in self.wrong or name in self.silent:
                if d["value"] is None:
                    parts.append(f"{name} not determined")
                    continue
                z = "" if d["z"] is None else f", {d['z']:.0f} se"
                parts.append(f"{name} {d['rel_err']:+.2%}{z}")
        if self.polarity_ok is False:
            parts.append("polarity wrong")
        grade = self.grade or "no grade"
        return (", ".join(parts) or "ok") + f" [{grade}]" + (" SILENT" if self.silent else "")


def judge(truth: Truth, result: dict) -> Verdict:
    """Compare `analysis.to_dict()` (or None with `refused` text) with the truth."""
    grade = (result.get("fit", {}).get("quality") or {}).get("grade")
    details, wrong, silent = {}, [], []
    for name in KEY_QUANTITIES:
        est = result["parameters"][JSON_KEYS[name]]
        t = true_value(truth, name)
        value, stderr = est.get("value"), est.get("stderr")
        determined = bool(est.get("determined", value is not None)) and value is not None
        rel = None if value is None else value / t - 1.0
        z = None if (value is None or not stderr) else (value - t) / stderr
        details[name] = {"truth": t, "value": value, "stderr": stderr, "determined": determined,
                         "rel_err": rel, "z": z}
        if name not in TOLERANCES:
            continue
        tol = TOLERANCES[name]
        if determined:
            if abs(rel) > tol:
                wrong.append(name)
            off = abs(rel) > tol if z is None else abs(z) > SILENT_SIGMAS
            if off and grade != "poor":
                silent.append(name)
        elif name in truth.determined:
            wrong.append(name)
    caps = all(details[c]["determined"] and abs(details[c]["rel_err"]) <= CAPACITANCE_TOLERANCE
               for c in ("C1", "C2", "C12"))
    polarity_ok = None
    if "thru" in truth.sweeps:
        fitted = result.get("model", {}).get("polarity")
        polarity_ok = fitted == truth.params.polarity
    return Verdict(recovered=not wrong, silent=tuple(silent), wrong=tuple(wrong), capacitances_ok=caps,
                   grade=grade, polarity_ok=polarity_ok, details=details)


def refused(message: str) -> Verdict:
    """The verdict when the tool declined to give numbers (an RfmeasError): not silent, not recovered."""
    return Verdict(recovered=False, silent=(), wrong=(), capacitances_ok=False, grade=None,
                   polarity_ok=None, details={}, refused=message)


def load_clean(folder) -> dict:
    """The noise-free sweeps `write_unit` saved in `folder` ({"f_Hz": ..., kind: S})."""
    with np.load(Path(folder) / "clean.npz") as data:
        return {key: data[key] for key in data.files}


def _rows_of(spec: UnitSpec, sweeps: dict) -> np.ndarray:
    """Real and imaginary parts of every fitted S element, in `_model_rows` order."""
    parts = []
    for kind in spec.sweeps:
        s = sweeps[kind]
        if kind == "thru":
            parts += [s[:, 0, 0], s[:, 1, 0]] + ([] if spec.forward_only else [s[:, 0, 1], s[:, 1, 1]])
        else:
            parts.append(s)
    z = np.concatenate(parts)
    return np.concatenate([z.real, z.imag])


def model_limit(spec: UnitSpec, clean: dict) -> dict[str, float]:
    """Relative error of each key quantity at the model's best fit to the noise-free data.

    The data are what the files hold without noise (calibration residue
    included); the fit starts at the truth and is local, in the coordinates of
    `information_limit`, with the same weak prior. It is the systematic error no
    fit of the model can avoid: zero for the model's own core-loss placement
    without calibration residue, not for the other placement or with a residue.
    """
    from scipy.optimize import least_squares

    p = spec.params
    f_Hz = clean["f_Hz"]
    measured = {kind: clean[kind] for kind in spec.sweeps}
    if spec.calibration is not None:
        measured = {kind: _apply_calibration(spec.calibration, f_Hz, s, s.ndim == 3)
                    for kind, s in measured.items()}
    data = _rows_of(spec, measured)
    x0 = np.log([p.L1_H, p.L2_H, 1.0 - p.k, p.R1_ohm, p.R2_ohm, p.Rc_ohm, p.C1_F, p.C2_F, p.C12_F])

    def residual(x):
        with np.errstate(all="ignore"):
            model = _model_rows(_params_from_log(np.clip(x, -60.0, 30.0), p.polarity), f_Hz, spec.sweeps,
                                spec.forward_only)
        out = np.concatenate([(model - data) / spec.noise, (x - x0) / PRIOR_LOG_SD])
        return np.where(np.isfinite(out), out, 1e12)

    x0_safe = x0.copy()
    x0_safe[2] = min(x0_safe[2], math.log(0.5))
    best = least_squares(residual, x0_safe, method="lm", x_scale=1.0)
    return {name: float(math.exp(_log_of(name, best.x) - _log_of(name, x0)) - 1.0) for name in KEY_QUANTITIES}


def with_noise_seed(spec: UnitSpec, noise_seed: int) -> UnitSpec:
    """The same unit measured again: only the noise differs."""
    return replace(spec, noise_seed=int(noise_seed))


__all__ = [
    "SUBSETS", "DETERMINED_BY", "CORE_LOSS_PLACEMENTS", "UnitSpec", "Truth", "Calibration",
    "draw_unit", "draw_population", "make_unit", "write_unit", "load_truth", "simulate_unit",
    "frequency_grid", "format_pair", "with_noise_seed", "information_limit", "model_limit", "load_clean",
    "KEY_QUANTITIES",
    "TOLERANCES", "Verdict", "judge", "refused", "true_value",
]
