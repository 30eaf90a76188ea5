"""A seeded population of random, plausible hand-wound transformers, measured as a small VNA would.

Each unit is drawn log-uniformly over the range a user can bring (see
`draw_unit`), simulated with ngspice (tests/reference/spice.py runs it), given
small-VNA noise, sometimes a calibration residue, and written as a measurement
folder: Touchstone files in RI, MA or DB, in Hz, kHz or MHz, v1 or v2, most
thrus forward-only with their unmeasured columns written the way exporters do
(-300 or -600 dB, tiny magnitudes or exact zeros), plus manifest.toml and
truth.json. Nothing here calls rfmeas's model: the sweeps come from ngspice.

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

from rfmeas.model.params import TransformerParams

from reference.spice import _num, run_ngspice

Z0_OHM = 50.0
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
CORE_LOSS_PLACEMENTS = ("magnetizing", "primary")
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
            "name": self.name, "core_loss": self.core_loss, "subset": self.subset,
            "sweeps": list(self.sweeps), "noise": self.noise, "params": self.params.to_dict(),
            "leakage_inductance_H": self.leakage_H, "effective_turns_ratio": self.ratio,
            "spec": self.spec,
        }


_PARAM_FIELDS = {f.name for f in fields(TransformerParams)}
_SPEC_FIELDS = {f.name for f in fields(UnitSpec)}
_DRAWN = {"ratio", "one_minus_k", "corner_Hz"}


def draw_unit(rng: np.random.Generator, name: str = "unit", **overrides) -> UnitSpec:
    """One random unit. Overrides: any UnitSpec field, any TransformerParams field, or
    `ratio` (sqrt(L2/L1)), `one_minus_k`, `corner_Hz` (Rc / (2 pi L)); `sweeps` may be
    a SUBSETS key."""
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
        "calibration": draw_calibration(rng) if rng.uniform() < 0.35 else None,
        "stitch": rng.uniform() < 0.2,
        "stitch_fraction": float(rng.uniform(0.3, 0.7)),
        "odd_options": rng.uniform() < 0.2,
        "option_perm": tuple(int(i) for i in rng.permutation(4)),
        "noise_seed": int(rng.integers(2**31)),
    }
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


def draw_population(n: int, seed: int, **overrides) -> list[UnitSpec]:
    """`n` units; unit i is drawn from its own stream (seed, i), so a prefix is stable."""
    return [draw_unit(np.random.default_rng([seed, i]), name=f"unit-{seed}-{i:03d}", **overrides)
            for i in range(n)]


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
    """Noise-free sweeps from one ngspice run: {kind: S11 (F,) or S (F, 2, 2)}.

    Every frequency is its own one-point AC analysis (ngspice has no list
    sweep); `destroy all` after each write keeps the run linear in points.
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
    for fi in f:
        lines += [f"ac lin 1 {_num(fi)} {_num(fi)}", f"write out.raw {saved}", "destroy all"]
    lines += ["quit", ".endc", ".end", ""]
    plots = run_ngspice("\n".join(lines), timeout_s=120.0)
    if len(plots) != f.size:
        raise RuntimeError(f"ngspice returned {len(plots)} analyses for {f.size} frequencies")
    data = {name: np.concatenate([p[name] for p in plots]) for name in plots[0]}
    if not np.allclose(data["frequency"].real, f, rtol=1e-12, atol=0):
        raise RuntimeError("ngspice analysed other frequencies than asked")
    out = {}
    for kind in sweeps:
        v = [data[f"v({n})"] for n in _CIRCUITS[kind][1]]
        if kind == "thru":
            s = np.empty((f.size, 2, 2), dtype=complex)
            s[:, 0, 0], s[:, 1, 0], s[:, 0, 1], s[:, 1, 1] = v[0] - 1, v[1], v[2], v[3] - 1
            out[kind] = s
        else:
            out[kind] = v[0] - 1
    return out


def frequency_grid(spec: UnitSpec) -> tuple[np.ndarray, list[str]]:
    """The sweep's frequencies in Hz and as written in the file (so both agree exactly)."""
    if spec.spacing == "linear":
        f = np.linspace(spec.start_Hz, spec.stop_Hz, spec.points)
    else:
        f = np.geomspace(spec.start_Hz, spec.stop_Hz, spec.points)
    scale = FILE_UNITS[spec.file_unit]
    text = [f"{x / scale:.10g}" for x in f]
    return np.array([float(t) for t in text]) * scale, text


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


def _pair(value: complex, fmt: str) -> str:
    if fmt == "RI":
        return f"{value.real:.9g} {value.imag:.9g}"
    angle = math.degrees(math.atan2(value.imag, value.real))
    if fmt == "MA":
        return f"{abs(value):.9g} {angle:.7g}"
    return f"{20 * math.log10(abs(value)):.9g} {angle:.7g}"


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
            lines.append(f"{f_str} {_pair(complex(value), fmt)}")
            continue
        s11, s21, s12, s22 = (_pair(complex(value[i, j]), fmt) for i, j in ((0, 0), (1, 0), (0, 1), (1, 1)))
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
    """Simulate `spec` and write its folder (Touchstone files, manifest.toml, truth.json).

    `clean` may pass noise-free sweeps from an earlier `simulate_unit` call of the
    same spec (to redraw only the noise)."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    f_Hz, f_text = frequency_grid(spec)
    if clean is None:
        clean = simulate_unit(spec.params, spec.core_loss, f_Hz, spec.sweeps)
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


def with_noise_seed(spec: UnitSpec, noise_seed: int) -> UnitSpec:
    """The same unit measured again: only the noise differs."""
    return replace(spec, noise_seed=int(noise_seed))


__all__ = [
    "SUBSETS", "DETERMINED_BY", "CORE_LOSS_PLACEMENTS", "UnitSpec", "Truth", "Calibration",
    "draw_unit", "draw_population", "make_unit", "write_unit", "load_truth", "simulate_unit",
    "frequency_grid", "with_noise_seed",
]
