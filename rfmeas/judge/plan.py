"""Turns planner: whole-turn windings for a broadband transformer on a core of known A_L.

Trade rules (common practice):
- turns ratio n = N2/N1 = sqrt(R_load/R_source) (secondary : primary);
- each winding's reactance at the lowest frequency is at least
  `reactance_factor` times the impedance it works into (primary: the source,
  secondary: the load); with L = A_L·N² that gives each winding's minimum turns
  N_min = sqrt(factor·R/(2π·f_low·A_L)).

Whole-turn pairs with both windings at or above their minimum are ranked by
turns-ratio error first (errors below `ratio_tolerance_percent` count as equal,
so an irrational ratio does not drive the search to the turn limit) and then by
fewer total turns (less leakage inductance and winding capacitance).
"""

from __future__ import annotations

import logging
import math
from dataclasses import asdict, dataclass

import numpy as np

from rfmeas.errors import InputError
from rfmeas.measurement.sweep import DEFAULT_REACTANCE_FACTOR

log = logging.getLogger(__name__)

# Guards ceil() against float noise: sqrt(9.000000000000002) must plan 3 turns, not 4.
_TURNS_EPSILON = 1e-9


@dataclass(frozen=True)
class WindingPair:
    """One whole-turn winding choice and what it gives.

    ratio_error_percent     100·((N2/N1) − n)/n, signed
    low_frequency_limit_Hz  the lowest frequency at which both windings still
                            meet the reactance rule: the higher of
                            factor·R/(2π·L) over the two windings
    low_frequency_corner_Hz the magnetising −3 dB corner Rp/(2π·L1),
                            Rp = R_source ∥ (R_load·(N1/N2)²)
    """

    primary_turns: int
    secondary_turns: int
    turns_ratio: float
    ratio_error_percent: float
    primary_inductance_H: float
    secondary_inductance_H: float
    low_frequency_limit_Hz: float
    low_frequency_corner_Hz: float

    def to_dict(self) -> dict:
        return asdict(self)


@dataclass(frozen=True)
class HighFrequencyBudget:
    """The most leakage and shunt capacitance the suggested pair may have at the top of the band.

    Both are referred to the primary, use the suggested pair's reflected load
    R_L' = R_load·(N1/N2)², and each assumes the other element is absent
    (first-order corners):
    - series leakage Ll between R_source and R_L': corner (R_s + R_L')/(2π·Ll),
      so Ll_max = (R_s + R_L')/(2π·f_high);
    - total shunt capacitance C across the line, driven from R_s ∥ R_L':
      corner 1/(2π·(R_s ∥ R_L')·C), so C_max = 1/(2π·f_high·(R_s ∥ R_L')).
    With both present the response is second order and the corner lower.
    """

    highest_frequency_Hz: float
    reflected_load_ohm: float
    max_leakage_inductance_H: float
    max_shunt_capacitance_F: float

    def to_dict(self) -> dict:
        return asdict(self)


@dataclass(frozen=True)
class TurnsPlan:
    """The planner's answer: ideal ratio, minimum turns, ranked whole-turn pairs, HF budget."""

    source_impedance_ohm: float
    load_impedance_ohm: float
    lowest_frequency_Hz: float
    highest_frequency_Hz: float | None
    al_nH_per_turn2: float
    reactance_factor: float
    max_turns: int
    ratio_tolerance_percent: float
    turns_ratio: float
    minimum_primary_inductance_H: float
    minimum_secondary_inductance_H: float
    minimum_turns_primary_exact: float
    minimum_turns_secondary_exact: float
    minimum_turns_primary: int
    minimum_turns_secondary: int
    suggested: WindingPair
    alternatives: tuple[WindingPair, ...]
    budget: HighFrequencyBudget | None

    def to_dict(self) -> dict:
        return {
            "inputs": {
                "source_impedance_ohm": self.source_impedance_ohm,
                "load_impedance_ohm": self.load_impedance_ohm,
                "lowest_frequency_Hz": self.lowest_frequency_Hz,
                "highest_frequency_Hz": self.highest_frequency_Hz,
                "inductance_factor_nH_per_turn2": self.al_nH_per_turn2,
                "reactance_factor": self.reactance_factor,
                "max_turns": self.max_turns,
                "ratio_tolerance_percent": self.ratio_tolerance_percent,
            },
            "turns_ratio": self.turns_ratio,
            "minimum_primary_inductance_H": self.minimum_primary_inductance_H,
            "minimum_secondary_inductance_H": self.minimum_secondary_inductance_H,
            "minimum_turns_primary_exact": self.minimum_turns_primary_exact,
            "minimum_turns_secondary_exact": self.minimum_turns_secondary_exact,
            "minimum_turns_primary": self.minimum_turns_primary,
            "minimum_turns_secondary": self.minimum_turns_secondary,
            "suggested": self.suggested.to_dict(),
            "alternatives": [pair.to_dict() for pair in self.alternatives],
            "high_frequency_budget": None if self.budget is None else self.budget.to_dict(),
        }


def _positive(name: str, value) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) \
            or not math.isfinite(value) or value <= 0:
        raise InputError(f"{name} must be a positive number, got {value!r}")
    return float(value)


def _whole(name: str, value, minimum: int) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < minimum:
        raise InputError(f"{name} must be a whole number of at least {minimum}, got {value!r}")
    return value


