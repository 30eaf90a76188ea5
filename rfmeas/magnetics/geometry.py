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

import numpy as np

from rfmeas.errors import InputError

log = logging.getLogger(__name__)

_MM = 1e-3

SHAPES = ("toroid", "effective", "two-hole", "rod")
_SHAPE_KEYS = {
    "toroid": ("outer_diameter_mm", "inner_diameter_mm", "height_mm"),
    "effective": ("effective_area_mm2", "effective_length_mm"),
    "two-hole": ("width_mm", "height_mm", "length_mm", "hole_diameter_mm", "hole_spacing_mm"),
    "rod": ("diameter_mm", "length_mm"),
}


@dataclass(frozen=True)
class CoreGeometry:
    """A core's effective parameters, SI units.

    effective_area_m2    Ae = C1/C2
    effective_length_m   le = C1²/C2
    core_constant_per_m  C1 = Σ l/A = le/Ae (A_L = µ0·µe/C1)
    effective_volume_m3  Ve = C1³/C2² = Ae·le
    demagnetising_factor Nd of an open core (a rod), None for a closed one: the
                         permeability such a core shows is the apparent one,
                         µapp = µ/(1 + Nd·(µ − 1)) (see material_permeability)
    """

    shape: str
    effective_area_m2: float
    effective_length_m: float
    core_constant_per_m: float
    effective_volume_m3: float
    description: str
    demagnetising_factor: float | None = None

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


