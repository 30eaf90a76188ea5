"""Compare two analysis results (plain dicts of the JSON contract): what changed, and was it real.

A change is significant when it exceeds three combined standard errors:
|after − before| > 3·sqrt(σ_before² + σ_after²). Where either side has no
standard error the change is reported but not judged (``significant: null``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from rfmeas.units import format_engineering, format_with_error

SIGMA_FACTOR = 3.0
RULE = ("significant when |after - before| > 3*sqrt(stderr_before^2 + stderr_after^2); "
        "not judged (null) when either standard error is missing")

_UNIT_SUFFIXES = (("_Hz", "Hz"), ("_ohm", "Ω"), ("_H", "H"), ("_F", "F"))


@dataclass(frozen=True)
class Change:
    """One quantity before and after, its relative change and whether it is significant."""

    group: str  # "parameter", "figure" or "design_check"
    before: float | None
    after: float | None
    before_stderr: float | None
    after_stderr: float | None
    change_percent: float | None
    significant: bool | None

    def to_dict(self) -> dict:
        return {"group": self.group, "before": self.before, "after": self.after,
                "before_stderr": self.before_stderr, "after_stderr": self.after_stderr,
                "change_percent": self.change_percent, "significant": self.significant}


@dataclass(frozen=True)
class Comparison:
    """Every quantity present in both results, and a plain-words verdict."""

    before_name: str | None
    after_name: str | None
    changes: dict[str, Change]
    verdict: tuple[str, ...]
    rule: str = RULE

    def to_dict(self) -> dict:
        return {"before_name": self.before_name, "after_name": self.after_name,
                "changes": {k: c.to_dict() for k, c in self.changes.items()},
                "verdict": list(self.verdict), "rule": self.rule}


def _number(x) -> float | None:
    if isinstance(x, bool) or not isinstance(x, (int, float)):
        return None
    x = float(x)
    return x if math.isfinite(x) else None


def _quantity(entry) -> tuple[float | None, float | None] | None:
    """(value, stderr) of a contract entry: a number or {"value", "stderr"}; None if not numeric."""
    if isinstance(entry, dict):
        if "value" not in entry or (entry["value"] is not None and _number(entry["value"]) is None):
            return None
        stderr = _number(entry.get("stderr"))
        return _number(entry["value"]), (abs(stderr) if stderr is not None else None)
    value = _number(entry)
    return None if value is None else (value, None)


def _target(entry) -> float | None:
    """A design target given as a number or as a dict naming it 'design', 'target' or 'value'."""
    if isinstance(entry, dict):
        for key in ("design", "target", "value"):
            if _number(entry.get(key)) is not None:
                return _number(entry[key])
        return None
    return _number(entry)


def judge(before: float | None, after: float | None, before_stderr: float | None,
          after_stderr: float | None, group: str = "parameter") -> Change:
    """The Change between two values under the 3-sigma rule."""
    if before is None or after is None:
        return Change(group, before, after, before_stderr, after_stderr, None, None)
    change_percent = (after - before) / abs(before) * 100.0 if before != 0 else None
    if before_stderr is None or after_stderr is None:
        significant = None
    else:
        significant = abs(after - before) > SIGMA_FACTOR * math.hypot(before_stderr, after_stderr)
    return Change(group, before, after, before_stderr, after_stderr, change_percent, significant)


def _section(result: dict, name: str) -> dict:
    """A section of a result; {} when it is missing or not a table (a damaged stored record)."""
    section = result.get(name)
    return section if isinstance(section, dict) else {}


def _ratio_error(result: dict, design_ratio: float | None) -> tuple[float | None, float | None] | None:
    """Turns-ratio error in percent: from design_check, else from the fitted ratio and the design."""
    stated = _quantity(_section(result, "design_check").get("ratio_error_percent"))
    if stated is not None:
        return stated
    fitted = _quantity(_section(result, "parameters").get("effective_turns_ratio"))
    if fitted is None or fitted[0] is None or not design_ratio:
        return None
    value, stderr = fitted
    return ((value - design_ratio) / design_ratio * 100.0,
            None if stderr is None else stderr / abs(design_ratio) * 100.0)


def unit_of(key: str) -> str:
    """The SI unit a contract key names by its suffix ('' when it names none)."""
    return next((unit for suffix, unit in _UNIT_SUFFIXES if key.endswith(suffix)), "")


def format_quantity(key: str, value: float | None, stderr: float | None = None) -> str:
    """A value (and its standard error, when given) for people, with the unit its key names."""
    if value is None:
        return "—"
    unit = unit_of(key)
    if unit:
        return format_engineering(value, unit) if stderr is None else format_with_error(value, stderr, unit)
    if key.endswith("_percent"):
        return f"{value:.3g} %" if stderr is None else f"{value:.3g} ± {stderr:.2g} %"
    return f"{value:.4g}" if stderr is None else f"{value:.4g} ± {stderr:.2g}"


def _design_targets(design: dict | None, after: dict) -> dict:
    """The design's band and turns ratio: given, or the `target` of the after result's design check."""
    if design is None:
        check = after.get("design_check") or {}
        design = check.get("target", check) if isinstance(check, dict) else None
        if isinstance(design, dict) and "turns_ratio" not in design:
            design = dict(design, turns_ratio=design.get("target_turns_ratio"))
    if not isinstance(design, dict):
        design = {}
    return {key: _target(design.get(key)) for key in ("lowest_frequency_Hz", "highest_frequency_Hz", "turns_ratio")}


def compare_results(before: dict, after: dict, design: dict | None = None) -> Comparison:
    """Compare two results of the JSON contract; `design` holds the targets.

    `design` may give ``lowest_frequency_Hz``, ``highest_frequency_Hz`` and
    ``turns_ratio`` (secondary : primary); when it is None they are looked for
    in the after result's design_check. Missing pieces are skipped, not guessed.
    """
    targets = _design_targets(design, after)
    changes: dict[str, Change] = {}
    for group, section in (("parameter", "parameters"), ("figure", "figures")):
        b_section, a_section = _section(before, section), _section(after, section)
        for key in a_section:
            if key not in b_section:
                continue
            b, a = _quantity(b_section[key]), _quantity(a_section[key])
            if b is None or a is None:
                continue
            name = key if key not in changes else f"{section}.{key}"
            changes[name] = judge(b[0], a[0], b[1], a[1], group)
    b_err, a_err = _ratio_error(before, targets["turns_ratio"]), _ratio_error(after, targets["turns_ratio"])
    if b_err is not None and a_err is not None and "ratio_error_percent" not in changes:
        changes["ratio_error_percent"] = judge(b_err[0], a_err[0], b_err[1], a_err[1], "design_check")
    return Comparison(before.get("name"), after.get("name"), changes,
                      tuple(_verdict(before, after, changes, targets)))


# --- the verdict in plain words -------------------------------------------------------------

_ASPECTS = (
    # key, label, "better" direction, design target key, how the target binds
    ("low_frequency_limit_Hz", "Low-frequency limit", "lower", "lowest_frequency_Hz", "at most"),
    ("high_frequency_corner_3dB_Hz", "Upper corner frequency", "higher", "highest_frequency_Hz", "at least"),
    ("ratio_error_percent", "Turns-ratio error", "smaller magnitude", None, None),
)


def _improved(before: float, after: float, better: str) -> bool:
    if better == "lower":
        return after < before
    if better == "higher":
        return after > before
    return abs(after) < abs(before)


def _aspect_sentence(key, label, better, c: Change) -> str:
    if key == "ratio_error_percent":
        shown = f"{abs(c.before):.3g} % → {abs(c.after):.3g} % off the design ratio"
    else:
        pct = "" if c.change_percent is None else f", {c.change_percent:+.1f} %"
        shown = f"{format_quantity(key, c.before)} → {format_quantity(key, c.after)}{pct}"
    if c.after == c.before:
        return f"{label} unchanged ({shown})."
    word = "improved" if _improved(c.before, c.after, better) else "got worse"
    if c.significant is None:
        return f"{label} {word} ({shown}), not judged: a standard error is missing."
    if not c.significant:
        return f"{label}: no significant change ({shown}, within 3σ)."
    return f"{label} {word} ({shown})."


def _target_sentence(key, label, bound, target, c: Change) -> str:
    def meets(v):
        return v <= target if bound == "at most" else v >= target

    was, now = meets(c.before), meets(c.after)
    state = {(True, True): "met before and after", (False, True): "now met (missed before)",
             (True, False): "now missed (met before)", (False, False): "still missed"}[(was, now)]
    return f"{label}: the design asks for {bound} {format_quantity(key, target)}: {state}."


def _verdict(before: dict, after: dict, changes: dict[str, Change], targets: dict) -> list[str]:
    sentences = []
    if before.get("name") != after.get("name"):
        sentences.append(f"These are results of different units ('{before.get('name')}' and '{after.get('name')}').")
    for key, label, better, target_key, bound in _ASPECTS:
        c = changes.get(key)
        if c is None or c.before is None or c.after is None:
            continue
        sentences.append(_aspect_sentence(key, label, better, c))
        target = targets.get(target_key) if target_key else None
        if target is not None:
            sentences.append(_target_sentence(key, label, bound, target, c))
    params = [(k, c) for k, c in changes.items() if c.group == "parameter"]
    from rfmeas.fit.result import LABELS

    moved = [f"{LABELS.get(k, k)} ({c.change_percent:+.1f} %)" if c.change_percent is not None
             else LABELS.get(k, k) for k, c in params if c.significant]
    if moved:
        sentences.append(f"Parameters that changed significantly: {', '.join(moved)}.")
    elif params:
        sentences.append("No fitted parameter changed significantly.")
    unjudged = sum(1 for c in changes.values() if c.significant is None)
    if unjudged:
        sentences.append(f"{unjudged} change(s) not judged for lack of a standard error.")
    if not changes:
        sentences.append("The two results have no quantity in common to compare.")
    return sentences
