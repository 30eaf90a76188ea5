"""Generic material classes of soft-magnetic cores, and which ones a measured core resembles.

The table ships as rfmeas/data/materials.toml; users extend it with their own
TOML file of the same layout (`--materials FILE` or RFMEAS_MATERIALS). The
match never names a brand: a class is a family and a typical permeability.

Matching. For each class the distance is the root sum of squares of

    d_µ  = |ln µi − c_µ| / (h_µ + tol_µ)      (c, h: centre and half-width of the
    d_fr = |ln fr − c_f| / (h_f + tol_f)       class range in ln units)
    d_S  = same for the Snoek product (µi − 1)·fr, when the family has one

where tol is a factor of 1.5 (µi), 2 (fr, Snoek) widened by the measurement's
own relative uncertainty. A DC-resistance hint that contradicts the class
adds RESISTIVITY_PENALTY. Scores exp(−d²/2) normalised over all classes give
the confidence number; the words follow the best class's distance.
"""

from __future__ import annotations

import logging
import math
import os
import re
from dataclasses import dataclass
from pathlib import Path

from .errors import InputError
from .io.strict import check_keys, parse_toml

log = logging.getLogger(__name__)

ENV_VARIABLE = "RFMEAS_MATERIALS"
RESISTIVITY = ("conductive", "insulating")
RESISTIVITY_PENALTY = 3.0
_TOL_MU = math.log(1.5)
_TOL_FR = math.log(2.0)
_TOL_SNOEK = math.log(2.0)
_CLASS_KEYS = {"id": True, "name": True, "family": True, "initial_permeability": True,
               "relaxation_frequency_Hz": True, "resistivity": True, "source": True, "notes": False}
_FAMILY_KEYS = {"snoek_product_Hz": True, "source": True}
_ID = re.compile(r"[A-Za-z0-9_-]+")


@dataclass(frozen=True)
class MaterialClass:
    """One generic class: typical ranges of µi and relaxation frequency, resistivity, family."""

    id: str
    name: str
    family: str
    initial_permeability: tuple[float, float]
    relaxation_frequency_Hz: tuple[float, float]
    resistivity: str
    source: str
    notes: str = ""
    origin: str = "shipped"

    def to_dict(self) -> dict:
        return {"id": self.id, "name": self.name, "family": self.family,
                "initial_permeability": list(self.initial_permeability),
                "relaxation_frequency_Hz": list(self.relaxation_frequency_Hz),
                "resistivity": self.resistivity, "source": self.source, "notes": self.notes,
                "origin": self.origin}


@dataclass(frozen=True)
class MaterialFamily:
    """A family whose (µi − 1)·fr is roughly constant (Snoek's limit)."""

    name: str
    snoek_product_Hz: tuple[float, float]
    source: str

    def to_dict(self) -> dict:
        return {"name": self.name, "snoek_product_Hz": list(self.snoek_product_Hz), "source": self.source}


@dataclass(frozen=True)
class MaterialTable:
    classes: tuple[MaterialClass, ...]
    families: dict
    files: tuple[str, ...]

    def to_dict(self) -> dict:
        return {"classes": [c.to_dict() for c in self.classes],
                "families": {k: v.to_dict() for k, v in self.families.items()}, "files": list(self.files)}


@dataclass(frozen=True)
class Candidate:
    """A class and how far the measured core is from it."""

    material: MaterialClass
    distance: float
    score: float
    detail: dict

    def to_dict(self) -> dict:
        return {"id": self.material.id, "name": self.material.name, "family": self.material.family,
                "distance": float(self.distance), "score": float(self.score),
                "detail": {k: (None if v is None else float(v)) for k, v in self.detail.items()}}


@dataclass(frozen=True)
class MaterialMatch:
    """The nearest class, up to three alternatives and how sure the match is."""

    best: Candidate
    alternatives: tuple[Candidate, ...]
    confidence_level: str
    confidence: float
    dc_resistance: str | None
    explanation: str

    def to_dict(self) -> dict:
        return {"best": self.best.to_dict(), "alternatives": [a.to_dict() for a in self.alternatives],
                "confidence": {"level": self.confidence_level, "value": float(self.confidence)},
                "dc_resistance_hint": self.dc_resistance, "explanation": self.explanation,
                "note": "a generic class of material, not a brand or a catalogue material"}


