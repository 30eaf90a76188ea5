"""Generic material classes of soft-magnetic cores, and which ones a measured core resembles.

The table ships as rfmeas/data/materials.toml; users extend it with their own
TOML file of the same layout (`--materials FILE` or RFMEAS_MATERIALS). The
match never names a brand: a class is a family and a typical permeability.

Matching uses three things together: the plateau µi, the frequency of the µ″
peak and the DC-resistance hint. For each class the distance is the root sum
of squares of

    d_µ  = |ln µi − c_µ| / (h_µ + tol_µ)      (c, h: centre and half-width of the
    d_fp = |ln fp − c_f| / (h_f + tol_f)       class range in ln units)
    d_S  = same for the Snoek product (µi − 1)·fp, when the family has one

where tol is a factor of 1.5 (µi), 2 (fp, Snoek) widened by the measurement's
own relative uncertainty. When the peak is not inside the sweep only a bound
is known (above the top, or below the bottom): d_fp and d_S are then the
distance to the nearest value the bound allows. A DC-resistance hint that
contradicts the class adds RESISTIVITY_PENALTY. Scores exp(−d²/2) normalised
over all classes give the confidence number; the words follow the best
class's distance, and are capped (never "likely") when the fit is poor, the
peak is not seen, the hint contradicts the class, or a class of the other
resistivity is nearly as near and no hint was given.
"""

from __future__ import annotations

import logging
import math
import os
import re
from dataclasses import dataclass
from pathlib import Path

from rfmeas.errors import InputError
from rfmeas.io.strict import check_keys, parse_toml

log = logging.getLogger(__name__)

ENV_VARIABLE = "RFMEAS_MATERIALS"
RESISTIVITY = ("conductive", "insulating")
RESISTIVITY_PENALTY = 3.0
_TOL_MU = math.log(1.5)
_TOL_FR = math.log(2.0)
_TOL_SNOEK = math.log(2.0)
_CLASS_KEYS = {"id": True, "name": True, "family": True, "initial_permeability": True,
               "peak_frequency_Hz": False, "relaxation_frequency_Hz": False, "resistivity": True, "source": True,
               "notes": False}
_OLD_PEAK_KEY = "relaxation_frequency_Hz"  # the earlier spelling of peak_frequency_Hz, still read
_FAMILY_KEYS = {"snoek_product_Hz": True, "source": True}
_ID = re.compile(r"[A-Za-z0-9_-]+")


@dataclass(frozen=True)
class MaterialClass:
    """One generic class: typical ranges of µi and of the µ″ peak frequency, resistivity, family."""

    id: str
    name: str
    family: str
    initial_permeability: tuple[float, float]
    peak_frequency_Hz: tuple[float, float]
    resistivity: str
    source: str
    notes: str = ""
    origin: str = "shipped"

    def to_dict(self) -> dict:
        return {"id": self.id, "name": self.name, "family": self.family,
                "initial_permeability": list(self.initial_permeability),
                "peak_frequency_Hz": list(self.peak_frequency_Hz),
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
    """The nearest class, up to three alternatives and how sure the match is.

    confidence_level  "likely" | "possible" | "poor match" | "not determined"
    peak_evidence     how the µ″ peak entered: "measured", "above the sweep",
                      "below the sweep" or "not known"
    limits            why the level was held below what the distances allow
    """

    best: Candidate
    alternatives: tuple[Candidate, ...]
    confidence_level: str
    confidence: float
    dc_resistance: str | None
    explanation: str
    peak_evidence: str = "measured"
    limits: tuple[str, ...] = ()
    fit_is_poor: bool = False

    def to_dict(self) -> dict:
        return {"best": self.best.to_dict(), "alternatives": [a.to_dict() for a in self.alternatives],
                "confidence": {"level": self.confidence_level, "value": float(self.confidence)},
                "dc_resistance_hint": self.dc_resistance, "explanation": self.explanation,
                "peak_evidence": self.peak_evidence, "limits": list(self.limits),
                "fit_is_poor": self.fit_is_poor,
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


def _peak_range(table, where, path) -> tuple[float, float]:
    given = [key for key in ("peak_frequency_Hz", _OLD_PEAK_KEY) if key in table]
    if not given:
        raise InputError(f"{where} needs 'peak_frequency_Hz'", path)
    if len(given) == 2:
        raise InputError(f"{where} gives both peak_frequency_Hz and {_OLD_PEAK_KEY} (its older name): keep one",
                         path)
    return _range(table[given[0]], given[0], where, path)


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
            peak_frequency_Hz=_peak_range(table, where, path),
            resistivity=resistivity, source=_text(table, "source", where, path),
            notes=_text(table, "notes", where, path), origin=origin))
    ids = [c.id for c in classes]
    duplicated = sorted({i for i in ids if ids.count(i) > 1})
    if duplicated:
        raise InputError(f"class id(s) given twice: {', '.join(duplicated)}", path)
    return classes, families


