"""A frequency sweep to acquire: 'START:STOP:POINTS' with linear or logarithmic spacing."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rfmeas.errors import InputError
from rfmeas.io.touchstone import MAX_POINTS
from rfmeas.units import parse_engineering


@dataclass(frozen=True)
class SweepPlan:
    """Start and stop in hertz, number of points, log (geometric) or linear spacing."""

    start_Hz: float
    stop_Hz: float
    points: int
    log: bool = False

    def __post_init__(self):
        if not self.start_Hz > 0:
            raise InputError(f"sweep start must be above 0 Hz (got {self.start_Hz:g} Hz)")
        if self.points < 1:
            raise InputError(f"a sweep needs at least 1 point (got {self.points})")
        if self.points > MAX_POINTS:
            raise InputError(f"a sweep of {self.points:,} points is more than rfmeas reads back "
                             f"({MAX_POINTS:,} at most): take fewer points or several sweeps")
        if self.points > 1 and not self.stop_Hz > self.start_Hz:
            raise InputError(f"sweep stop ({self.stop_Hz:g} Hz) must be above start ({self.start_Hz:g} Hz)")

    def frequencies_Hz(self) -> np.ndarray:
        if self.points == 1:
            return np.array([self.start_Hz])
        if self.log:
            return np.geomspace(self.start_Hz, self.stop_Hz, self.points)
        return np.linspace(self.start_Hz, self.stop_Hz, self.points)

    def describe(self) -> str:
        spacing = "log" if self.log else "linear"
        return f"{self.start_Hz:g} Hz to {self.stop_Hz:g} Hz, {self.points} points, {spacing}"

    def to_dict(self) -> dict:
        return {"start_Hz": self.start_Hz, "stop_Hz": self.stop_Hz, "points": self.points, "log": self.log}


def parse_sweep(text: str, log: bool = False) -> SweepPlan:
    """'100k:30M:201' -> SweepPlan(1e5, 3e7, 201)."""
    parts = str(text).split(":")
    if len(parts) != 3:
        raise InputError(f"sweep '{text}' must look like START:STOP:POINTS, e.g. 100k:30M:201")
    start, stop = parse_engineering(parts[0]), parse_engineering(parts[1])
    try:
        points = int(parts[2])
    except ValueError:
        raise InputError(f"sweep '{text}': the number of points '{parts[2]}' is not an integer") from None
    return SweepPlan(start, stop, points, log)
