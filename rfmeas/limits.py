"""Plausible ranges of the numbers a user gives (design targets, turns, A_L), checked at the edges.

A value far outside these ranges is a typing slip (1e300 ohms, 1e-300 Hz); let
through, it would only overflow deep inside the numerics. The ranges are wide:
every real design sits well inside them.
"""

from __future__ import annotations

import math

from rfmeas.errors import InputError

FREQUENCY_RANGE_HZ = (1e-3, 1e12)
"""1 mHz to 1 THz: far beyond any LCR meter or VNA, and safely inside the numerics' range."""

RANGES = {
    "source_impedance_ohm": (1e-3, 1e7, "Ω"),
    "load_impedance_ohm": (1e-3, 1e7, "Ω"),
    "lowest_frequency_Hz": (*FREQUENCY_RANGE_HZ, "Hz"),
    "highest_frequency_Hz": (*FREQUENCY_RANGE_HZ, "Hz"),
    "reactance_factor": (0.1, 1e3, ""),
    "ratio_tolerance_percent": (1e-3, 100.0, "%"),
    "return_loss_dB": (0.1, 100.0, "dB"),
    "turns": (1, 100_000, ""),
    "max_turns": (1, 1000, ""),            # the planner's search grows with its square
    "al_nH_per_turn2": (1e-3, 1e7, "nH/turn²"),
}


def check_range(key: str, value: float, label: str, path=None) -> float:
    """`value` if it lies in RANGES[key]; else an InputError naming `label` (the key as the user wrote it)."""
    low, high, unit = RANGES[key]
    unit = f" {unit}" if unit else ""
    if not (isinstance(value, (int, float)) and math.isfinite(value) and low <= value <= high):
        raise InputError(f"{label} = {value!r} is outside the plausible range {low:g}{unit} to {high:g}{unit}",
                         path)
    return value
