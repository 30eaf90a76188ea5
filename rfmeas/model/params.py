"""Parameters of the two-winding equivalent circuit (coupled-inductor form).

The terminals determine L1, L2, k uniquely; the T-model view (Lm, Ll1, Ll2,
ideal 1:n) is derived with the proportional leakage split (Ll1 = L1(1-k),
Ll2 = L2(1-k), Lm = k L1), a convention the terminals cannot confirm.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

PARAMETER_NAMES = (
    "L1_H", "L2_H", "k", "R1_ohm", "R2_ohm", "Rc_ohm", "C1_F", "C2_F", "C12_F",
)


CORE_LOSS_PLACEMENTS = ("magnetizing", "primary")
"""Where the core-loss resistance sits: across the magnetising branch, or across all of L1."""

@dataclass(frozen=True)
class TransformerParams:
    """Lumped model of a small transformer, SI units.

    L1_H, L2_H   open-circuit self-inductance of primary and secondary
    k            coupling coefficient, 0 < k < 1; M = k sqrt(L1 L2)
    R1_ohm       series resistance of the primary winding
    R2_ohm       series resistance of the secondary winding
    Rc_ohm       core-loss resistance across the magnetising branch (primary side);
                 math.inf for a lossless core
    C1_F         capacitance across the primary terminals
    C2_F         capacitance across the secondary terminals
    C12_F        interwinding capacitance between the two hot terminals
    polarity     +1 when the secondary's hot terminal is in phase with the primary's
                 (dotted ends both hot), -1 for an inverting connection; not fitted,
                 decided from the data
    core_loss    where Rc sits: "magnetizing" (across Lm, the usual model) or
                 "primary" (across the whole primary inductance, outside the leakage);
                 the fit takes the second only when the sweeps show the need
    """

    L1_H: float
    L2_H: float
    k: float
    R1_ohm: float = 0.0
    R2_ohm: float = 0.0
    Rc_ohm: float = math.inf
    C1_F: float = 0.0
    C2_F: float = 0.0
    C12_F: float = 0.0
    polarity: int = 1
    core_loss: str = "magnetizing"

    def __post_init__(self):
        if not (self.L1_H > 0 and self.L2_H > 0):
            raise ValueError("L1_H and L2_H must be positive")
        if not (0.0 < self.k < 1.0):
            raise ValueError("k must lie strictly between 0 and 1")
        for name in ("R1_ohm", "R2_ohm", "C1_F", "C2_F", "C12_F"):
            if getattr(self, name) < 0:
                raise ValueError(f"{name} must not be negative")
        if self.polarity not in (1, -1):
            raise ValueError("polarity must be +1 or -1")
        if self.core_loss not in CORE_LOSS_PLACEMENTS:
            raise ValueError("core_loss must be 'magnetizing' or 'primary'")
        if not self.Rc_ohm > 0:
            raise ValueError("Rc_ohm must be positive (math.inf for a lossless core)")

    # Derived quantities (referred to the primary unless named otherwise)
    @property
    def mutual_inductance_H(self) -> float:
        return self.k * math.sqrt(self.L1_H * self.L2_H)

    @property
    def leakage_inductance_H(self) -> float:
        """Short-circuit inductance seen at the primary: L1 (1 - k²)."""
        return self.L1_H * (1.0 - self.k ** 2)

    @property
    def effective_turns_ratio(self) -> float:
        """n = sqrt(L2/L1), secondary : primary."""
        return math.sqrt(self.L2_H / self.L1_H)

    @property
    def magnetizing_inductance_H(self) -> float:
        """Lm = k L1 (proportional leakage split)."""
        return self.k * self.L1_H

    @property
    def primary_leakage_H(self) -> float:
        return self.L1_H * (1.0 - self.k)

    @property
    def secondary_leakage_H(self) -> float:
        return self.L2_H * (1.0 - self.k)

    def replace(self, **changes) -> "TransformerParams":
        return replace(self, **changes)

    def values(self) -> tuple:
        """The nine circuit values in PARAMETER_NAMES order."""
        return tuple(getattr(self, name) for name in PARAMETER_NAMES)

    def to_dict(self) -> dict:
        data = {name: float(getattr(self, name)) for name in PARAMETER_NAMES}
        data["polarity"] = int(self.polarity)
        data["core_loss"] = self.core_loss
        return data
