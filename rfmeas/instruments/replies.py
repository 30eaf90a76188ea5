"""Parse instrument replies into impedances (LCR readings) and S-parameter traces.

Formats, by the profile's [reply] format:
  r_x          'R,X'          series resistance and reactance, ohms
  z_theta_deg  '|Z|,theta'    magnitude in ohms, phase in degrees
  ls_rs        'Ls,Rs'        series inductance in henries, series resistance in ohms
  s_trace_ri   're,im,...'    one complex S value per point
  s_trace_ma   'mag,deg,...'  linear magnitude, phase in degrees
  s_trace_db   'dB,deg,...'   20 log10 magnitude, phase in degrees
A reply that does not parse raises InstrumentError naming the command that got it.
"""

from __future__ import annotations

import math

import numpy as np

from rfmeas.errors import InstrumentError

# SCPI instruments return 9.9e37 (or 9.91e37, "not a number") for overload
_OVERLOAD = 9.0e37

_DESCRIPTION = {
    "r_x": "'R,X' in ohms",
    "z_theta_deg": "'|Z|,theta' (ohms, degrees)",
    "ls_rs": "'Ls,Rs' (henries, ohms)",
    "s_trace_ri": "a list of real,imaginary pairs",
    "s_trace_ma": "a list of magnitude,degree pairs",
    "s_trace_db": "a list of dB,degree pairs",
}


def _shown(reply: str) -> str:
    return repr(reply if len(reply) <= 60 else reply[:57] + "...")


def _numbers(reply: str, separator: str, command: str, fmt: str, source: str) -> list[float]:
    values = []
    for field in reply.split(separator):
        try:
            value = float(field.strip())
        except ValueError:
            raise InstrumentError(f"{source}: reply to '{command}' is not {_DESCRIPTION[fmt]}: "
                                  f"{_shown(reply)}") from None
        if not math.isfinite(value) or abs(value) >= _OVERLOAD:
            raise InstrumentError(f"{source}: reply to '{command}' reports an overload or invalid "
                                  f"reading: {_shown(reply)}")
        values.append(value)
    return values


def parse_point(reply: str, fmt: str, f_Hz: float, command: str, separator: str = ",",
                fields: int = 2, source: str = "instrument") -> complex:
    """One LCR reading as a complex impedance in ohms; fields beyond `fields` are ignored."""
    parts = reply.split(separator)
    if len(parts) < fields:
        raise InstrumentError(f"{source}: reply to '{command}' is not {_DESCRIPTION[fmt]}: {_shown(reply)}")
    a, b = _numbers(separator.join(parts[:2]), separator, command, fmt, source)
    if fmt == "r_x":
        return complex(a, b)
    if fmt == "z_theta_deg":
        if a < 0:
            raise InstrumentError(f"{source}: reply to '{command}' has a negative |Z|: {_shown(reply)}")
        return a * complex(math.cos(math.radians(b)), math.sin(math.radians(b)))
    if fmt == "ls_rs":
        return complex(b, 2.0 * math.pi * f_Hz * a)
    raise ValueError(f"unknown point format {fmt!r}")


def parse_trace(reply: str, fmt: str, points: int, command: str, separator: str = ",",
                source: str = "instrument") -> np.ndarray:
    """A trace of `points` complex S values."""
    values = _numbers(reply, separator, command, fmt, source)
    if len(values) != 2 * points:
        raise InstrumentError(f"{source}: reply to '{command}' has {len(values)} numbers; "
                              f"expected {2 * points} ({points} points as {_DESCRIPTION[fmt]})")
    pairs = np.asarray(values, dtype=float).reshape(points, 2)
    first, second = pairs[:, 0], pairs[:, 1]
    if fmt == "s_trace_ri":
        return first + 1j * second
    if fmt == "s_trace_ma":
        return first * np.exp(1j * np.radians(second))
    if fmt == "s_trace_db":
        return 10.0 ** (first / 20.0) * np.exp(1j * np.radians(second))
    raise ValueError(f"unknown trace format {fmt!r}")


def format_point(z_ohm: complex, fmt: str, f_Hz: float, separator: str = ",") -> str:
    """The reply an instrument would send for impedance `z_ohm` (used by the simulation)."""
    if fmt == "r_x":
        a, b = z_ohm.real, z_ohm.imag
    elif fmt == "z_theta_deg":
        a, b = abs(z_ohm), math.degrees(math.atan2(z_ohm.imag, z_ohm.real))
    elif fmt == "ls_rs":
        a, b = z_ohm.imag / (2.0 * math.pi * f_Hz), z_ohm.real
    else:
        raise ValueError(f"unknown point format {fmt!r}")
    return f"{a:+.12e}{separator}{b:+.12e}"


def format_trace(s: np.ndarray, fmt: str, separator: str = ",") -> str:
    """The reply an instrument would send for trace `s` (used by the simulation)."""
    s = np.asarray(s, dtype=complex)
    if fmt == "s_trace_ri":
        pairs = np.column_stack([s.real, s.imag])
    elif fmt == "s_trace_ma":
        pairs = np.column_stack([np.abs(s), np.degrees(np.angle(s))])
    elif fmt == "s_trace_db":
        pairs = np.column_stack([20.0 * np.log10(np.abs(s)), np.degrees(np.angle(s))])
    else:
        raise ValueError(f"unknown trace format {fmt!r}")
    return separator.join(f"{v:+.12e}" for v in pairs.ravel())
