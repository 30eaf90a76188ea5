"""Engineering notation at the edges."""

import math

import pytest

from rfmeas.errors import InputError
from rfmeas.units import format_engineering, format_with_error, parse_engineering


@pytest.mark.parametrize("text, value", [
    ("50", 50.0), ("200k", 200e3), ("2.2u", 2.2e-6), ("2.2µ", 2.2e-6), ("1.8M", 1.8e6),
    ("1.8MHz", 1.8e6), ("10meg", 10e6), ("4.7n", 4.7e-9), ("3p", 3e-12), ("1e3", 1e3),
    ("100 Hz", 100.0), ("-2m", -2e-3),
])
def test_parse_engineering(text, value):
    assert parse_engineering(text) == pytest.approx(value, rel=1e-12)


@pytest.mark.parametrize("text", ["", "abc", "1.2.3", "k", "1e999"])
def test_parse_engineering_rejects(text):
    with pytest.raises(InputError):
        parse_engineering(text)


@pytest.mark.parametrize("value, unit, digits, expected", [
    (2.2e-6, "H", 4, "2.2 µH"), (120.0, "Ω", 2, "120 Ω"), (999.96, "Ω", 4, "1 kΩ"),
    (123456.0, "Hz", 3, "123 kHz"), (0.5, "Ω", 3, "500 mΩ"), (0.0, "F", 4, "0 F"),
    (3.3e-12, "F", 2, "3.3 pF"), (-4.7e3, "Ω", 2, "-4.7 kΩ"),
])
def test_format_engineering(value, unit, digits, expected):
    assert format_engineering(value, unit, digits) == expected


def test_format_edge_values():
    assert format_engineering(None, "H") == "—"
    assert format_engineering(math.inf, "Ω").startswith("∞")


def test_format_with_error_shares_prefix_and_two_figures():
    assert format_with_error(12.3143e-6, 0.0512e-6, "H") == "12.314 ± 0.051 µH"
    assert format_with_error(None, None, "H") == "not determined"
    assert format_with_error(3e-12, None, "F") == "3 pF"


# --- value and error rounded together (issue 16, "Numbers") -------------------------------
# The rule (common practice in metrology, e.g. the GUM's advice to quote an uncertainty to
# at most two significant digits and the value to the same place): the error to two
# significant digits (a trailing zero dropped), the value to the same decimal place.

@pytest.mark.parametrize("value, stderr, unit, expected", [
    (17.9962e-6, 0.0021e-6, "H", "17.9962 ± 0.0021 µH"),       # the example
    (0.995, 0.00008, "", "0.99500 ± 0.00008"),                  # the example
    (0.99, 8.3e-7, "", "0.99000000 ± 0.00000083"),              # not "0.99 ± 8.3e-07"
    (9.96, 0.05, "", "9.96 ± 0.05"),                            # trailing zero of 0.050 dropped
    (0.099, 0.0951, "", "0.099 ± 0.095"),
    (9.996, 0.0996, "", "10.0 ± 0.1"),                          # error rounds up a decade
    (999.97, 0.5, "Ω", "1.0000 ± 0.0005 kΩ"),                   # value rounds up a prefix
    (-4.7e3, 12.0, "Ω", "-4.700 ± 0.012 kΩ"),                   # negative value
    (-3.2, 0.0996, "dB", "-3.2 ± 0.1 dB"),                      # no prefix on dB
    (123456.0, 3000.0, "Hz", "123 ± 3 kHz"),
    (0.0, 3e-7, "H", "0 ± 300 nH"),
    (1.2e-12, 3e-14, "", "(1.20 ± 0.03)e-12"),                  # tiny dimensionless: one power of ten
    (3.4e9, 2.1e7, "", "(3.400 ± 0.021)e9"),                    # huge dimensionless
])
def test_format_with_error_examples(value, stderr, unit, expected):
    assert format_with_error(value, stderr, unit) == expected


def test_format_with_error_never_a_fourteen_digit_mantissa():
    # the "20.00000000000192 ± 0.00000000000091 µH": the error is far below the digits shown
    text = format_with_error(20.00000000000192e-6, 0.00000000000091e-6, "H")
    assert text == "20.0000000 ± <0.0000001 µH"
    assert format_with_error(0.99000000000000182, 1e-15, "") == "0.990000000 ± <0.000000001"


def test_format_with_error_missing_and_non_finite():
    assert format_with_error(0.99, None, "") == "0.99"
    assert format_with_error(0.99, 0.0, "") == "0.99"
    assert format_with_error(0.99, math.nan, "") == "0.99"
    assert format_with_error(math.nan, 0.1, "H") == "—"
    assert format_with_error(math.inf, 0.1, "H") == "∞ H"
    assert format_with_error(-math.inf, None, "") == "−∞"


@pytest.mark.parametrize("value, expected", [(0.99, "0.99"), (990.0, "990"), (2e-6, "2e-6"), (3.4e9, "3.4e9")])
def test_dimensionless_values_carry_no_prefix(value, expected):
    # a bare "µ" or "m" after a coupling coefficient or µe reads as a unit or as permeability
    assert format_engineering(value, "") == expected


def _parse_with_error(text: str, unit: str) -> tuple[float, float]:
    """Read back '12.31 ± 0.05 µH' or '(1.20 ± 0.03)e-12' as SI numbers (test helper)."""
    import re
    m = re.fullmatch(r"\((\S+) ± (\S+)\)e(-?\d+)(?: \S+)?", text)
    if m:
        scale = 10.0 ** int(m.group(3))
        return float(m.group(1)) * scale, float(m.group(2)) * scale
    left, right = text.split(" ± ")
    err_text = right[: len(right) - len(unit)].strip() if unit else right
    prefix = err_text.split(" ")[1] if " " in err_text else ""
    number = err_text.split(" ")[0]
    scale = parse_engineering(f"1{prefix}")
    return float(left) * scale, float(number) * scale


try:
    from hypothesis import given, settings
    from hypothesis import strategies as st
except ImportError:  # pragma: no cover
    given = None

if given is not None:
    @settings(max_examples=400, deadline=None)
    @given(
        mantissa=st.floats(min_value=-9.999, max_value=9.999, allow_nan=False),
        value_exp=st.integers(min_value=-13, max_value=10),
        rel_err=st.floats(min_value=1e-7, max_value=3.0),
        unit=st.sampled_from(["H", "Ω", "Hz", "F", "", "dB"]),
    )
    def test_format_with_error_round_trip(mantissa, value_exp, rel_err, unit):
        value = mantissa * 10.0 ** value_exp
        stderr = max(abs(value), 10.0 ** value_exp) * rel_err
        text = format_with_error(value, stderr, unit)
        assert "e" not in text.replace("(", "").split(")")[0] or text.startswith("(")
        shown_value, shown_err = _parse_with_error(text, unit)
        # the error keeps two significant digits (or one when the second is a zero)
        digits = text.split(" ± ")[1].split(")")[0].split(" ")[0].replace(".", "").strip("0")
        assert 1 <= len(digits) <= 2
        assert shown_err == pytest.approx(float(f"{stderr:.2g}"), rel=1e-9)
        # the value is within half a unit of its last shown digit (the error's last digit)
        last_digit = 10.0 ** (math.floor(math.log10(shown_err)) - (len(digits) - 1))
        assert abs(shown_value - value) <= 0.5 * last_digit * (1 + 1e-6)
