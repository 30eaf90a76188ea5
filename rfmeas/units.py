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


def format_engineering(value: float | None, unit: str = "", digits: int = 4) -> str:
    """Format `value` with an SI prefix and `digits` significant figures: 2.2e-6, 'H' -> '2.2 µH'."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "—"
    if value == 0:
        return f"0 {unit}".strip()
    if not math.isfinite(value):
        return ("∞" if value > 0 else "−∞") + (f" {unit}" if unit else "")
    rounded = float(f"{value:.{digits}g}")  # round to `digits` significant figures first
    exponent = int(math.floor(math.log10(abs(rounded)) / 3.0) * 3)
    exponent = max(-15, min(12, exponent))
    prefix = dict(_FORMAT_PREFIXES)[exponent]
    scaled = rounded / 10.0 ** exponent
    decimals = max(0, digits - 1 - int(math.floor(math.log10(abs(scaled)))))
    text = f"{scaled:.{decimals}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return f"{text} {prefix}{unit}".strip()


def format_with_error(value: float | None, stderr: float | None, unit: str = "") -> str:
    """'12.31 ± 0.05 µH': value and standard error on the same prefix, error to 2 significant figures."""
    if value is None:
        return "not determined"
    if stderr is None or not math.isfinite(stderr) or stderr <= 0:
        return format_engineering(value, unit)
    exponent = int(math.floor(math.log10(abs(value)) / 3.0) * 3) if value != 0 else 0
    exponent = max(-15, min(12, exponent))
    prefix = dict(_FORMAT_PREFIXES)[exponent]
    scale = 10.0 ** exponent
    err_decade = math.floor(math.log10(stderr / scale))
    decimals = max(0, 1 - err_decade)
    return f"{value / scale:.{decimals}f} ± {stderr / scale:.{decimals}f} {prefix}{unit}".strip()
