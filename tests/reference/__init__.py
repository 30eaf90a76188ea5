"""Independent references for the equivalent circuit: ngspice and scikit-rf's circuit solver.

Both simulators take the same sweep description as rfmeas.model does:

    OnePort(port1="primary", termination="open", z0_ohm=50.0)
        the `port1` winding on a one-port VNA, the other winding "open",
        "short" or loaded by a resistance in ohms; the result is S11, shape (F,).
    TwoPort(port1="primary", z0_port1_ohm=50.0, z0_port2_ohm=50.0)
        the `port1` winding on port 1, the other on port 2, real reference
        impedances per port; the result is the S matrix, shape (F, 2, 2).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from rfmeas.errors import RfmeasError
from rfmeas.model import circuit
from rfmeas.model.params import TransformerParams

WINDINGS = ("primary", "secondary")


class SimulatorError(RfmeasError):
    """A reference simulator could not be run or gave no usable result."""


@dataclass(frozen=True)
class OnePort:
    """Reflection at the `port1` winding with the other winding terminated."""

    port1: str = "primary"
    termination: str | float = "open"
    z0_ohm: float = 50.0

    def __post_init__(self):
        _check_winding(self.port1)
        _check_reference(self.z0_ohm)
        if isinstance(self.termination, str):
            if self.termination not in ("open", "short"):
                raise ValueError(f"termination must be 'open', 'short' or ohms, not {self.termination!r}")
        elif not (self.termination > 0 and math.isfinite(self.termination)):
            raise ValueError(f"a resistive termination must be positive and finite, not {self.termination!r}")

    @property
    def other(self) -> str:
        return other_winding(self.port1)


@dataclass(frozen=True)
class TwoPort:
    """Full S matrix with the `port1` winding on port 1 and the other on port 2."""

    port1: str = "primary"
    z0_port1_ohm: float = 50.0
    z0_port2_ohm: float = 50.0

    def __post_init__(self):
        _check_winding(self.port1)
        _check_reference(self.z0_port1_ohm)
        _check_reference(self.z0_port2_ohm)

    @property
    def other(self) -> str:
        return other_winding(self.port1)


Sweep = OnePort | TwoPort


def other_winding(winding: str) -> str:
    return "secondary" if winding == "primary" else "primary"


def _check_winding(winding):
    if winding not in WINDINGS:
        raise ValueError(f"port1 must be 'primary' or 'secondary', not {winding!r}")


def _check_reference(z0_ohm):
    if not (z0_ohm > 0 and math.isfinite(z0_ohm)):
        raise ValueError(f"a reference impedance must be positive and finite, not {z0_ohm!r}")


def model_response(params: TransformerParams, f_Hz, sweep: Sweep) -> np.ndarray:
    """The same sweep from rfmeas.model's closed form (the thing under test)."""
    f_Hz = np.asarray(f_Hz, dtype=float)
    if isinstance(sweep, OnePort):
        return circuit.reflection(params, f_Hz, sweep.port1, sweep.termination, sweep.z0_ohm)
    return circuit.s_matrix(params, f_Hz, sweep.port1, sweep.z0_port1_ohm, sweep.z0_port2_ohm)


def four_sweeps(z0_ohm: float = 50.0) -> dict[str, Sweep]:
    """The usual measurement set: primary open and short, secondary open, a two-port thru."""
    return {
        "pri_open": OnePort("primary", "open", z0_ohm),
        "pri_short": OnePort("primary", "short", z0_ohm),
        "sec_open": OnePort("secondary", "open", z0_ohm),
        "thru": TwoPort("primary", z0_ohm, z0_ohm),
    }
