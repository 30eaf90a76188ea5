"""Pure magnetics: core geometry (IEC 60205 constants), A_L and complex permeability."""

from rfmeas.magnetics.geometry import (
    CoreGeometry,
    apparent_permeability,
    effective_geometry,
    geometry_from_table,
    hole_in_rectangle_constants,
    material_permeability,
    material_permeability_gain,
    prolate_demagnetising_factor,
    rod_geometry,
    toroid_geometry,
    two_hole_geometry,
)
from rfmeas.magnetics.permeability import (
    AL_UNITS,
    MU0_H_per_m,
    al_to_nH_per_turn2,
    complex_permeability,
    debye_permeability,
    effective_permeability,
    gapped_effective_permeability,
    inductance_factor_H_per_turn2,
    inductance_from_permeability,
    nH_per_turn2_to,
)

__all__ = [
    "AL_UNITS", "CoreGeometry", "MU0_H_per_m", "al_to_nH_per_turn2", "apparent_permeability",
    "complex_permeability", "hole_in_rectangle_constants", "material_permeability",
    "material_permeability_gain", "prolate_demagnetising_factor", "rod_geometry", "two_hole_geometry",
    "debye_permeability", "effective_geometry", "effective_permeability",
    "gapped_effective_permeability", "geometry_from_table", "inductance_factor_H_per_turn2",
    "inductance_from_permeability", "nH_per_turn2_to", "toroid_geometry",
]
