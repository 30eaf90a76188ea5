"""The design check: does the measured transformer meet its target? Verdicts in plain words.

Checks (each only when the design gives what it needs):
- turns_ratio_vs_design        effective ratio sqrt(L2/L1) within ±tolerance of sqrt(load/source)
- turns_ratio_vs_stated_turns  effective ratio within ±tolerance of N2/N1 as stated
- low_frequency_limit          reactance-rule limit at or below lowest_frequency_Hz
- high_frequency_corner        upper −3 dB corner at or above highest_frequency_Hz
- return_loss                  return loss at the primary at or above the threshold over
                               lowest..highest

The advice follows the usual levers of a hand-wound transformer (common
practice): inductance grows as N², so more turns on both windings lower the
low-frequency limit; fewer turns, tighter winding (less leakage) or spread
turns (less capacitance) raise the upper corner.

Pass or fail is decided in one place, `DesignCheck.passed`: True when every
verdict passes, False when one fails, None ("not judged") when the check
cannot be judged — a poor fit, data that look like no two-winding
transformer, an incomplete sweep. A check that is not judged gives every
verdict "not judged" with the reason and no advice; `design_status` reads the
outcome back from the JSON (pass, fail, not judged, no design).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

from rfmeas.measurement.sweep import DesignTarget
from rfmeas.units import format_engineering as eng

NOTHING_TO_CHANGE = "nothing to change"
NOT_JUDGED = "not judged"


@dataclass(frozen=True)
class Verdict:
    """One check: pass or fail (None: not judged), the value against its limit, how far off,
    what to change, and why it was not judged."""

    name: str
    label: str
    passed: bool | None
    value: float
    limit: float
    unit: str
    margin: str
    advice: str
    reason: str = ""

    @property
    def state(self) -> str:
        return status_word(self.passed)

    def to_dict(self) -> dict:
        return dict(self.__dict__, state=self.state)


def status_word(passed: bool | None) -> str:
    """'pass', 'fail' or 'not judged' (None) for an outcome."""
    return NOT_JUDGED if passed is None else ("pass" if passed else "fail")


def overall(passes, reasons=()) -> bool | None:
    """The one rule for a whole check: None when it cannot be judged, else whether every verdict passes."""
    if reasons:
        return None
    return all(p for p in passes)


def not_judged(verdict: Verdict, reason: str) -> Verdict:
    """The verdict withheld: no pass or fail, no margin, no advice, the reason instead."""
    return replace(verdict, passed=None, margin=NOT_JUDGED, advice="", reason=reason)


@dataclass(frozen=True)
class DesignCheck:
    verdicts: tuple[Verdict, ...]
    target: DesignTarget
    not_judged: tuple[str, ...] = ()   # why the check cannot be judged (empty: it is)

    @property
    def passed(self) -> bool | None:
        """The one place pass or fail is decided: None when the check cannot be judged."""
        return overall((v.passed for v in self.verdicts), self.not_judged)

    @property
    def status(self) -> str:
        return status_word(self.passed)

    @property
    def failed(self) -> tuple[Verdict, ...]:
        """The verdicts that failed."""
        return tuple(v for v in self.verdicts if v.passed is False)

    def to_dict(self) -> dict:
        return {"passed": self.passed, "status": self.status, "not_judged_reasons": list(self.not_judged),
                "checks": [v.to_dict() for v in self.verdicts], "target": self.target.to_dict()}


def design_status(check: DesignCheck | dict | None) -> str:
    """'pass', 'fail', 'not judged' or 'no design' of a check: a DesignCheck, or a stored JSON
    design_check (current or older form) read back without deciding anew.

    Current JSON carries ``status`` (written by DesignCheck.status); older results carry
    ``passed`` as a bool or null, or only per-check dicts with a bool ``passed``, which
    `overall` combines as DesignCheck.passed would.
    """
    if isinstance(check, DesignCheck):
        return check.status
    if not isinstance(check, dict) or not check:
        return "no design"
    if check.get("status") in ("pass", "fail", NOT_JUDGED):
        return check["status"]
    if isinstance(check.get("passed"), bool):
        return status_word(check["passed"])
    if "passed" in check and check["passed"] is None and check.get("checks") is not None:
        return NOT_JUDGED
    verdicts = [v.get("passed") for v in check.values() if isinstance(v, dict) and isinstance(v.get("passed"), bool)]
    if not verdicts:
        return "no design"
    return status_word(overall(verdicts))


def design_fails(status: str) -> bool:
    """Whether a design status makes `rfmeas analyze` exit 1: failed, or could not be judged."""
    return status in ("fail", NOT_JUDGED)


@dataclass(frozen=True)
class DesignFacts:
    """The measured numbers the check needs (from rfmeas.judge.figures); None where not known.

    high_corner_3dB_Hz is None when the corner lies beyond the evaluated range, whose
    top is evaluated_top_Hz; high_limited_by names the element ('leakage' or
    'capacitance') that alone gives the lower upper corner.
    """

    effective_ratio: float | None
    primary_turns: int | None
    secondary_turns: int | None
    low_frequency_limit_Hz: float | None
    high_corner_3dB_Hz: float | None
    evaluated_top_Hz: float | None
    high_limited_by: str
    midband_Hz: float | None
    midband_return_loss_dB: float | None
    min_return_loss_dB: float | None
    min_return_loss_at_Hz: float | None

    def to_dict(self) -> dict:
        return dict(self.__dict__)


def is_design(design: DesignTarget | None) -> bool:
    """A target with something to check (a threshold alone is not a design)."""
    return design is not None and any(
        v is not None for v in (design.source_impedance_ohm, design.load_impedance_ohm,
                                design.lowest_frequency_Hz, design.highest_frequency_Hz))


def _percent_off(value: float, limit: float) -> float:
    return 100.0 * (value / limit - 1.0)


def _percent(value: float) -> str:
    """Two significant figures without exponents: 6.7 %, 20 %, 100 %, 0.0012 %."""
    v = abs(value)
    if v < 0.001:
        return "less than 0.001 %"
    return f"{v:.0f} %" if v >= 99.5 else f"{float(f'{v:.2g}'):g} %"


def _side(percent: float) -> str:
    return "above" if percent >= 0 else "below"


def _ratio_pairs(primary_turns: int, ratio: float, tolerance_percent: float) -> tuple[int, int, bool]:
    """Whole-turn secondary for `primary_turns` nearest `ratio`, and whether it meets the tolerance."""
    secondary = max(1, round(primary_turns * ratio))
    ok = abs(_percent_off(secondary / primary_turns, ratio)) <= tolerance_percent
    return primary_turns, secondary, ok


def _smallest_pair(ratio: float, tolerance_percent: float, at_least: int, max_turns: int = 100):
    for n1 in range(max(1, at_least), max_turns + 1):
        _, n2, ok = _ratio_pairs(n1, ratio, tolerance_percent)
        if ok:
            return n1, n2
    return None


def _ratio_margin(value: float, limit: float, tol: float, against: str) -> tuple[bool, float, str]:
    """(within tolerance, percent off, margin in words) of a measured ratio against `limit`."""
    off = _percent_off(value, limit)
    return abs(off) <= tol, off, f"{_percent(off)} {_side(off)} {against} (tolerance ±{tol:g} %)"


def _ratio_vs_design(facts: DesignFacts, design: DesignTarget) -> Verdict:
    target = design.target_turns_ratio
    value = facts.effective_ratio
    tol = design.ratio_tolerance_percent
    passed, off, margin = _ratio_margin(value, target, tol, f"the target 1:{target:.4g}")
    if passed:
        advice = NOTHING_TO_CHANGE
    elif facts.primary_turns:
        n1, n2, ok = _ratio_pairs(facts.primary_turns, target, tol)
        now = f" (it acts like {facts.primary_turns}:{round(facts.primary_turns * value)})"
        advice = f"wind {n2} turns on the secondary with {n1} on the primary{now}"
        if not ok:
            pair = _smallest_pair(target, tol, facts.primary_turns)
            if pair:
                advice += f"; {n1}:{n2} is still off by more than {tol:g} %, {pair[0]}:{pair[1]} meets it"
    else:
        direction = "raise" if off < 0 else "lower"
        more, fewer = ("secondary", "primary") if off < 0 else ("primary", "secondary")
        advice = (f"{direction} the ratio by {_percent(off)}: add turns to the {more} "
                  f"or take turns off the {fewer}")
    return Verdict("turns_ratio_vs_design", "turns ratio against √(load/source)", passed,
                   value, target, "", margin, advice)


def _ratio_vs_stated(facts: DesignFacts, design: DesignTarget) -> Verdict:
    n1, n2 = facts.primary_turns, facts.secondary_turns
    stated = n2 / n1
    passed, _off, margin = _ratio_margin(facts.effective_ratio, stated, design.ratio_tolerance_percent,
                                         f"the stated {n1}:{n2}")
    value = facts.effective_ratio
    if passed:
        advice = NOTHING_TO_CHANGE
    else:
        advice = (f"the windings act like {n1}:{max(1, round(n1 * value))} "
                  f"(or {max(1, round(n2 / value))}:{n2}), not the stated {n1}:{n2}: recount the turns "
                  "and correct the manifest, or check that both windings sit fully on the core")
    return Verdict("turns_ratio_vs_stated_turns", "turns ratio against the stated turns", passed,
                   value, stated, "", margin, advice)


def _fewest_primary_turns(facts: DesignFacts, scale: float) -> int:
    """Fewest whole primary turns that keep the reactance rule when the turns are scaled by `scale`.

    The limit goes as 1/N², so N' ≥ N·sqrt(limit/lowest) = N·scale.
    """
    return max(1, math.ceil(facts.primary_turns * scale - 1e-9))


def _scaled_pair(facts: DesignFacts, scale: float, ratio: float | None) -> str:
    if not facts.primary_turns:
        return ""
    n1 = _fewest_primary_turns(facts, scale)
    r = ratio or (facts.secondary_turns / facts.primary_turns if facts.secondary_turns else None)
    if r is None:
        return f" (primary {facts.primary_turns} → {n1})"
    now = f"{facts.primary_turns}:{facts.secondary_turns}" if facts.secondary_turns else f"{facts.primary_turns}:?"
    return f" ({now} → {n1}:{max(1, round(n1 * r))})"


def _low_limit(facts: DesignFacts, design: DesignTarget) -> Verdict:
    value, limit = facts.low_frequency_limit_Hz, design.lowest_frequency_Hz
    off = _percent_off(value, limit)
    passed = value <= limit
    margin = f"{_percent(off)} {_side(off)} the limit"
    if passed:
        advice = NOTHING_TO_CHANGE
    else:
        scale = math.sqrt(value / limit)
        advice = (f"more turns on both windings, about {scale:.3g}× as many"
                  f"{_scaled_pair(facts, scale, design.target_turns_ratio)}, "
                  "or a core with a higher A_L")
    return Verdict("low_frequency_limit",
                   f"reactance ≥ {design.reactance_factor:g} × impedance down to the lowest frequency",
                   passed, value, limit, "Hz", margin, advice)


def _high_frequency_advice(facts: DesignFacts, design: DesignTarget) -> str:
    if facts.high_limited_by == "leakage":
        advice = ("wind tighter for less leakage: twist the windings together or interleave them, "
                  "spread evenly over the whole core")
    else:
        advice = "spread turns for less capacitance: space the turns and keep the windings apart"
    if facts.low_frequency_limit_Hz and design.lowest_frequency_Hz \
            and facts.low_frequency_limit_Hz < design.lowest_frequency_Hz:
        scale = math.sqrt(facts.low_frequency_limit_Hz / design.lowest_frequency_Hz)
        if facts.primary_turns is None or _fewest_primary_turns(facts, scale) < facts.primary_turns:
            advice += (f"; or fewer turns (less leakage and capacitance): the low-frequency limit allows "
                       f"about {scale:.3g}× as many{_scaled_pair(facts, scale, design.target_turns_ratio)}")
    return advice


def _high_corner(facts: DesignFacts, design: DesignTarget) -> Verdict:
    limit = design.highest_frequency_Hz
    if facts.high_corner_3dB_Hz is None:
        value = facts.evaluated_top_Hz
        return Verdict("high_frequency_corner", "high-frequency corner −3 dB at or above the highest frequency",
                       True, value, limit, "Hz",
                       f"above {eng(value, 'Hz')}, beyond the evaluated range", NOTHING_TO_CHANGE)
    value = facts.high_corner_3dB_Hz
    off = _percent_off(value, limit)
    passed = value >= limit
    advice = NOTHING_TO_CHANGE if passed else _high_frequency_advice(facts, design)
    return Verdict("high_frequency_corner", "high-frequency corner −3 dB at or above the highest frequency",
                   passed, value, limit, "Hz", f"{_percent(off)} {_side(off)} the limit", advice)


def _return_loss(facts: DesignFacts, design: DesignTarget) -> Verdict:
    value, limit = facts.min_return_loss_dB, design.return_loss_dB
    diff = value - limit
    passed = diff >= 0
    margin = (f"{abs(diff):.2g} dB {_side(diff)} the threshold "
              f"(worst {value:.3g} dB at {eng(facts.min_return_loss_at_Hz, 'Hz')})")
    if passed:
        advice = NOTHING_TO_CHANGE
    elif facts.midband_return_loss_dB is not None and facts.midband_return_loss_dB < limit:
        advice = ("the match is off even at mid-band: bring the turns ratio to √(load/source)")
    elif facts.midband_Hz is not None and facts.min_return_loss_at_Hz < facts.midband_Hz:
        advice = ("the magnetising inductance shunts the low end: more turns on both windings, "
                  "or a core with a higher A_L")
    else:
        advice = _high_frequency_advice(facts, design)
    return Verdict("return_loss",
                   f"return loss ≥ {limit:g} dB from {eng(design.lowest_frequency_Hz, 'Hz')} "
                   f"to {eng(design.highest_frequency_Hz, 'Hz')}",
                   passed, value, limit, "dB", margin, advice)


def check_design(facts: DesignFacts, design: DesignTarget, cannot_judge: tuple[str, ...] = ()) -> DesignCheck:
    """Every check the design and the measured facts allow, in a fixed order.

    With reasons in `cannot_judge`, every verdict is withheld ("not judged") with them.
    """
    verdicts = []
    if design.target_turns_ratio and facts.effective_ratio:
        verdicts.append(_ratio_vs_design(facts, design))
    if facts.primary_turns and facts.secondary_turns and facts.effective_ratio:
        verdicts.append(_ratio_vs_stated(facts, design))
    if design.lowest_frequency_Hz and facts.low_frequency_limit_Hz:
        verdicts.append(_low_limit(facts, design))
    if design.highest_frequency_Hz and (facts.high_corner_3dB_Hz or facts.evaluated_top_Hz):
        verdicts.append(_high_corner(facts, design))
    if design.lowest_frequency_Hz and design.highest_frequency_Hz and facts.min_return_loss_dB is not None:
        verdicts.append(_return_loss(facts, design))
    reasons = tuple(cannot_judge)
    if reasons:
        verdicts = [not_judged(v, "; ".join(reasons)) for v in verdicts]
    return DesignCheck(tuple(verdicts), design, reasons)


# ---- a design band in the wrong unit -------------------------------------------------------------

UNIT_SLIP_FACTOR = 1000.0
"""A band edge more than this factor outside the swept range is taken as a unit slip (common practice:
a sweep chosen for a design covers its band, or comes within a decade or two of it)."""


def _likely_unit(value_Hz: float, swept_low_Hz: float, swept_high_Hz: float) -> str | None:
    """The engineering text ('1.8M (1.8 MHz)') of `value_Hz` read with each SI prefix that lands it
    within a decade of the swept range, nearest the range's middle first ('16.5k (16.5 kHz) or
    16.5M (16.5 MHz)' when both could be meant); None when no prefix brings it near the sweep."""
    centre = math.sqrt(swept_low_Hz * swept_high_Hz)
    readings = [value_Hz * factor for factor in (1e-9, 1e-6, 1e-3, 1e3, 1e6, 1e9)]
    near = sorted((r for r in readings if swept_low_Hz / 10 <= r <= swept_high_Hz * 10),
                  key=lambda r: abs(math.log10(r / centre)))
    if not near:
        return None

    def text(scaled: float) -> str:
        full = eng(scaled, "Hz")
        number, unit = full.split(" ")
        return f"{number}{unit[:-2]} ({full})" if len(unit) > 2 else full

    return " or ".join(text(r) for r in near)


