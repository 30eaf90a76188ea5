"""The two-winding equivalent circuit: parameters and its pure, vectorised evaluation."""

from rfmeas.model.params import PARAMETER_NAMES, TransformerParams
from rfmeas.model.circuit import (
    admittance_matrix,
    input_impedance,
    reflection,
    s_matrix,
)
from rfmeas.model.termination import Termination

__all__ = [
    "PARAMETER_NAMES",
    "TransformerParams",
    "admittance_matrix",
    "input_impedance",
    "reflection",
    "s_matrix",
    "Termination",
]
