"""Engineering notation: parse '2.2u' / '1.8M' at the edges, format '2.2 µH' for people."""

from __future__ import annotations

import math
import re

from rfmeas.errors import InputError

_PREFIX_EXPONENT = {
    "f": -15, "p": -12, "n": -9, "u": -6, "µ": -6, "μ": -6, "m": -3,
    "": 0, "k": 3, "K": 3, "M": 6, "G": 9, "T": 12,
}
_FORMAT_PREFIXES = [(-15, "f"), (-12, "p"), (-9, "n"), (-6, "µ"), (-3, "m"),
                    (0, ""), (3, "k"), (6, "M"), (9, "G"), (12, "T")]
_NUMBER_RE = re.compile(
    r"^\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*([fpnuµμmkKMGT]?)\s*([A-Za-zΩ]*)\s*$"
)


def parse_engineering(text: str | float | int) -> float:
    """Parse a number with an optional SI prefix and unit: '200k', '2.2u', '1.8MHz', '50'.

    'meg' is accepted for mega as SPICE writes it. A trailing unit word is ignored.
    """
    if isinstance(text, (int, float)):
        return float(text)
    s = str(text).strip()
    low = s.lower()
    for unit_word in ("meg",):
        idx = low.find(unit_word)
        if idx > 0 and _NUMBER_RE.match(s[:idx]):
            return float(s[:idx]) * 1e6
    m = _NUMBER_RE.match(s)
    if not m:
        raise InputError(f"'{text}' is not a number (engineering notation such as 200k, 2.2u, 1.8M is accepted)")
    mantissa, prefix, _unit = m.groups()
    value = float(mantissa) * 10.0 ** _PREFIX_EXPONENT[prefix]
    if not math.isfinite(value):
        raise InputError(f"'{text}' is not a finite number")
    return value


# Only these SI units take a prefix letter. A dimensionless number (k, a ratio, µe) would
# read "990 m" or "2 µ" (µ reads as permeability); dB, % and compound units such as
# nH/turn² are shown as plain numbers followed by their unit.
PREFIXED_UNITS = frozenset({"Hz", "H", "Ω", "F", "V", "A", "W", "s"})
# At most this many significant digits of a value are shown, however small its error.
MAX_SIGNIFICANT_DIGITS = 9
# A dimensionless number outside [1e-4, 1e7) is written with a shared power of ten.
_PLAIN_RANGE = (1e-4, 1e7)


def _join(text: str, unit: str) -> str:
    return f"{text} {unit}".strip()


def _prefix_exponent(magnitude: float, unit: str) -> int:
    """Engineering exponent (multiple of 3, clamped to f..T) for `magnitude`; 0 for unprefixed units."""
    if unit not in PREFIXED_UNITS or magnitude == 0 or not math.isfinite(magnitude):
        return 0
    return max(-15, min(12, int(math.floor(math.log10(magnitude) / 3.0) * 3)))


def _fixed(value: float, decimals: int) -> str:
    """`value` in fixed point with `decimals` places; negative `decimals` rounds to tens, hundreds, ..."""
    if decimals >= 0:
        return f"{value:.{decimals}f}"
    return f"{round(value, decimals):.0f}"


def _non_finite(value: float, unit: str) -> str:
    if math.isnan(value):
        return "—"
    return _join("∞" if value > 0 else "−∞", unit)