def _from_constants(shape: str, c1_per_m: float, c2_per_m3: float, description: str,
                    demagnetising_factor: float | None = None) -> CoreGeometry:
    return CoreGeometry(
        shape=shape,
        effective_area_m2=c1_per_m / c2_per_m3,
        effective_length_m=c1_per_m**2 / c2_per_m3,
        core_constant_per_m=c1_per_m,
        effective_volume_m3=c1_per_m**3 / c2_per_m3**2,
        description=description,
        demagnetising_factor=demagnetising_factor,
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


# ---------------------------------------------------------------- two-hole core

_GAUSS_NODES, _GAUSS_WEIGHTS = np.polynomial.legendre.leggauss(48)


def hole_in_rectangle_constants(edge_distances_m, hole_radius_m: float, length_m: float) -> tuple[float, float]:
    """C1 (1/m) and C2 (1/m³) of the flux path around a round hole in a rectangular section.

    Derived (the IEC 60205 ring-core sum Σ l/A taken sector by sector): the
    section around the hole is cut into thin angular sectors dθ, each a piece
    of ring from the hole radius r1 out to the distance ρ(θ) at which the ray
    from the hole's centre leaves the rectangle. The flux goes through the
    sectors in series; inside one sector the 1/r field of a ring gives
    dC1 = dθ/(ℓ·ln(ρ/r1)) and dC2 = (1/r1 − 1/ρ)·dθ/(ℓ²·ln³(ρ/r1)), so

        C1 = ∮ dθ / (ℓ·ln(ρ(θ)/r1)),   C2 = ∮ (1/r1 − 1/ρ(θ)) dθ / (ℓ²·ln³(ρ(θ)/r1)).

    For a round outer edge (ρ = r2) these are the ring-core formulas of
    toroid_geometry. For a rectangle the sum lets flux fill the corners freely,
    so it credits a little too much path section: against a two-dimensional
    field solution C1 comes out 2–11 % low (median 6 %) over 300 random
    sections (tests/bench/test_two_hole_accuracy.py), so A_L per µ is that much
    high and a µ measured through it that much low; rounded corners of real
    cores narrow the gap. `edge_distances_m` are the four distances
    from the hole's centre to the sides (left, right, bottom, top), each above
    the hole radius.
    """
    d_left, d_right, d_bottom, d_top = (float(d) for d in edge_distances_m)
    r1 = float(hole_radius_m)
    if not (r1 > 0 and min(d_left, d_right, d_bottom, d_top) > r1 and length_m > 0):
        raise InputError("a hole in a rectangle needs every side farther from its centre than its radius, "
                         "and a positive length")
    corners = [math.atan2(d_top, d_right), math.pi - math.atan2(d_top, d_left),
               math.pi + math.atan2(d_bottom, d_left), 2 * math.pi - math.atan2(d_bottom, d_right)]
    # between consecutive corner directions the ray leaves through one side, whose normal
    # points at angle `normal` and lies at distance D: ρ(θ) = D / cos(θ − normal)
    pieces = [(corners[3] - 2 * math.pi, corners[0], 0.0, d_right),
              (corners[0], corners[1], math.pi / 2, d_top),
              (corners[1], corners[2], math.pi, d_left),
              (corners[2], corners[3], 3 * math.pi / 2, d_bottom)]
    c1_sum = c2_sum = 0.0
    for start, stop, normal, distance in pieces:
        theta = 0.5 * (stop - start) * _GAUSS_NODES + 0.5 * (stop + start)
        weight = 0.5 * (stop - start) * _GAUSS_WEIGHTS
        rho = distance / np.cos(theta - normal)
        log_ratio = np.log(rho / r1)
        c1_sum += float(np.sum(weight / log_ratio))
        c2_sum += float(np.sum(weight * (1 / r1 - 1 / rho) / log_ratio**3))
    return c1_sum / length_m, c2_sum / length_m**2


def two_hole_geometry(width_mm: float, height_mm: float, length_mm: float, hole_diameter_mm: float,
                      hole_spacing_mm: float, path: str | Path | None = None) -> CoreGeometry:
    """Two-hole (binocular) core: a block width × height × length with two equal round holes along its length.

    A turn goes in through one hole and out through the other, so its flux
    circles each hole, in opposite senses, and the two add up in the web between
    the holes. By that symmetry no flux crosses the centre line between the
    holes: the core is two identical paths, each round one hole in a half block
    (width/2 × height), both linked by every turn (derived). Their permeances
    add, so C1 = C1_half/2 and C2 = C2_half/4 (one path of twice the section);
    each half's constants come from hole_in_rectangle_constants. The holes sit
    at hole_spacing/2 either side of the centre, half-way up the height.
    """
    w = _require_positive("width_mm", width_mm, path)
    h = _require_positive("height_mm", height_mm, path)
    length = _require_positive("length_mm", length_mm, path)
    d = _require_positive("hole_diameter_mm", hole_diameter_mm, path)
    s = _require_positive("hole_spacing_mm", hole_spacing_mm, path)
    if s <= d:
        raise InputError(f"[core] hole_spacing_mm ({s:g}) must exceed hole_diameter_mm ({d:g}): "
                         "the holes would touch", path=path)
    if w - s <= d:
        raise InputError(f"[core] width_mm ({w:g}) must exceed hole_spacing_mm + hole_diameter_mm "
                         f"({s + d:g}): the holes would break through the sides", path=path)
    if h <= d:
        raise InputError(f"[core] height_mm ({h:g}) must exceed hole_diameter_mm ({d:g})", path=path)
    distances = ((w - s) / 2 * _MM, s / 2 * _MM, h / 2 * _MM, h / 2 * _MM)
    c1_half, c2_half = hole_in_rectangle_constants(distances, d / 2 * _MM, length * _MM)
    return _from_constants("two-hole", c1_half / 2, c2_half / 4,
                           f"two-hole core {w:g} × {h:g} × {length:g} mm (width × height × length), "
                           f"holes {d:g} mm at {s:g} mm spacing")


# ---------------------------------------------------------------- rod

def prolate_demagnetising_factor(aspect_ratio: float) -> float:
    """Axial demagnetising factor of a prolate spheroid of length/diameter m ≥ 1 (SI, N_x + N_y + N_z = 1).

    Osborn, "Demagnetizing factors of the general ellipsoid", Phys. Rev. 67,
    351 (1945): Nd = (m/√(m²−1)·ln(m + √(m²−1)) − 1)/(m² − 1); 1/3 for a
    sphere, about (ln 2m − 1)/m² for a long one. Written with the
    eccentricity e = √(1 − 1/m²) as Nd = (1 − e²)(atanh e − e)/e³, with its
    series near the sphere.
    """
    m = float(aspect_ratio)
    if not math.isfinite(m) or m < 1:
        raise InputError(f"a prolate spheroid needs length/diameter ≥ 1, got {m:g}")
    e2 = 1 - 1 / m**2
    e = math.sqrt(e2)
    if e < 1e-2:  # atanh e − e = e³/3 + e⁵/5 + e⁷/7 + …, the closed form cancels here
        return (1 - e2) * (1 / 3 + e2 / 5 + e2**2 / 7 + e2**3 / 9)
    return (1 - e2) * (math.atanh(e) - e) / e**3


def apparent_permeability(mu, demagnetising_factor: float):
    """µapp = µ/(1 + Nd·(µ − 1)): the permeability an open core of factor Nd shows (µ real or complex)."""
    mu = np.asarray(mu)
    result = mu / (1 + demagnetising_factor * (mu - 1))
    return result.item() if result.ndim == 0 else result


def material_permeability(mu_apparent, demagnetising_factor: float):
    """The material's µ from the apparent µapp of an open core: µ = µapp·(1 − Nd)/(1 − Nd·µapp).

    The inverse of apparent_permeability. Where Re(µapp) reaches the shape's
    limit 1/Nd the material µ cannot be told (NaN); near it, relative errors
    of µapp are multiplied by material_permeability_gain.
    """
    mu_app = np.asarray(mu_apparent)
    nd = float(demagnetising_factor)
    denominator = 1 - nd * mu_app
    with np.errstate(divide="ignore", invalid="ignore"):
        result = np.where(np.real(denominator) > 0, mu_app * (1 - nd) / denominator, np.nan)
    return result.item() if result.ndim == 0 else result


def material_permeability_gain(mu_apparent, demagnetising_factor: float):
    """d ln µ / d ln µapp = 1/(1 − Nd·µapp): how much a rod magnifies relative errors of µapp (µ real)."""
    mu_app = np.asarray(mu_apparent, dtype=float)
    denominator = 1 - float(demagnetising_factor) * mu_app
    with np.errstate(divide="ignore"):
        result = np.where(denominator > 0, 1 / denominator, np.inf)
    return result.item() if result.ndim == 0 else result


def rod_geometry(diameter_mm: float, length_mm: float, path: str | Path | None = None) -> CoreGeometry:
    """Round rod with a winding along it: Ae = πd²/4, le = length, and the rod's demagnetising factor.

    L = µ0·µapp·N²·Ae/le for a winding spread over the rod: the permeability
    this geometry yields is the apparent one; material_permeability turns it
    into the material's µ with Nd of the prolate spheroid of the same
    length/diameter (prolate_demagnetising_factor). A cylinder is not a
    spheroid and a short coil in the middle sees more than the average: the
    tables of rods' ballistic factors (Bozorth and Chapin; from memory) differ
    from the spheroid's by tens of percent, so treat µ from a rod as an estimate.
    """
    d = _require_positive("diameter_mm", diameter_mm, path)
    length = _require_positive("length_mm", length_mm, path)
    if length < d:
        raise InputError(f"[core] a rod's length_mm ({length:g}) must be at least its diameter_mm ({d:g})",
                         path=path)
    area_m2 = math.pi * (d * _MM) ** 2 / 4
    length_m = length * _MM
    return _from_constants("rod", length_m / area_m2, length_m / area_m2**2,
                           f"rod {d:g} mm × {length:g} mm (diameter × length)",
                           demagnetising_factor=prolate_demagnetising_factor(length / d))


_BUILDERS = {"toroid": toroid_geometry, "effective": effective_geometry, "two-hole": two_hole_geometry,
             "rod": rod_geometry}


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
    geometry = _BUILDERS[shape](*values, path=path)
    log.debug("core from manifest: %s", geometry.description)
    return geometry
