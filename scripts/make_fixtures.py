"""Write the standard sweeps of the example jigs in fixtures/ (invented jigs, simulated with scikit-rf).

clip-leads: 10 cm of 50-ohm coax (velocity factor 0.66) to a pair of short
clip leads, modelled as 30 nH and 0.05 ohm in series, then 2 pF between the
clips. Standards: ideal open, ideal short and a 49.9-ohm resistor at the clips.

sma-board needs no standards: it is a port extension (its TOML only).

Run from the repository root:  python scripts/make_fixtures.py
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import skrf as rf
from skrf.media import DefinedGammaZ0

SPEED_OF_LIGHT_m_per_s = 299_792_458.0

CLIP_LEADS = {
    "coax_length_m": 0.10, "coax_velocity_factor": 0.66,
    "series_L_H": 30e-9, "series_R_ohm": 0.05, "shunt_C_F": 2e-12,
    "load_ohm": 49.9,
}
CLIP_LEADS_GRID = (10e3, 200e6, 401)  # start, stop, points (logarithmic)

SMA_BOARD = {"delay_s": 120e-12, "loss_dB": 0.05, "loss_frequency_Hz": 100e6}


def log_grid(start_Hz, stop_Hz, points) -> rf.Frequency:
    return rf.Frequency.from_f(np.geomspace(start_Hz, stop_Hz, points), unit="hz")


def clip_leads_jig(frequency: rf.Frequency) -> tuple[rf.Network, DefinedGammaZ0]:
    """The clip-lead jig as a two-port (port 1 at the VNA, port 2 at the clips), and its 50-ohm medium."""
    v = CLIP_LEADS
    beta = 2 * np.pi * frequency.f / (v["coax_velocity_factor"] * SPEED_OF_LIGHT_m_per_s)
    coax = DefinedGammaZ0(frequency, z0=50, gamma=1j * beta)
    jig = (coax.line(v["coax_length_m"], unit="m") ** coax.inductor(v["series_L_H"])
           ** coax.resistor(v["series_R_ohm"]) ** coax.shunt_capacitor(v["shunt_C_F"]))
    return jig, coax


def sma_board_jig(frequency: rf.Frequency) -> rf.Network:
    """The board as a matched 50-ohm line: one-way delay and sqrt(f) loss of SMA_BOARD."""
    v = SMA_BOARD
    f = frequency.f
    alpha_np = v["loss_dB"] / (20 / np.log(10)) * np.sqrt(f / v["loss_frequency_Hz"])
    gamma = alpha_np + 2j * np.pi * f * v["delay_s"]  # per metre, for a 1 m line
    return DefinedGammaZ0(frequency, z0=50, gamma=gamma).line(1.0, unit="m")


def clip_leads_standards(frequency: rf.Frequency) -> dict[str, rf.Network]:
    jig, medium = clip_leads_jig(frequency)
    load_gamma = (CLIP_LEADS["load_ohm"] - 50) / (CLIP_LEADS["load_ohm"] + 50)
    return {"open": jig ** medium.open(), "short": jig ** medium.short(),
            "load": jig ** medium.load(load_gamma)}


def write_standards(folder: Path, standards: dict[str, rf.Network]) -> list[Path]:
    folder.mkdir(parents=True, exist_ok=True)
    written = []
    for key, net in standards.items():
        net.name = key
        net.comments = "invented jig, simulated with scikit-rf by scripts/make_fixtures.py"
        net.write_touchstone(str(folder / key), form="ri", skrf_comment=False)
        written.append(folder / f"{key}.s1p")
    return written


def main(root: Path | None = None) -> list[Path]:
    root = Path(__file__).resolve().parent.parent if root is None else Path(root)
    return write_standards(root / "fixtures" / "clip-leads", clip_leads_standards(log_grid(*CLIP_LEADS_GRID)))


if __name__ == "__main__":
    for p in main():
        print(p)