def _parallel(a_ohm: float, b_ohm: float) -> float:
    return a_ohm * b_ohm / (a_ohm + b_ohm)


def plan_turns(source_impedance_ohm: float, load_impedance_ohm: float, lowest_frequency_Hz: float,
               al_nH_per_turn2: float, reactance_factor: float = DEFAULT_REACTANCE_FACTOR,
               highest_frequency_Hz: float | None = None, max_turns: int = 60,
               alternatives: int = 5, ratio_tolerance_percent: float = 1.0) -> TurnsPlan:
    """Plan whole-turn windings; see the module docstring for the rules."""
    rs = _positive("source impedance", source_impedance_ohm)
    rl = _positive("load impedance", load_impedance_ohm)
    f_low = _positive("lowest frequency", lowest_frequency_Hz)
    al_nH = _positive("A_L", al_nH_per_turn2)
    al_H = al_nH * 1e-9
    factor = _positive("reactance factor", reactance_factor)
    max_turns = _whole("max turns", max_turns, 1)
    alternatives = _whole("number of alternatives", alternatives, 0)
    if isinstance(ratio_tolerance_percent, bool) or not isinstance(ratio_tolerance_percent, (int, float)) \
            or not ratio_tolerance_percent >= 0:
        raise InputError(f"ratio tolerance must be zero or positive, got {ratio_tolerance_percent!r}")
    f_high = None
    if highest_frequency_Hz is not None:
        f_high = _positive("highest frequency", highest_frequency_Hz)
        if f_high <= f_low:
            raise InputError(f"highest frequency ({f_high:g} Hz) must be above the lowest ({f_low:g} Hz)")

    ratio = math.sqrt(rl / rs)
    omega_low = 2 * math.pi * f_low
    l1_min_H = factor * rs / omega_low
    l2_min_H = factor * rl / omega_low
    n1_exact = math.sqrt(l1_min_H / al_H)
    n2_exact = math.sqrt(l2_min_H / al_H)
    n1_min = max(1, math.ceil(n1_exact - _TURNS_EPSILON))
    n2_min = max(1, math.ceil(n2_exact - _TURNS_EPSILON))
    if max(n1_min, n2_min) > max_turns:
        raise InputError(
            f"the windings need at least {n1_min} and {n2_min} turns, more than the limit of {max_turns}: "
            "use a core with a higher A_L or raise the turn limit")

    n1, n2 = np.meshgrid(np.arange(n1_min, max_turns + 1), np.arange(n2_min, max_turns + 1), indexing="ij")
    n1, n2 = n1.ravel(), n2.ravel()
    error_percent = 100.0 * (n2 / n1 - ratio) / ratio
    # Rounded so that float noise cannot break a tie between equal errors (14:55 vs 14:57 on 1:4).
    ranked_error = np.round(np.maximum(np.abs(error_percent), ratio_tolerance_percent), 9)
    order = np.lexsort((np.abs(error_percent), n1 + n2, ranked_error))[: alternatives + 1]

    def pair(i: int) -> WindingPair:
        t1, t2 = int(n1[i]), int(n2[i])
        l1_H, l2_H = al_H * t1**2, al_H * t2**2
        reflected_ohm = rl * (t1 / t2) ** 2
        return WindingPair(
            primary_turns=t1,
            secondary_turns=t2,
            turns_ratio=t2 / t1,
            ratio_error_percent=float(error_percent[i]),
            primary_inductance_H=l1_H,
            secondary_inductance_H=l2_H,
            low_frequency_limit_Hz=max(factor * rs / (2 * math.pi * l1_H), factor * rl / (2 * math.pi * l2_H)),
            low_frequency_corner_Hz=_parallel(rs, reflected_ohm) / (2 * math.pi * l1_H),
        )

    pairs = [pair(int(i)) for i in order]
    suggested = pairs[0]
    budget = None
    if f_high is not None:
        reflected_ohm = rl * (suggested.primary_turns / suggested.secondary_turns) ** 2
        budget = HighFrequencyBudget(
            highest_frequency_Hz=f_high,
            reflected_load_ohm=reflected_ohm,
            max_leakage_inductance_H=(rs + reflected_ohm) / (2 * math.pi * f_high),
            max_shunt_capacitance_F=1.0 / (2 * math.pi * f_high * _parallel(rs, reflected_ohm)),
        )
    log.debug("planned %d:%d (minimum %d:%d)", suggested.primary_turns, suggested.secondary_turns,
              n1_min, n2_min)
    return TurnsPlan(
        source_impedance_ohm=rs, load_impedance_ohm=rl, lowest_frequency_Hz=f_low,
        highest_frequency_Hz=f_high, al_nH_per_turn2=al_nH, reactance_factor=factor,
        max_turns=max_turns, ratio_tolerance_percent=float(ratio_tolerance_percent),
        turns_ratio=ratio, minimum_primary_inductance_H=l1_min_H, minimum_secondary_inductance_H=l2_min_H,
        minimum_turns_primary_exact=n1_exact, minimum_turns_secondary_exact=n2_exact,
        minimum_turns_primary=n1_min, minimum_turns_secondary=n2_min,
        suggested=suggested, alternatives=tuple(pairs[1:]), budget=budget,
    )