# ---------------------------------------------------------------- loading

def _range(value, key: str, where: str, path) -> tuple[float, float]:
    if (not isinstance(value, list) or len(value) != 2
            or any(isinstance(v, bool) or not isinstance(v, (int, float)) for v in value)):
        raise InputError(f"{where}.{key} must be [low, high], two numbers", path)
    lo, hi = float(value[0]), float(value[1])
    if not (math.isfinite(lo) and math.isfinite(hi) and 0 < lo <= hi):
        raise InputError(f"{where}.{key} must be [low, high] with 0 < low ≤ high, not {value!r}", path)
    return lo, hi


def _text(table, key, where, path) -> str:
    value = table.get(key, "")
    if not isinstance(value, str):
        raise InputError(f"{where}.{key} must be a string", path)
    return value


def parse_materials(text: str, path, origin: str) -> tuple[list[MaterialClass], dict]:
    """Classes and families of one TOML text; strict: unknown keys raise InputError naming key and file."""
    doc = parse_toml(text, path)
    for key in doc:
        if key not in ("class", "family"):
            raise InputError(f"unknown key '{key}' (allowed: class, family)", path)
    families = {}
    family_tables = doc.get("family", {})
    if not isinstance(family_tables, dict):
        raise InputError("family must be tables ([family.NAME])", path)
    for name, table in family_tables.items():
        where = f"[family.{name}]"
        check_keys(table, _FAMILY_KEYS, where, path, [k for k, needed in _FAMILY_KEYS.items() if needed])
        families[name] = MaterialFamily(name, _range(table["snoek_product_Hz"], "snoek_product_Hz", where, path),
                                        _text(table, "source", where, path))
    classes = []
    entries = doc.get("class", [])
    if not isinstance(entries, list):
        raise InputError("class must be an array of tables ([[class]])", path)
    for i, table in enumerate(entries, start=1):
        where = f"[[class]] {i}"
        check_keys(table, _CLASS_KEYS, where, path, [k for k, needed in _CLASS_KEYS.items() if needed])
        ident = table["id"]
        if not isinstance(ident, str) or not _ID.fullmatch(ident):
            raise InputError(f"{where}.id must be letters, digits, '-' or '_', not {ident!r}", path)
        where = f"[[class]] '{ident}'"
        resistivity = table["resistivity"]
        if resistivity not in RESISTIVITY:
            raise InputError(f"{where}.resistivity must be one of {', '.join(RESISTIVITY)}, not {resistivity!r}",
                             path)
        classes.append(MaterialClass(
            id=ident, name=_text(table, "name", where, path), family=_text(table, "family", where, path),
            initial_permeability=_range(table["initial_permeability"], "initial_permeability", where, path),
            relaxation_frequency_Hz=_range(table["relaxation_frequency_Hz"], "relaxation_frequency_Hz",
                                           where, path),
            resistivity=resistivity, source=_text(table, "source", where, path),
            notes=_text(table, "notes", where, path), origin=origin))
    ids = [c.id for c in classes]
    duplicated = sorted({i for i in ids if ids.count(i) > 1})
    if duplicated:
        raise InputError(f"class id(s) given twice: {', '.join(duplicated)}", path)
    return classes, families


def _read(path: Path) -> str:
    from .io.files import read_regular_file
    from .io.strict import decode_text

    return decode_text(read_regular_file(path, "material table"), path, "material table")


def load_materials(extra_file=None, use_environment: bool = True) -> MaterialTable:
    """The shipped table, extended by `extra_file` (or, if None, the file named by RFMEAS_MATERIALS)."""
    from importlib.resources import files

    shipped = files("rfmeas") / "data" / "materials.toml"
    classes, families = parse_materials(shipped.read_text(encoding="utf-8"), "rfmeas/data/materials.toml",
                                        "shipped")
    sources = ["shipped"]
    if extra_file is None and use_environment and os.environ.get(ENV_VARIABLE):
        extra_file = os.environ[ENV_VARIABLE]
    if extra_file is not None:
        path = Path(extra_file)
        extra_classes, extra_families = parse_materials(_read(path), path, str(path))
        by_id = {c.id: c for c in classes}
        for c in extra_classes:
            if c.id in by_id:
                log.info("%s: class %s replaces the shipped one", path, c.id)
            by_id[c.id] = c
        classes = list(by_id.values())
        families = {**families, **extra_families}
        sources.append(str(path))
    return MaterialTable(tuple(classes), families, tuple(sources))


