"""Make the invented demo measurement sets in sample_data/ (run once; the output is committed).

Scenario (invented): a 50 ohm -> 450 ohm coupler for a balanced ladder-line
feed, 5 primary and 15 secondary turns (1:3 turns, 1:9 impedance) on a NiZn
ferrite toroid (µi ≈ 800), 12.7 / 7.1 / 4.9 mm. The unit was first wound with
14 secondary turns ("coupler-before"), then rewound with 15 ("coupler-after").

The sweeps are ngspice AC analyses of the equivalent circuit
(tests/reference/spice.py) with small-VNA noise added: S' = S (1 + e_p) + e_a,
e_p and e_a complex Gaussian, 1e-3 rms each, fixed seed. The files carry the
quirks small VNAs produce: mixed formats and frequency units, a forward-only
two-port file (S12, S22 written as zeros) joined from two sweep segments that
share the 10 MHz point.

A third set, "unknown-core", is two test windings (1 and 4 turns) through the
same test leads on an unmarked ring core (16 / 9 / 6 mm) from a parts drawer,
for `rfmeas core`: the core is an invented NiZn ferrite with µi ≈ 125 whose
dispersion is a damped resonance plus a relaxation (ngspice: parallel L, C, R
and L ∥ R networks), the leads add 28 nH and 40 mohm, and the sweeps are linear
50 kHz – 300 MHz in two joined segments with a small VNA's calibration residue.

Usage: python scripts/make_sample_data.py [OUTPUT_FOLDER]  (default: sample_data/)
"""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from rfmeas.model.params import TransformerParams  # noqa: E402
from tests.reference import OnePort, TwoPort  # noqa: E402
from tests.reference.spice import simulate_spice  # noqa: E402

MU0 = 4e-7 * math.pi  # H/m (the pre-2019 exact value; differs from CODATA by 1e-10)
SEED = 20240611
Z0_OHM = 50.0
ADDITIVE_RMS = 1e-3
PROPORTIONAL_RMS = 1e-3

# core: NiZn ferrite toroid, µi ≈ 800 (invented unit, generic material)
OD_MM, ID_MM, HEIGHT_MM = 12.7, 7.1, 4.9
MU_R = 800.0
PRIMARY_TURNS = 5
RELAXATION_HZ = 8e6     # Debye relaxation frequency Rc / (2π Lm)
R1_OHM = 0.05
R2_OHM_PER_TURN = 0.25 / 15
C1_F = 1.5e-12
C12_F = 1.0e-12

SETS = {
    "coupler-before": dict(name="ladder-line coupler, unit 3", secondary_turns=14, k=0.990,
                           C2_F=1.9e-12, wording="as first wound, loosely, with 14 secondary turns instead of 15"),
    "coupler-after": dict(name="ladder-line coupler, unit 3", secondary_turns=15, k=0.997,
                          C2_F=2.0e-12, wording="rewound tighter with the designed 15 secondary turns",
                          readings="pri_lcr.csv"),
}

ONE_PORT_F_HZ = np.geomspace(100e3, 100e6, 801)
THRU_SEGMENTS_HZ = (np.geomspace(100e3, 10e6, 401), np.geomspace(10e6, 100e6, 401))


def toroid_c1_per_m(od_mm: float, id_mm: float, height_mm: float) -> float:
    """Core constant C1 = Σ l/A = 2π / (h ln(r2/r1)) of a rectangular-section ring, in 1/m (IEC 60205)."""
    return 2.0 * math.pi / (height_mm * 1e-3 * math.log(od_mm / id_mm))


def inductance_factor_H() -> float:
    """A_L = µ0 µ / C1, in henries per turn²."""
    return MU0 * MU_R / toroid_c1_per_m(OD_MM, ID_MM, HEIGHT_MM)


def true_params(secondary_turns: int, C2_F: float, k: float) -> TransformerParams:
    a_l = inductance_factor_H()
    L1_H = a_l * PRIMARY_TURNS ** 2
    Lm_H = k * L1_H
    return TransformerParams(
        L1_H=L1_H, L2_H=a_l * secondary_turns ** 2, k=k,
        R1_ohm=R1_OHM, R2_ohm=R2_OHM_PER_TURN * secondary_turns,
        Rc_ohm=2.0 * math.pi * RELAXATION_HZ * Lm_H,
        C1_F=C1_F, C2_F=C2_F, C12_F=C12_F,
    )