def _read(path: Path) -> str:
    from rfmeas.io.files import read_regular_file
    from rfmeas.io.strict import decode_text

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

LEVELS = ("likely", "possible", "poor match", "not determined")
_CAPPED_CONFIDENCE = 0.5


def _centre_half(rng: tuple[float, float]) -> tuple[float, float]:
    return 0.5 * (math.log(rng[0]) + math.log(rng[1])), 0.5 * (math.log(rng[1]) - math.log(rng[0]))


def _log_distance(value: float, rng: tuple[float, float], tolerance: float, bound: str | None = None) -> float:
    """Distance of ln(value) from the class range, in units of its half-width plus tolerance.

    bound "above": only value < true is known (the true one lies above `value`); "below": the
    reverse. The distance is then that of the nearest value the bound allows.
    """
    centre, half = _centre_half(rng)
    offset = math.log(value) - centre
    if bound == "above":
        offset = max(offset, 0.0)
    elif bound == "below":
        offset = min(offset, 0.0)
    return abs(offset) / (half + tolerance)


def _relative(stderr, value) -> float:
    if stderr is None or not math.isfinite(stderr) or value <= 0:
        return 0.0
    return min(stderr / value, 3.0)


def _optional_positive(name: str, value) -> float | None:
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) or value <= 0:
        raise InputError(f"a material match needs {name} positive and finite, not {value!r}")
    return float(value)


def _peak_evidence(peak_Hz, bottom_Hz, top_Hz) -> tuple[str, float | None, str | None]:
    """(evidence, frequency used, bound) for the µ″ peak against the sweep's span."""
    if peak_Hz is None:
        return ("above the sweep", top_Hz, "above") if top_Hz is not None else ("not known", None, None)
    if top_Hz is not None and peak_Hz > top_Hz:
        return "above the sweep", top_Hz, "above"
    if bottom_Hz is not None and peak_Hz < bottom_Hz:
        return "below the sweep", bottom_Hz, "below"
    return "measured", peak_Hz, None