# ---------------------------------------------------------------- matching

def _log_distance(value: float, rng: tuple[float, float], tolerance: float) -> float:
    centre = 0.5 * (math.log(rng[0]) + math.log(rng[1]))
    half = 0.5 * (math.log(rng[1]) - math.log(rng[0]))
    return abs(math.log(value) - centre) / (half + tolerance)


def _relative(stderr, value) -> float:
    if stderr is None or not math.isfinite(stderr) or value <= 0:
        return 0.0
    return min(stderr / value, 3.0)


def match_material(table: MaterialTable, mu_initial: float, mu_initial_stderr: float | None,
                   relaxation_frequency_Hz: float, relaxation_frequency_stderr_Hz: float | None,
                   dc_resistance: str | None = None) -> MaterialMatch:
    """Rank the table's classes by distance from the measured µi, fr and Snoek product."""
    if dc_resistance is not None and dc_resistance not in RESISTIVITY:
        raise InputError(f"DC-resistance hint must be one of {', '.join(RESISTIVITY)}, not {dc_resistance!r}")
    if not table.classes:
        raise InputError("the material table has no classes")
    if not (mu_initial > 0 and relaxation_frequency_Hz > 0):
        raise InputError("a material match needs a positive permeability and relaxation frequency")
    rel_mu = _relative(mu_initial_stderr, mu_initial)
    rel_fr = _relative(relaxation_frequency_stderr_Hz, relaxation_frequency_Hz)
    tol_mu = math.hypot(_TOL_MU, rel_mu)
    tol_fr = math.hypot(_TOL_FR, rel_fr)
    tol_snoek = math.hypot(_TOL_SNOEK, rel_mu, rel_fr)
    snoek = max(mu_initial - 1.0, 1e-6) * relaxation_frequency_Hz
    candidates = []
    for c in table.classes:
        d_mu = _log_distance(mu_initial, c.initial_permeability, tol_mu)
        d_fr = _log_distance(relaxation_frequency_Hz, c.relaxation_frequency_Hz, tol_fr)
        family = table.families.get(c.family)
        d_snoek = None if family is None else _log_distance(snoek, family.snoek_product_Hz, tol_snoek)
        penalty = RESISTIVITY_PENALTY if dc_resistance not in (None, c.resistivity) else 0.0
        distance = math.sqrt(d_mu**2 + d_fr**2 + (d_snoek or 0.0) ** 2) + penalty
        candidates.append(Candidate(c, distance, math.exp(-0.5 * distance**2),
                                    {"permeability": d_mu, "relaxation_frequency": d_fr, "snoek": d_snoek,
                                     "resistivity_penalty": penalty}))
    candidates.sort(key=lambda k: k.distance)
    total = sum(k.score for k in candidates)
    best = candidates[0]
    confidence = best.score / total if total > 0 else 0.0
    if best.distance <= 1.0 and confidence >= 0.5:
        level = "likely"
    elif best.distance <= 2.0:
        level = "possible"
    else:
        level = "poor match"
    words = {"likely": "the measured core lies within the class's typical ranges and clearly nearer it than "
                       "any other class",
             "possible": "the core is near this class, but close to others too or outside its typical ranges",
             "poor match": "no class in the table is near; extend the table with your own classes"}[level]
    explanation = (f"µi {mu_initial:.4g}, fr {relaxation_frequency_Hz:.3g} Hz, (µi − 1)·fr {snoek:.3g} Hz: "
                   f"{words}")
    if dc_resistance is not None:
        explanation += f"; DC-resistance hint '{dc_resistance}' applied"
    return MaterialMatch(best, tuple(candidates[1:4]), level, confidence, dc_resistance, explanation)