def format_engineering(value: float | None, unit: str = "", digits: int = 4) -> str:
    """Format `value` with an SI prefix and `digits` significant figures: 2.2e-6, 'H' -> '2.2 µH'.

    Only PREFIXED_UNITS get a prefix letter (0.99, not 990 m).
    """
    if value is None:
        return "—"
    value = float(value)
    if not math.isfinite(value):
        return _non_finite(value, unit)
    if value == 0:
        return _join("0", unit)
    rounded = float(f"{value:.{digits}g}")  # round to `digits` significant figures first
    if unit not in PREFIXED_UNITS:
        low, high = _PLAIN_RANGE
        if not low <= abs(rounded) < high:
            mantissa, _, exp = f"{rounded:.{digits - 1}e}".partition("e")
            if "." in mantissa:
                mantissa = mantissa.rstrip("0").rstrip(".")
            return _join(f"{mantissa}e{int(exp)}", unit)
    exponent = _prefix_exponent(abs(rounded), unit)
    prefix = dict(_FORMAT_PREFIXES)[exponent] if unit in PREFIXED_UNITS else ""
    scaled = rounded / 10.0 ** exponent
    decimals = max(0, digits - 1 - int(math.floor(math.log10(abs(scaled)))))
    text = f"{scaled:.{decimals}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return _join(text, prefix + unit)


def _error_place(stderr: float) -> tuple[float, int]:
    """The error rounded to two significant digits (a trailing zero dropped) and the power of
    ten of its last shown digit: 0.0021 -> (0.0021, -4); 0.0501 -> (0.05, -2)."""
    place = int(math.floor(math.log10(stderr))) - 1
    rounded = round(stderr, -place)
    if rounded >= 10.0 ** (place + 2):  # 0.0996 -> 0.10: the decade moved up
        place += 1
        rounded = round(stderr, -place)
    if round(rounded / 10.0 ** place) % 10 == 0:  # 0.050 -> 0.05
        place += 1
    return rounded, place


def format_with_error(value: float | None, stderr: float | None, unit: str = "") -> str:
    """Value and standard error rounded together: '17.9962 ± 0.0021 µH', '0.99500 ± 0.00008'.

    The error is shown to two significant digits (a trailing zero dropped) and the value to
    the same decimal place, both on one SI prefix (none for dimensionless values or dB).
    At most MAX_SIGNIFICANT_DIGITS digits of the value are shown; an error below its last
    digit reads '± <0.000001'. A missing, zero or non-finite error gives the value alone
    (callers add '± ?' where an error was expected). Never scientific notation next to a
    prefix: dimensionless values outside [1e-4, 1e7) share one power of ten, '(1.20 ± 0.03)e-12'.
    """
    if value is None:
        return "not determined"
    value = float(value)
    if not math.isfinite(value):
        return _non_finite(value, unit)
    if stderr is None or not math.isfinite(float(stderr)) or float(stderr) <= 0:
        return format_engineering(value, unit)
    stderr = float(stderr)
    err_rounded, place = _error_place(stderr)
    below = False
    if value != 0:
        lowest = int(math.floor(math.log10(abs(value)))) - (MAX_SIGNIFICANT_DIGITS - 1)
        if place < lowest:  # the error is far below the value's shown digits
            place = lowest
            err_rounded = round(stderr, -place)
            below = err_rounded == 0
    value_rounded = round(value, -place)
    magnitude = max(abs(value_rounded), err_rounded)
    if unit not in PREFIXED_UNITS:
        low, high = _PLAIN_RANGE
        if magnitude and not low <= magnitude < high:
            power = int(math.floor(math.log10(magnitude)))
            decimals = max(0, power - place)
            scale = 10.0 ** power
            err_text = f"<{_fixed(10.0 ** place / scale, decimals)}" if below \
                else _fixed(err_rounded / scale, decimals)
            return _join(f"({_fixed(value_rounded / scale, decimals)} ± {err_text})e{power}", unit)
        exponent, prefix = 0, ""
    else:
        exponent = _prefix_exponent(magnitude, unit)
        prefix = dict(_FORMAT_PREFIXES)[exponent]
    scale = 10.0 ** exponent
    decimals = exponent - place
    err_text = f"<{_fixed(10.0 ** place / scale, decimals)}" if below else _fixed(err_rounded / scale, decimals)
    return _join(f"{_fixed(value_rounded / scale, decimals)} ± {err_text}", prefix + unit)
