"""What the other winding sees during a one-port sweep: open, shorted, or a resistance.

The one place that reads a termination from a manifest or the command line, gives
its admittance to the circuit model, its plain description and its JSON value.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from rfmeas.errors import InputError

OPEN_S = 0.0            # admittance of an open termination, siemens
SHORT_S = math.inf      # admittance of a short (driving_point_admittance takes the limit)

_KINDS = ("open", "short", "load")


@dataclass(frozen=True)
class Termination:
    """`kind` is "open", "short" or "load"; a load has `resistance_ohm` (> 0, finite)."""

    kind: str
    resistance_ohm: float | None = None

    def __post_init__(self):
        if self.kind not in _KINDS:
            raise ValueError(f"termination kind must be one of {_KINDS}, not {self.kind!r}")
        r = self.resistance_ohm
        if self.kind == "load":
            if r is None or not math.isfinite(r) or r <= 0:
                raise ValueError(f"a load termination needs a positive resistance in ohms, not {r!r}")
            object.__setattr__(self, "resistance_ohm", float(r))
        elif r is not None:
            raise ValueError(f"an {self.kind} termination has no resistance")

    @classmethod
    def open(cls) -> Termination:
        return cls("open")

    @classmethod
    def short(cls) -> Termination:
        return cls("short")

    @classmethod
    def load(cls, resistance_ohm: float) -> Termination:
        return cls("load", resistance_ohm)

    @classmethod
    def parse(cls, value, where: str = "sweep", path=None) -> Termination:
        """A manifest or CLI value: 'open' | 'short' | a resistance in ohms (a number, or text
        such as '200', '1k' or '50 ohm'). Anything else is the project's InputError."""
        if isinstance(value, Termination):
            return value
        if isinstance(value, str):
            text = value.strip().lower()
            if text in ("open", "short"):
                return cls(text)
            from rfmeas.units import parse_engineering

            try:
                value = parse_engineering(text.replace("ohms", "").replace("ohm", "").replace("ω", ""))
            except InputError:
                raise InputError(f"{where}.termination must be 'open', 'short' or a resistance in ohms, "
                                 f"not {value!r}", path) from None
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) \
                or value <= 0:
            raise InputError(f"{where}.termination must be 'open', 'short' or a positive resistance in "
                             f"ohms, not {value!r}", path)
        return cls.load(float(value))

    @classmethod
    def coerce(cls, value) -> Termination | None:
        """A Termination from itself or its JSON value; None (a two-port sweep) stays None."""
        return None if value is None else cls.parse(value, "termination")

    @property
    def is_open(self) -> bool:
        return self.kind == "open"

    @property
    def is_short(self) -> bool:
        return self.kind == "short"

    @property
    def is_load(self) -> bool:
        return self.kind == "load"

    def admittance_S(self) -> float:
        """0 (open), inf (short) or 1/R in siemens; a scalar that broadcasts over any frequency array."""
        if self.is_open:
            return OPEN_S
        if self.is_short:
            return SHORT_S
        return 1.0 / self.resistance_ohm

    def describe(self) -> str:
        """'open', 'shorted' or 'loaded by 50 Ω'."""
        if self.is_load:
            return f"loaded by {self.resistance_ohm:g} Ω"
        return "open" if self.is_open else "shorted"

    def to_json(self) -> str | float:
        """The JSON and manifest value: "open", "short" or the resistance in ohms."""
        return self.resistance_ohm if self.is_load else self.kind

    def __str__(self) -> str:
        """The manifest's spelling: 'open', 'short' or the resistance in ohms ('200')."""
        return f"{self.resistance_ohm:g}" if self.is_load else self.kind