def add_noise(s: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    def complex_normal(shape):
        return (rng.standard_normal(shape) + 1j * rng.standard_normal(shape)) / math.sqrt(2.0)
    return s * (1.0 + PROPORTIONAL_RMS * complex_normal(s.shape)) + ADDITIVE_RMS * complex_normal(s.shape)


UNIT_SCALE = {"Hz": 1.0, "kHz": 1e3, "MHz": 1e6}


def _pair(value: complex, fmt: str) -> str:
    if fmt == "RI":
        return f"{value.real: .8e} {value.imag: .8e}"
    angle = math.degrees(np.angle(value))
    if fmt == "MA":
        return f"{abs(value): .8e} {angle: .6f}"
    return f"{20.0 * math.log10(abs(value)): .6f} {angle: .6f}"   # DB


def touchstone(f_Hz, columns, unit: str, fmt: str, comments: list[str]) -> str:
    """Touchstone v1 text: `columns` is a list of complex arrays in file order (S11 or S11 S21 S12 S22)."""
    lines = [f"! {c}" for c in comments]
    lines.append(f"# {unit.upper()} S {fmt} R {Z0_OHM:g}")
    for i, f in enumerate(f_Hz):
        values = " ".join(_pair(complex(col[i]), fmt) for col in columns)
        lines.append(f"{f / UNIT_SCALE[unit]:.9g} {values}")
    return "\n".join(lines) + "\n"


def manifest(spec: dict) -> str:
    return f'''# Invented demo data made by scripts/make_sample_data.py (ngspice + simulated VNA noise).
# Core: NiZn ferrite toroid, µi ≈ 800.

[transformer]
name = "{spec["name"]}"
notes = "{spec["wording"]}"
primary_turns = {PRIMARY_TURNS}
secondary_turns = {spec["secondary_turns"]}

[core]
shape = "toroid"
outer_diameter_mm = {OD_MM}
inner_diameter_mm = {ID_MM}
height_mm = {HEIGHT_MM}

[design]
source_impedance_ohm = 50
load_impedance_ohm = 450
lowest_frequency_Hz = 3.5e6
highest_frequency_Hz = 30e6
reactance_factor = 4

[[sweep]]
file = "pri_open.s1p"
port1 = "primary"
termination = "open"

[[sweep]]
file = "pri_short.s1p"
port1 = "primary"
termination = "short"

[[sweep]]
file = "sec_open.s1p"
port1 = "secondary"
termination = "open"

[[sweep]]
file = "thru.s2p"
port1 = "primary"
port2 = "secondary"
''' + ('''
[[reading]]
file = "{0}"
winding = "primary"
termination = "open"
'''.format(spec["readings"]) if "readings" in spec else "")


def make_set(folder: Path, spec: dict, params: TransformerParams, rng: np.random.Generator) -> None:
    folder.mkdir(parents=True, exist_ok=True)
    header = [
        "Invented demo data, not a measurement: ngspice simulation plus simulated VNA noise",
        "(scripts/make_sample_data.py).",
        f"Scenario: {spec['name']}; a 50 ohm to 450 ohm coupler for a ladder-line feed,",
        f"{PRIMARY_TURNS} primary turns, {spec['wording']};",
        f"NiZn ferrite toroid (µi ≈ 800) {OD_MM} / {ID_MM} / {HEIGHT_MM} mm.",
    ]
    one_ports = (
        ("pri_open.s1p", OnePort("primary", "open", Z0_OHM), "MHz", "MA",
         "Primary on port 1, secondary open."),
        ("pri_short.s1p", OnePort("primary", "short", Z0_OHM), "Hz", "RI",
         "Primary on port 1, secondary shorted."),
        ("sec_open.s1p", OnePort("secondary", "open", Z0_OHM), "kHz", "DB",
         "Secondary on port 1, primary open."),
    )
    for file, sweep, unit, fmt, what in one_ports:
        s11 = add_noise(simulate_spice(params, ONE_PORT_F_HZ, sweep), rng)
        (folder / file).write_text(touchstone(ONE_PORT_F_HZ, [s11], unit, fmt, header + [what]),
                                   encoding="utf-8")
    f_parts, s21_parts, s11_parts = [], [], []
    for f in THRU_SEGMENTS_HZ:
        s = simulate_spice(params, f, TwoPort("primary", Z0_OHM, Z0_OHM))
        f_parts.append(f)
        s11_parts.append(add_noise(s[:, 0, 0], rng))
        s21_parts.append(add_noise(s[:, 1, 0], rng))
    f_thru = np.concatenate(f_parts)
    zeros = np.zeros(f_thru.size, dtype=complex)
    thru_text = touchstone(
        f_thru, [np.concatenate(s11_parts), np.concatenate(s21_parts), zeros, zeros], "MHz", "RI",
        header + ["Primary on port 1, secondary on port 2; forward sweep only (S12, S22 not measured).",
                  "Two segments, 0.1-10 MHz and 10-100 MHz, joined as written by the instrument."])
    (folder / "thru.s2p").write_text(thru_text, encoding="utf-8")
    (folder / "manifest.toml").write_text(manifest(spec), encoding="utf-8")


# the unknown core: an invented NiZn ferrite, µi ≈ 125, a damped resonance plus a relaxation,
# measured with 1 and 4 turns through the same test leads on a linear 50 kHz – 300 MHz grid
CORE_OD_MM, CORE_ID_MM, CORE_HEIGHT_MM = 16.0, 9.0, 6.0
CORE_MU_R = 125.0
CORE_RESONANCE_SHARE = 0.7          # χs/(χs + χr)
CORE_RESONANCE_HZ = 40e6            # f0 of χs/(1 − (f/f0)² + jβ·f/f0)
CORE_DAMPING = 0.8                  # β < 1: µ' rises a few % before it falls
CORE_RELAXATION_HZ = 20e6           # fr of χr/(1 + j·f/fr)
CORE_WINDINGS = ((1, 0.4e-12, 0.004), (4, 1.0e-12, 0.014))   # turns, winding capacitance, copper resistance
LEAD_INDUCTANCE_H = 28e-9
LEAD_RESISTANCE_OHM = 0.04
CORE_SEGMENTS_HZ = (np.linspace(50e3, 150e6, 1000), np.linspace(150e6, 300e6, 501))
# residual errors after a hobby SOL calibration (three-term one-port model, from memory):
# directivity −40 dB, source match −35 dB, tracking +0.04 dB, slowly turning phases; one per segment
CORE_CALIBRATIONS = ((0.010, 0.55, 2.0e-9, 0.018, 2.1, 1.2e-9, 0.04), (0.009, 4.0, 1.1e-9, 0.016, 0.3, 2.5e-9, -0.03))


def core_susceptibility(f_Hz):
    """χ(f) of the invented core: a damped resonance plus a relaxation (µ = 1 + χ, µ' − jµ'')."""
    f = np.asarray(f_Hz, dtype=float)
    chi = CORE_MU_R - 1
    x = f / CORE_RESONANCE_HZ
    return (chi * CORE_RESONANCE_SHARE / (1 - x**2 + 1j * CORE_DAMPING * x)
            + chi * (1 - CORE_RESONANCE_SHARE) / (1 + 1j * f / CORE_RELAXATION_HZ))


def core_netlist(turns: int, cw_F: float, copper_ohm: float, f_Hz) -> str:
    """The winding as a lumped network for ngspice, driven by a 1 A AC source (v(a) = Z).

    jω·L0·χ of the damped resonance is L0χs ∥ C ∥ R with C = 1/(ω0²L0χs), R = ω0L0χs/β; the
    relaxation is L0χr ∥ R with R = 2π·fr·L0χr; L0 = µ0·N²/C1 is the air part. The leads
    (Rl, Ll) are in series; Cw sits across the N² part.
    """
    l0 = MU0 * turns**2 / toroid_c1_per_m(CORE_OD_MM, CORE_ID_MM, CORE_HEIGHT_MM)
    chi = CORE_MU_R - 1
    ls, lr = l0 * chi * CORE_RESONANCE_SHARE, l0 * chi * (1 - CORE_RESONANCE_SHARE)
    w0 = 2 * math.pi * CORE_RESONANCE_HZ
    lines = ["* test winding on the invented core", "I1 0 a AC 1",
             f"Rl a b {LEAD_RESISTANCE_OHM + copper_ohm:.12e}", f"Ll b c {LEAD_INDUCTANCE_H:.12e}",
             f"Cw c 0 {cw_F:.12e}", f"L0 c d {l0:.12e}",
             f"Ls d e {ls:.12e}", f"Cs d e {1 / (w0**2 * ls):.12e}", f"Rs d e {w0 * ls / CORE_DAMPING:.12e}",
             f"Lr e 0 {lr:.12e}", f"Rr e 0 {2 * math.pi * CORE_RELAXATION_HZ * lr:.12e}",
             ".control", "set filetype=binary"]
    lines += [f"ac lin {f_Hz.size} {f_Hz[0]:.12e} {f_Hz[-1]:.12e}", "write out.raw v(a)"]
    lines += ["quit", ".endc", ".end", ""]
    return "\n".join(lines)


def winding_impedance_spice(turns, cw_F, copper_ohm, f_Hz) -> np.ndarray:
    from tests.reference.spice import run_ngspice

    plot = run_ngspice(core_netlist(turns, cw_F, copper_ohm, f_Hz))[0]
    if not np.allclose(plot["frequency"].real, f_Hz, rtol=1e-9):
        raise RuntimeError("ngspice analysed other frequencies than asked")
    return plot["v(a)"]


def vna_residue(f_Hz, s, calibration, rng) -> np.ndarray:
    """S as a calibrated small VNA reports it: e00 + e01e10·S/(1 − e11·S) plus trace noise."""
    d, dp, dt, m, mp, mt, track_db = calibration
    e00 = d * np.exp(1j * (dp + 2 * np.pi * f_Hz * dt))
    e11 = m * np.exp(1j * (mp + 2 * np.pi * f_Hz * mt))
    s_meas = e00 + 10 ** (track_db / 20) * s / (1 - e11 * s)
    return s_meas + ADDITIVE_RMS * (rng.standard_normal(f_Hz.size) + 1j * rng.standard_normal(f_Hz.size)) / math.sqrt(2)


def core_truth() -> dict:
    """The invented core's true values, with its µ'' peak found on a fine grid."""
    grid = np.geomspace(1e5, 1e9, 200001)
    peak = float(grid[np.argmax(-core_susceptibility(grid).imag)])
    return {"mu_initial": CORE_MU_R, "loss_peak_Hz": peak, "relaxation_frequency_Hz": peak,
            "resonance_share": CORE_RESONANCE_SHARE, "resonance_frequency_Hz": CORE_RESONANCE_HZ,
            "resonance_damping": CORE_DAMPING, "relaxation_model_frequency_Hz": CORE_RELAXATION_HZ,
            "lead_inductance_H": LEAD_INDUCTANCE_H, "lead_resistance_ohm": LEAD_RESISTANCE_OHM,
            "windings": [{"turns": n, "winding_capacitance_F": c, "copper_resistance_ohm": r}
                         for n, c, r in CORE_WINDINGS],
            "core_mm": [CORE_OD_MM, CORE_ID_MM, CORE_HEIGHT_MM]}


def make_core_set(folder: Path, rng: np.random.Generator) -> dict:
    folder.mkdir(parents=True, exist_ok=True)
    for old in folder.glob("*.s1p"):
        old.unlink()
    entries = []
    for turns, cw, copper in CORE_WINDINGS:
        f_parts, s_parts = [], []
        for seg, cal in zip(CORE_SEGMENTS_HZ, CORE_CALIBRATIONS):
            z = winding_impedance_spice(turns, cw, copper, seg)
            f_parts.append(seg)
            s_parts.append(vna_residue(seg, (z - Z0_OHM) / (z + Z0_OHM), cal, rng))
        header = [
            "Invented demo data, not a measurement: ngspice simulation of a test winding plus simulated",
            "calibration residue and trace noise of a small VNA (scripts/make_sample_data.py).",
            f"Scenario: an unmarked ring core {CORE_OD_MM:g} / {CORE_ID_MM:g} / {CORE_HEIGHT_MM:g} mm from a parts",
            f"drawer, {turns} turns wound on it through 10 cm test leads. One-port, winding on port 1.",
            "Two segments joined as written by the instrument: 50 kHz-150 MHz and 150-300 MHz (150 MHz twice).",
        ]
        name = f"winding_{turns}t.s1p"
        (folder / name).write_text(touchstone(np.concatenate(f_parts), [np.concatenate(s_parts)], "Hz", "RI",
                                              header), encoding="utf-8")
        entries.append((name, turns))
    windings = "".join(f'[[winding]]\nfile = "{name}"\nturns = {turns}\nlabel = "{turns} turns"\n\n'
                       for name, turns in entries)
    (folder / "manifest.toml").write_text(f'''# Invented demo data made by scripts/make_sample_data.py: test windings on an unknown core.
# Analyse it with: rfmeas core sample_data/unknown-core
# Two turn counts through the same leads let rfmeas separate the leads' series inductance.

name = "unmarked ring core, drawer 4"
notes = "1 and 4 turns of enamelled wire, evenly spread, to identify the material"

[core]
shape = "toroid"
outer_diameter_mm = {CORE_OD_MM}
inner_diameter_mm = {CORE_ID_MM}
height_mm = {CORE_HEIGHT_MM}

{windings}[vna]     # the residual errors assumed after calibration (these are the defaults)
directivity_dB = -40
source_match_dB = -35
tracking_dB = 0.05
''', encoding="utf-8")
    return core_truth()


LCR_READINGS_HZ = (1e3, 10e3, 100e3)
LCR_GAIN_ERROR = 1.006  # the invented bench meter reads inductance 0.6 % high


def lcr_readings_csv(params: TransformerParams) -> str:
    """Readings of the primary (secondary open) on an invented bench LCR meter, Ls/Rs form.

    At these frequencies the capacitances do not matter: Z = R1 + jωLl1 + (jωLm ∥ Rc)
    with Lm = k·L1 and Ll1 = (1 − k)·L1 (the T-model of DESIGN.md).
    """
    lines = ["# Invented demo readings, not a measurement (scripts/make_sample_data.py):",
             "# primary of the ladder-line coupler on a bench LCR meter, secondary open.",
             "frequency_Hz,Ls_uH,Rs_ohm"]
    lm, ll = params.k * params.L1_H, (1 - params.k) * params.L1_H
    for f in LCR_READINGS_HZ:
        w = 2 * math.pi * f
        z = params.R1_ohm + 1j * w * ll + 1 / (1 / (1j * w * lm) + 1 / params.Rc_ohm)
        lines.append(f"{f:g},{z.imag / w * LCR_GAIN_ERROR * 1e6:.4f},{z.real:.4f}")
    return "\n".join(lines) + "\n"


def main(argv: list[str]) -> int:
    out = Path(argv[1]) if len(argv) > 1 else ROOT / "sample_data"
    rng = np.random.default_rng(SEED)
    truth = {}
    for folder, spec in SETS.items():
        params = true_params(spec["secondary_turns"], spec["C2_F"], spec["k"])
        make_set(out / folder, spec, params, rng)
        if "readings" in spec:
            (out / folder / spec["readings"]).write_text(lcr_readings_csv(params), encoding="utf-8")
        truth[folder] = params.to_dict()
    truth["unknown-core"] = make_core_set(out / "unknown-core", rng)
    (out / "truth.json").write_text(json.dumps(truth, indent=2) + "\n", encoding="utf-8")
    a_l = inductance_factor_H()
    print(f"A_L = {a_l * 1e9:.2f} nH/turn², C1 = {toroid_c1_per_m(OD_MM, ID_MM, HEIGHT_MM):.1f} 1/m")
    for folder, values in truth.items():
        print(folder, values)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
