"""One vocabulary: each key of the JSON contract has one label and one unit for people.

The terminal, the report, compare, batch and history all name a quantity from this
table, so "low-frequency corner −1 dB" reads the same everywhere. A label carries its
unit in brackets when the value is shown as a bare number (A_L in nH/turn², a loss in dB).
"""

from __future__ import annotations

# the circuit parameters (JSON "parameters"): key -> (label, SI unit)
PARAMETER_LABELS: dict[str, tuple[str, str]] = {
    "primary_inductance_H": ("primary inductance L1", "H"),
    "secondary_inductance_H": ("secondary inductance L2", "H"),
    "coupling_coefficient": ("coupling k", ""),
    "leakage_inductance_H": ("leakage inductance (short-circuit, at primary)", "H"),
    "effective_turns_ratio": ("effective turns ratio √(L2/L1)", ""),
    "magnetizing_inductance_H": ("magnetising inductance Lm = k·L1", "H"),
    "mutual_inductance_H": ("mutual inductance M", "H"),
    "primary_resistance_ohm": ("primary resistance R1", "Ω"),
    "secondary_resistance_ohm": ("secondary resistance R2", "Ω"),
    "core_loss_resistance_ohm": ("core-loss resistance Rc", "Ω"),
    "primary_capacitance_F": ("primary capacitance C1", "F"),
    "secondary_capacitance_F": ("secondary capacitance C2", "F"),
    "interwinding_capacitance_F": ("interwinding capacitance C12", "F"),
}

# the figures of merit (JSON "figures"), in the order people read them: key -> (label, unit)
FIGURE_LABELS: dict[str, tuple[str, str]] = {
    "inductance_factor_nH_per_turn2": ("A_L (nH/turn²)", "nH/turn²"),
    "effective_permeability": ("effective permeability µe", ""),
    "low_frequency_limit_Hz": ("low-frequency limit", "Hz"),
    "low_frequency_corner_3dB_Hz": ("low-frequency corner −3 dB", "Hz"),
    "low_frequency_corner_1dB_Hz": ("low-frequency corner −1 dB", "Hz"),
    "high_frequency_corner_1dB_Hz": ("high-frequency corner −1 dB", "Hz"),
    "high_frequency_corner_3dB_Hz": ("high-frequency corner −3 dB", "Hz"),
    "midband_insertion_loss_dB": ("mid-band insertion loss (dB)", "dB"),
    "self_resonance_primary_Hz": ("self-resonance, primary (secondary open)", "Hz"),
    "self_resonance_secondary_Hz": ("self-resonance, secondary (primary open)", "Hz"),
    "turns_ratio": ("turns ratio √(L2/L1)", ""),
}

# keys inside a figure's entry (its details) that people see as rows of their own
FIGURE_DETAIL_LABELS: dict[str, tuple[str, str]] = {
    "uH_per_100_turns": ("in µH per 100 turns", "uH/100"),
    "mH_per_1000_turns": ("in mH per 1000 turns", "mH/1000"),
    "open_circuit_voltage_ratio": ("open-circuit voltage ratio", ""),
    "readings_primary": ("from LCR readings of the primary", "nH/turn²"),
    "readings_secondary": ("from LCR readings of the secondary", "nH/turn²"),
}

# other JSON keys people see named
OTHER_LABELS: dict[str, tuple[str, str]] = {
    "return_loss_band": ("return-loss band", "Hz"),
}

# quantities computed from the contract by compare (not keys of the contract)
DERIVED_LABELS: dict[str, tuple[str, str]] = {
    "ratio_error_percent": ("turns-ratio error (%)", "%"),
}

QUANTITIES: dict[str, tuple[str, str]] = {**PARAMETER_LABELS, **FIGURE_LABELS, **FIGURE_DETAIL_LABELS,
                                          **OTHER_LABELS, **DERIVED_LABELS}


# the circuit's own parameter names (TransformerParams fields) -> the symbol people read
PARAMETER_SYMBOLS: dict[str, str] = {
    "L1_H": "L1", "L2_H": "L2", "k": "k", "R1_ohm": "R1", "R2_ohm": "R2", "Rc_ohm": "Rc",
    "C1_F": "C1", "C2_F": "C2", "C12_F": "C12",
}


def symbols(names) -> str:
    """'L2, k' for the parameter names ('L2_H', 'k'): what a message shows of them."""
    return ", ".join(PARAMETER_SYMBOLS.get(n, n) for n in names)


def label(key: str) -> str:
    """The one label of a JSON key; a dotted 'section.key' is looked up by its last part.

    An unknown key reads as words ('some_key_Hz' -> 'some key'), never as the raw key.
    """
    last = key.rsplit(".", 1)[-1]
    if last in QUANTITIES:
        return QUANTITIES[last][0]
    words = last
    for suffix, _unit in _SUFFIX_UNITS:
        if words.endswith(suffix):
            words = words[: -len(suffix)]
            break
    return words.replace("_", " ")


def bare_label(key: str) -> str:
    """The label without the unit it carries in brackets ('A_L (nH/turn²)' -> 'A_L'), for a
    place that shows the unit beside the value."""
    text, shown = label(key), unit(key)
    suffix = f" ({shown})"
    return text[: -len(suffix)] if shown and text.endswith(suffix) else text


# a key's unit by its name's suffix (docs/DESIGN.md: units in names), for keys outside the table
_SUFFIX_UNITS = (("_nH_per_turn2", "nH/turn²"), ("_Hz", "Hz"), ("_ohm", "Ω"), ("_dB", "dB"), ("_percent", "%"),
                 ("_H", "H"), ("_F", "F"))


def unit(key: str) -> str:
    """The unit a value of this key is shown in: the table's, else the one its suffix names
    ('' when dimensionless or unknown)."""
    last = key.rsplit(".", 1)[-1]
    if last in QUANTITIES:
        return QUANTITIES[last][1]
    return next((u for suffix, u in _SUFFIX_UNITS if last.endswith(suffix)), "")