def match_material(table: MaterialTable, mu_initial: float, mu_initial_stderr: float | None,
                   peak_frequency_Hz: float | None, peak_frequency_stderr_Hz: float | None,
                   dc_resistance: str | None = None, fit_is_poor: bool = False,
                   sweep_top_Hz: float | None = None, sweep_bottom_Hz: float | None = None) -> MaterialMatch:
    """Rank the table's classes by distance from the measured plateau µi, µ″ peak and Snoek product.

    `peak_frequency_Hz` None means no peak inside the sweep: with `sweep_top_Hz`
    the peak is taken to lie above the sweep's top; without it the peak is not
    used at all. A peak outside [sweep_bottom_Hz, sweep_top_Hz] is a model's
    extrapolation and enters only as that bound; a peak below the sweep also
    means the µi plateau was not seen, and then no class is named
    ("not determined"). `fit_is_poor` and a contradicting or missing DC hint
    hold the level at "possible" at best, and the reasons are in `limits`.
    """
    if dc_resistance is not None and dc_resistance not in RESISTIVITY:
        raise InputError(f"DC-resistance hint must be one of {', '.join(RESISTIVITY)}, not {dc_resistance!r}")
    if not table.classes:
        raise InputError("the material table has no classes")
    mu_initial = _optional_positive("the initial permeability", mu_initial)
    if mu_initial is None:
        raise InputError("a material match needs the initial permeability")
    peak = _optional_positive("the µ″ peak frequency", peak_frequency_Hz)
    top = _optional_positive("the sweep's top frequency", sweep_top_Hz)
    bottom = _optional_positive("the sweep's bottom frequency", sweep_bottom_Hz)
    evidence, f_used, bound = _peak_evidence(peak, bottom, top)
    rel_mu = _relative(mu_initial_stderr, mu_initial)
    rel_fr = _relative(peak_frequency_stderr_Hz, peak) if evidence == "measured" else 0.0
    tol_mu = math.hypot(_TOL_MU, rel_mu)
    tol_fr = math.hypot(_TOL_FR, rel_fr)
    tol_snoek = math.hypot(_TOL_SNOEK, rel_mu, rel_fr)
    snoek = None if f_used is None else max(mu_initial - 1.0, 1e-6) * f_used
    candidates = []
    for c in table.classes:
        d_mu = _log_distance(mu_initial, c.initial_permeability, tol_mu)
        d_fr = None if f_used is None else _log_distance(f_used, c.peak_frequency_Hz, tol_fr, bound)
        family = table.families.get(c.family)
        d_snoek = (None if family is None or snoek is None
                   else _log_distance(snoek, family.snoek_product_Hz, tol_snoek, bound))
        penalty = RESISTIVITY_PENALTY if dc_resistance not in (None, c.resistivity) else 0.0
        distance = math.sqrt(d_mu**2 + (d_fr or 0.0) ** 2 + (d_snoek or 0.0) ** 2) + penalty
        candidates.append(Candidate(c, distance, math.exp(-0.5 * distance**2),
                                    {"permeability": d_mu, "peak_frequency": d_fr, "snoek": d_snoek,
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
    limits = _limits(best, candidates, evidence, dc_resistance, fit_is_poor)
    if evidence == "below the sweep":
        level = "not determined"
    elif limits and level == "likely":
        level = "possible"
    if limits:
        confidence = min(confidence, _CAPPED_CONFIDENCE)
    return MaterialMatch(best, tuple(candidates[1:4]), level, confidence, dc_resistance,
                         _explain(level, mu_initial, evidence, f_used, snoek, dc_resistance, limits),
                         evidence, tuple(limits), bool(fit_is_poor))


def _limits(best: Candidate, candidates, evidence: str, dc_resistance, fit_is_poor: bool) -> list[str]:
    """Why the words must stay below "likely" (empty when nothing holds them back)."""
    limits = []
    if fit_is_poor:
        limits.append("the fit is poor (its misfit is far above the measurement's error), so µi and the µ″ "
                      "peak it gives may be wrong")
    if evidence == "below the sweep":
        limits.append("the µ″ peak lies below the sweep, so the sweep never shows the µi plateau: µi is an "
                      "extrapolation, not a measurement; sweep lower or wind more turns")
    elif evidence == "not known":
        limits.append("no µ″ peak inside the sweep and no sweep limit given, so only µi was compared")
    if dc_resistance is not None and best.material.resistivity != dc_resistance:
        limits.append(f"the nearest class is {best.material.resistivity} but the core measured {dc_resistance}")
    if dc_resistance is None:
        other = next((k for k in candidates[1:] if k.material.resistivity != best.material.resistivity), None)
        if other is not None and other.distance <= best.distance + 1.0:
            limits.append(f"{other.material.name} ({other.material.resistivity}) is nearly as near; an ohmmeter "
                          "across the bare core tells them apart (--dc-resistance)")
    return limits


def _explain(level, mu_initial, evidence, f_used, snoek, dc_resistance, limits) -> str:
    words = {"likely": "the measured core lies within the class's typical ranges and clearly nearer it than "
                       "any other class",
             "possible": "the core is near this class, but close to others too, outside its typical ranges, "
                         "or the evidence is incomplete",
             "poor match": "no class in the table is near; extend the table with your own classes",
             "not determined": "no class is named"}[level]
    if evidence == "measured":
        peak = f"µ″ peak {f_used:.3g} Hz, (µi − 1)·fp {snoek:.3g} Hz"
    elif evidence == "above the sweep":
        peak = f"µ″ peak above the sweep's top ({f_used:.3g} Hz), (µi − 1)·fp above {snoek:.3g} Hz"
    elif evidence == "below the sweep":
        peak = f"µ″ peak below the sweep's bottom ({f_used:.3g} Hz)"
    else:
        peak = "µ″ peak not known"
    text = f"µi {mu_initial:.4g}, {peak}: {words}"
    if dc_resistance is not None:
        text += f"; DC-resistance hint '{dc_resistance}' applied"
    if limits:
        text += "; held back because " + "; ".join(limits)
    return text
