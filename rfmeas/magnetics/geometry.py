"""Effective magnetic dimensions of a core (IEC 60205 core constants).

A core is reduced to its effective area Ae, effective path length le and the
core constant C1 = Σ l/A = le/Ae, so that A_L = µ0·µe/C1 for any shape.
Sizes are SI (metres) inside; the constructors take millimetres because that
is how cores are measured and specified.
"""

from __future__ import annotations

import logging
import math
from dataclasses import asdict, dataclass
from pathlib import Path

from ..errors import InputError

log = logging.getLogger(__name__)

_MM = 1e-3

SHAPES = ("toroid", "effective")
_SHAPE_KEYS = {
    "toroid": ("outer_diameter_mm", "inner_diameter_mm", "height_mm"),
    "effective": ("effective_area_mm2", "effective_length_mm"),
}


@dataclass(frozen=True)
class CoreGeometry:
    """A core's effective parameters, SI units.

    effective_area_m2    Ae = C1/C2
    effective_length_m   le = C1²/C2
    core_constant_per_m  C1 = Σ l/A = le/Ae (A_L = µ0·µe/C1)
    effective_volume_m3  Ve = C1³/C2² = Ae·le
    """

    shape: str
    effective_area_m2: float
    effective_length_m: float
    core_constant_per_m: float
    effective_volume_m3: float
    description: str

    def to_dict(self) -> dict:
        return asdict(self)


SIZE_RANGE_MM = (1e-3, 1e5)
"""Sizes (mm, or mm² for areas) outside this are typing errors, and would overflow the formulas."""


def _require_positive(name: str, value, path=None) -> float:
    """A finite positive real number, or an InputError naming `name`."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(f"[core] {name} must be a number, not {type(value).__name__} {value!r}", path=path)
    value = float(value)
    if not math.isfinite(value) or value <= 0:
        raise InputError(f"[core] {name} must be a positive size, got {value:g}", path=path)
    if not SIZE_RANGE_MM[0] <= value <= SIZE_RANGE_MM[1]:
        raise InputError(f"[core] {name} = {value:g} is not a plausible core size "
                         f"({SIZE_RANGE_MM[0]:g} to {SIZE_RANGE_MM[1]:g} in its unit)", path=path)
    return value


def _from_constants(shape: str, c1_per_m: float, c2_per_m3: float, description: str) -> CoreGeometry:
    return CoreGeometry(
        shape=shape,
        effective_area_m2=c1_per_m / c2_per_m3,
        effective_length_m=c1_per_m**2 / c2_per_m3,
        core_constant_per_m=c1_per_m,
        effective_volume_m3=c1_per_m**3 / c2_per_m3**2,
        description=description,
    )


def toroid_geometry(outer_diameter_mm: float, inner_diameter_mm: float, height_mm: float,
                    path: str | Path | None = None) -> CoreGeometry:
    """Ring core of rectangular section, IEC 60205 ring-core formulas (sharp corners).

    With radii r1 < r2 and height h:
    C1 = 2π/(h·ln(r2/r1)),  C2 = 2π(1/r1 − 1/r2)/(h²·ln³(r2/r1)).
    The log form is exact for the 1/r field of a ring; the mean-diameter
    shortcut (le = π(OD+ID)/2, Ae = h(OD−ID)/2) overstates both.
    """
    od = _require_positive("outer_diameter_mm", outer_diameter_mm, path)
    id_ = _require_positive("inner_diameter_mm", inner_diameter_mm, path)
    h = _require_positive("height_mm", height_mm, path)
    if id_ >= od:
        raise InputError(
            f"[core] inner_diameter_mm ({id_:g}) must be smaller than outer_diameter_mm ({od:g})", path=path)
    r1, r2, h_m = id_ / 2 * _MM, od / 2 * _MM, h * _MM
    ln_ratio = math.log(r2 / r1)
    c1 = 2 * math.pi / (h_m * ln_ratio)
    c2 = 2 * math.pi * (1 / r1 - 1 / r2) / (h_m**2 * ln_ratio**3)
    return _from_constants("toroid", c1, c2, f"toroid {od:g} × {id_:g} × {h:g} mm (OD × ID × height)")


def effective_geometry(effective_area_mm2: float, effective_length_mm: float,
                       path: str | Path | None = None) -> CoreGeometry:
    """A core given by its datasheet effective area and path length."""
    area_m2 = _require_positive("effective_area_mm2", effective_area_mm2, path) * _MM**2
    length_m = _require_positive("effective_length_mm", effective_length_mm, path) * _MM
    c1 = length_m / area_m2
    c2 = length_m / area_m2**2
    return _from_constants("effective", c1, c2,
                           f"core with Ae = {area_m2 / _MM**2:g} mm², le = {length_m / _MM:g} mm")


def geometry_from_table(table: dict, path: str | Path | None = None) -> CoreGeometry:
    """Build a CoreGeometry from a manifest's `[core]` table; strict about keys and values."""
    if not isinstance(table, dict):
        raise InputError(f"[core] must be a table, not {type(table).__name__}", path=path)
    shape = table.get("shape")
    if shape is None:
        raise InputError(f"[core] needs 'shape' (one of {', '.join(SHAPES)})", path=path)
    if not isinstance(shape, str) or shape not in _SHAPE_KEYS:
        raise InputError(f"[core] shape {shape!r} is not known (use one of {', '.join(SHAPES)})", path=path)
    wanted = _SHAPE_KEYS[shape]
    unknown = sorted(set(table) - set(wanted) - {"shape"})
    if unknown:
        raise InputError(f"[core] unknown key(s) for shape {shape!r}: {', '.join(unknown)} "
                         f"(expected {', '.join(wanted)})", path=path)
    missing = [key for key in wanted if key not in table]
    if missing:
        raise InputError(f"[core] shape {shape!r} needs {', '.join(missing)}", path=path)
    values = [table[key] for key in wanted]
    builder = toroid_geometry if shape == "toroid" else effective_geometry
    geometry = builder(*values, path=path)
    log.debug("core from manifest: %s", geometry.description)
    return geometry
