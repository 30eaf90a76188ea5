"""Inductance factor and (complex) permeability of a wound core.

Convention: relative complex permeability µr = µ' − jµ'' (IEV 221-03-06), so
a lossy core has µ'' > 0. All functions are pure and take scalars or numpy
arrays (vectorised over frequency where a frequency appears).
"""

from __future__ import annotations

import numpy as np

from rfmeas.errors import InputError
from rfmeas.magnetics.geometry import CoreGeometry

MU0_H_per_m = 1.25663706212e-6
"""Vacuum permeability, CODATA 2018."""

AL_UNITS = ("nH", "uH/100", "mH/1000")
# How many nH/turn² one unit of each A_L spelling is: L at N turns divided by N².
#   1 µH per 100 turns  = 1e-6 H / 1e4 = 1e-10 H = 0.1 nH/turn²
#   1 mH per 1000 turns = 1e-3 H / 1e6 = 1e-9 H  = 1 nH/turn²
_NH_PER_UNIT = {"nH": 1.0, "uH/100": 0.1, "mH/1000": 1.0}
_UNIT_ALIASES = {"µH/100": "uH/100", "μH/100": "uH/100", "nH/turn2": "nH", "nH/N2": "nH"}


def _positive_array(name: str, value) -> np.ndarray:
    array = np.asarray(value, dtype=float)
    if not np.all(np.isfinite(array)) or np.any(array <= 0):
        raise InputError(f"{name} must be positive and finite")
    return array


def _scalar_or_array(array: np.ndarray):
    return array.item() if np.ndim(array) == 0 else array


def _al_unit(unit: str) -> str:
    key = _UNIT_ALIASES.get(unit, unit)
    if key not in _NH_PER_UNIT:
        raise InputError(f"A_L unit {unit!r} is not known (use one of {', '.join(AL_UNITS)})")
    return key


def al_to_nH_per_turn2(value, unit: str):
    """Convert an A_L given in `unit` ('nH', 'uH/100', 'mH/1000') to nH/turn²."""
    return _scalar_or_array(np.asarray(value, dtype=float) * _NH_PER_UNIT[_al_unit(unit)])


def nH_per_turn2_to(value, unit: str):
    """Convert an A_L in nH/turn² to `unit` ('nH', 'uH/100', 'mH/1000')."""
    return _scalar_or_array(np.asarray(value, dtype=float) / _NH_PER_UNIT[_al_unit(unit)])


def inductance_factor_H_per_turn2(inductance_H, turns):
    """A_L = L/N², in henries per turn²."""
    n = _positive_array("turns", turns)
    return _scalar_or_array(np.asarray(inductance_H, dtype=float) / n**2)


def effective_permeability(inductance_H, turns, geometry: CoreGeometry):
    """µe = L·le/(µ0·N²·Ae) = L·C1/(µ0·N²): the relative permeability the winding sees."""
    n = _positive_array("turns", turns)
    return _scalar_or_array(
        np.asarray(inductance_H, dtype=float) * geometry.core_constant_per_m / (MU0_H_per_m * n**2))


def air_core_inductance_H(turns, geometry: CoreGeometry):
    """L0 = µ0·N²·Ae/le = µ0·N²/C1: the winding's inductance per unit relative permeability."""
    return MU0_H_per_m * turns**2 / geometry.core_constant_per_m


def inductance_from_permeability(mu, turns, geometry: CoreGeometry):
    """L = µ0·µ·N²/C1; `mu` may be complex (then L is the complex inductance)."""
    n = _positive_array("turns", turns)
    return _scalar_or_array(air_core_inductance_H(n, geometry) * np.asarray(mu))


def complex_permeability(impedance_ohm, f_Hz, turns, geometry: CoreGeometry,
                         series_resistance_ohm=0.0) -> np.ndarray:
    """Single-winding method: µr = (Z − Rw)/(jω·µ0·N²·Ae/le), returned as µ' − jµ''.

    `impedance_ohm` is the winding's measured impedance at `f_Hz` (arrays of the
    same shape); `series_resistance_ohm` the winding's own (copper) resistance.
    The winding's self-capacitance is not removed: keep f well below its
    self-resonance.
    """
    f = _positive_array("frequency", f_Hz)
    n = _positive_array("turns", turns)
    z = np.asarray(impedance_ohm, dtype=complex) - np.asarray(series_resistance_ohm, dtype=float)
    return z / (1j * 2 * np.pi * f * air_core_inductance_H(n, geometry))


def gapped_effective_permeability(mu_i, gap_m, effective_length_m):
    """µe = µi/(1 + µi·g/le) for an air gap g in a path of effective length le."""
    mu_i = _positive_array("initial permeability", mu_i)
    gap = np.asarray(gap_m, dtype=float)
    if not np.all(np.isfinite(gap)) or np.any(gap < 0):
        raise InputError("gap must be zero or positive")
    le = _positive_array("effective length", effective_length_m)
    return _scalar_or_array(mu_i / (1 + mu_i * gap / le))


def debye_permeability(f_Hz, mu_initial, relaxation_frequency_Hz) -> np.ndarray:
    """Single relaxation µ(f) = 1 + (µi − 1)/(1 + j·f/fr), in the µ' − jµ'' convention.

    µ'' peaks at f = fr, where µ' = (µi + 1)/2 and µ'' = (µi − 1)/2. A winding
    inductance L in parallel with a loss resistance R is exactly this form with
    2π·fr = R/L.
    """
    f = np.asarray(f_Hz, dtype=float)
    if not np.all(np.isfinite(f)) or np.any(f < 0):
        raise InputError("frequency must be zero or positive")
    from rfmeas.magnetics.dispersion import relaxation_susceptibility

    mu_i = _positive_array("initial permeability", mu_initial)
    fr = _positive_array("relaxation frequency", relaxation_frequency_Hz)
    return 1 + relaxation_susceptibility(f, mu_i - 1, fr)
