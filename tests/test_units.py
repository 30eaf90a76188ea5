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