def check_band_units(lowest_Hz: float | None, highest_Hz: float | None, swept_low_Hz: float,
                     swept_high_Hz: float, labels: tuple[str, str] = ("lowest frequency", "highest frequency"),
                     path=None) -> None:
    """Refuse a design band edge far (more than UNIT_SLIP_FACTOR) outside the swept range: it was almost
    surely typed in the wrong unit ('--plan 50:450:1.8:30M' for 1.8 MHz). Judged as it stands, it
    would give absurd verdicts and rewind advice. The InputError suggests the likely unit.

    `labels` name the two edges as the user wrote them (option or manifest key).
    """
    from rfmeas.errors import InputError

    for value, label in zip((lowest_Hz, highest_Hz), labels):
        if value is None or not value > 0:
            continue
        if swept_low_Hz / UNIT_SLIP_FACTOR <= value <= swept_high_Hz * UNIT_SLIP_FACTOR:
            continue
        side = "below" if value < swept_low_Hz else "above"
        guess = _likely_unit(value, swept_low_Hz, swept_high_Hz)
        hint = f"; did you mean {guess}?" if guess else "; check its unit (Hz)"
        raise InputError(f"{label} = {eng(value, 'Hz')} is far {side} the swept range "
                         f"{eng(swept_low_Hz, 'Hz')} – {eng(swept_high_Hz, 'Hz')}{hint}", path)


MANIFEST_BAND_LABELS = ("design lowest_frequency_Hz", "design highest_frequency_Hz")


def check_design_units(measurement, labels: tuple[str, str] = MANIFEST_BAND_LABELS) -> None:
    """`check_band_units` for a measurement set's design against the union of its sweeps. The error
    names the manifest when the band came from it; an option's label (`labels`) stands on its own."""
    design = measurement.design
    if design is None or not measurement.sweeps:
        return
    f_low = min(float(s.f_Hz.min()) for s in measurement.sweeps)
    f_high = max(float(s.f_Hz.max()) for s in measurement.sweeps)
    path = measurement.manifest_path if labels == MANIFEST_BAND_LABELS else None
    check_band_units(design.lowest_frequency_Hz, design.highest_frequency_Hz, f_low, f_high, labels, path)
