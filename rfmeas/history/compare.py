"""Compare two analysis results (an Analysis, or a stored dict of the JSON contract): what changed,
and was it real.

A change is significant when it exceeds three combined standard errors:
|after − before| > 3·sqrt(σ_before² + σ_after²). Where either side has no
standard error the change is reported but not judged (``significant: null``).

Whether a side met its design is never decided here: it is read from that side's
design check (DesignCheck.passed and its verdicts; for a stored record, the JSON
they wrote, through rfmeas.judge.design.design_status).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from rfmeas.units import format_engineering, format_with_error
from rfmeas.labels import label as label_of, unit as unit_of

SIGMA_FACTOR = 3.0
RULE = ("a change is significant when it exceeds 3 times the combined standard error "
        "(√(σ_before² + σ_after²)); not judged when either standard error is missing")



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


@dataclass(frozen=True)
class _Side:
    """One side of a comparison as the comparison reads it: its JSON sections for the quantities,
    and its design outcome as its own design check gave it."""

    result: dict
    status: str                                              # pass, fail, not judged, no design
    verdicts: dict[str, tuple[str, float | None]]           # check name -> (state, limit)
    target: dict


def _side(side) -> _Side:
    """An Analysis (read through its typed DesignCheck) or a stored JSON result."""
    from rfmeas.judge.design import design_status, status_word

    if isinstance(side, dict):
        check = side.get("design_check")
        check = check if isinstance(check, dict) else {}
        verdicts = {str(c.get("name")): (c.get("state") or status_word(c.get("passed")), _number(c.get("limit")))
                    for c in check.get("checks") or () if isinstance(c, dict)}
        target = check.get("target")
        return _Side(side, design_status(check), verdicts, target if isinstance(target, dict) else {})
    check = side.design_check
    if check is None:
        return _Side(side.to_dict(), side.design_status, {}, {})
    return _Side(side.to_dict(), side.design_status, {v.name: (v.state, v.limit) for v in check.verdicts},
                 check.target.to_dict())


def _ratio_error(result: dict, design_ratio: float | None) -> tuple[float | None, float | None] | None:
    """Turns-ratio error in percent, from the fitted ratio and the design's ratio."""
    fitted = _quantity(_section(result, "parameters").get("effective_turns_ratio"))
    if fitted is None or fitted[0] is None or not design_ratio:
        return None
    value, stderr = fitted
    return ((value - design_ratio) / design_ratio * 100.0,
            None if stderr is None else stderr / abs(design_ratio) * 100.0)


def format_quantity(key: str, value: float | None, stderr: float | None = None) -> str:
    """A value (and its standard error, when given) for people, with the unit its key names."""
    if value is None:
        return "—"
    unit = unit_of(key)
    return format_engineering(value, unit) if stderr is None else format_with_error(value, stderr, unit)


def _design_ratio(design: dict | None, after: _Side) -> float | None:
    """The design's turns ratio (secondary : primary): given, or the target of the after side's check."""
    if isinstance(design, dict):
        return _target(design.get("turns_ratio"))
    return _target(after.target.get("target_turns_ratio"))


def compare_results(before, after, design: dict | None = None) -> Comparison:
    """Compare two results: each an Analysis or a stored result of the JSON contract.

    `design` may give ``turns_ratio`` (secondary : primary) for the turns-ratio
    error; when it is None the after side's design target gives it. Whether each
    side met its design comes from its own design check. Missing pieces are
    skipped, not guessed.
    """
    before_side, after_side = _side(before), _side(after)
    before, after = before_side.result, after_side.result
    design_ratio = _design_ratio(design, after_side)
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
    b_err, a_err = _ratio_error(before, design_ratio), _ratio_error(after, design_ratio)
    if b_err is not None and a_err is not None and "ratio_error_percent" not in changes:
        changes["ratio_error_percent"] = judge(b_err[0], a_err[0], b_err[1], a_err[1], "design_check")
    return Comparison(before.get("name"), after.get("name"), changes,
                      tuple(_verdict(before_side, after_side, changes)))


# --- the verdict in plain words -------------------------------------------------------------

def _capital(text: str) -> str:
    return text[:1].upper() + text[1:]


_ASPECTS = (
    # key, label, "better" direction, the design check that judges it, how its limit binds
    ("low_frequency_limit_Hz", _capital(label_of("low_frequency_limit_Hz")), "lower", "low_frequency_limit",
     "at most"),
    ("high_frequency_corner_3dB_Hz", _capital(label_of("high_frequency_corner_3dB_Hz")), "higher",
     "high_frequency_corner", "at least"),
    ("ratio_error_percent", "Turns-ratio error", "smaller magnitude", None, None),
)
_MET = {"pass": "met", "fail": "missed"}


def _improved(before: float, after: float, better: str) -> bool:
    if better == "lower":
        return after < before
    if better == "higher":
        return after > before
    return abs(after) < abs(before)


def _aspect_sentence(key, label, better, c: Change) -> str:
    if key == "ratio_error_percent":
        shown = f"{format_engineering(abs(c.before), '%')} → {format_engineering(abs(c.after), '%')} off the design ratio"
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


def _target_sentence(key, label, bound, check: str, before: _Side, after: _Side) -> str | None:
    """What each side's own design check said of this aspect (None when neither judged it)."""
    was, before_limit = before.verdicts.get(check, (None, None))
    now, after_limit = after.verdicts.get(check, (None, None))
    limit = after_limit if after_limit is not None else before_limit
    if limit is None:
        return None
    if was in _MET and now in _MET:
        state = {("met", "met"): "met before and after", ("missed", "met"): "now met (missed before)",
                 ("met", "missed"): "now missed (met before)",
                 ("missed", "missed"): "still missed"}[(_MET[was], _MET[now])]
    else:
        state = f"{_MET.get(was, was or 'not checked')} before, {_MET.get(now, now or 'not checked')} after"
    return f"{label}: the design asks for {bound} {format_quantity(key, limit)}: {state}."


def _status_sentence(before: _Side, after: _Side) -> str | None:
    """The design checks' outcomes, as each side's own check gave them."""
    if before.status == "no design" and after.status == "no design":
        return None
    if before.status == after.status:
        return f"Design check: {before.status} before and after."
    return f"Design check: {before.status} before, {after.status} after."


def _verdict(before_side: _Side, after_side: _Side, changes: dict[str, Change]) -> list[str]:
    before, after = before_side.result, after_side.result
    sentences = []
    if before.get("name") != after.get("name"):
        sentences.append(f"These are results of different units ('{before.get('name')}' and '{after.get('name')}').")
    status = _status_sentence(before_side, after_side)
    if status:
        sentences.append(status)
    for key, label, better, check, bound in _ASPECTS:
        c = changes.get(key)
        if c is None or c.before is None or c.after is None:
            continue
        sentences.append(_aspect_sentence(key, label, better, c))
        target = _target_sentence(key, label, bound, check, before_side, after_side) if check else None
        if target is not None:
            sentences.append(target)
    params = [(k, c) for k, c in changes.items() if c.group == "parameter"]
    moved = [f"{label_of(k)} ({c.change_percent:+.1f} %)" if c.change_percent is not None
             else label_of(k) for k, c in params if c.significant]
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
