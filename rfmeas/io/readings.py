"""LCR-meter readings typed in by hand or exported by a meter: a small CSV or TOML file.

Every reading becomes the series-equivalent impedance Z = Rs + jωLs of the
winding at its frequency, whatever form the file gives:

    Ls_Rs    series inductance and resistance      Z = Rs + jωLs
    Rs_Xs    series resistance and reactance       Z = Rs + jXs
    Lp_Rp    parallel inductance and resistance    Z = (1/Rp + 1/(jωLp))⁻¹
    Ls_Q     series inductance and Q = X/R         Z = ωLs/Q + jωLs
    Lp_Q     parallel inductance and Q = Rp/(ωLp)  Z = (1/(QωLp) + 1/(jωLp))⁻¹
    L_Q      inductance and Q (read as series)     as Ls_Q
    Z_theta  |Z| and phase in degrees              Z = |Z|·e^{jθ}

CSV: a header row names the columns with their units (`frequency_Hz, Ls_uH,
Rs_ohm`); values may carry an SI prefix (`10k`, `2.2u`) and the column's unit
(`10kHz`; a cell that names its unit stands for itself, a bare number is in
the column's unit). TOML: `[[reading]]` tables with the same names as keys; the form
follows from the keys, or is declared once (`form = "Ls_Rs"` at the top) or
per reading. Readings of different forms need a declaration on each reading.

Strict: unknown columns or keys, missing or non-finite values, non-positive
or repeated frequencies, oversized or non-regular files raise InputError
naming the file and the line.
"""

from __future__ import annotations

import logging
import math
import os
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from rfmeas.errors import InputError
from rfmeas.units import parse_engineering
from rfmeas.io.atomic import atomic_write_text
from rfmeas.io.strict import parse_toml

log = logging.getLogger(__name__)

MAX_READINGS_BYTES = 4_000_000
"""A file of readings is a few kB; anything above this is refused before it is read."""

FORMS = {
    "Ls_Rs": ("Ls", "Rs"),
    "Rs_Xs": ("Rs", "Xs"),
    "Lp_Rp": ("Lp", "Rp"),
    "Ls_Q": ("Ls", "Q"),
    "Lp_Q": ("Lp", "Q"),
    "L_Q": ("L", "Q"),
    "Z_theta": ("Z", "theta"),
}
"""Each form and the two quantities it is given by (besides the frequency)."""

_BASE_UNIT = {"frequency": "Hz", "Ls": "H", "Lp": "H", "L": "H", "Rs": "ohm", "Rp": "ohm", "Xs": "ohm",
              "Z": "ohm", "theta": "deg", "Q": ""}
_UNIT_SCALE = {
    "Hz": {"Hz": 1.0, "kHz": 1e3, "MHz": 1e6, "GHz": 1e9},
    "H": {"H": 1.0, "mH": 1e-3, "uH": 1e-6, "µH": 1e-6, "μH": 1e-6, "nH": 1e-9},
    "ohm": {"ohm": 1.0, "Ohm": 1.0, "Ω": 1.0, "mohm": 1e-3, "mOhm": 1e-3, "mΩ": 1e-3,
            "kohm": 1e3, "kOhm": 1e3, "kΩ": 1e3, "Mohm": 1e6, "MOhm": 1e6, "MΩ": 1e6},
    "deg": {"deg": 1.0},
    "": {"": 1.0},
}
_UNIT_WORDS = {"Hz": ("Hz",), "H": ("H",), "ohm": ("ohm", "Ohm", "Ω"), "deg": ("deg", "°"), "": ()}
_NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?\s*(?:[fpnuµμmkKMGT]|meg|Meg|MEG)?")
_TOML_TOP_KEYS = ("form", "reading", "notes")
_LOW_Q = 10.0


@dataclass(frozen=True, eq=False)
class LcrReadings:
    """Readings of one winding as series-equivalent impedance, sorted by frequency.

    f_Hz           frequencies, ascending, in hertz
    impedance_ohm  Rs + jωLs at each frequency, in ohms
    form           the form the file gave ("Ls_Rs", … or "mixed: A, B")
    path           the file read
    warnings       what was noticed but accepted (sorted rows, negative resistance, …)
    """

    f_Hz: np.ndarray
    impedance_ohm: np.ndarray
    form: str
    path: str
    warnings: tuple[str, ...] = ()
    raw_bytes: bytes | None = field(default=None, repr=False)  # the file as read, for a history store

    @property
    def series_inductance_H(self) -> np.ndarray:
        return self.impedance_ohm.imag / (2 * np.pi * self.f_Hz)

    @property
    def series_resistance_ohm(self) -> np.ndarray:
        return self.impedance_ohm.real

    def to_network(self, z0_ohm: float = 50.0):
        """The readings as a one-port scikit-rf Network (S11 against `z0_ohm`), for code that takes sweeps."""
        import skrf as rf

        frequency = rf.Frequency.from_f(self.f_Hz, unit="Hz")
        return rf.Network.from_z(self.impedance_ohm[:, None, None], frequency=frequency, z0=z0_ohm,
                                 name=Path(self.path).stem)

    def to_dict(self) -> dict:
        return {"path": self.path, "form": self.form, "frequency_Hz": self.f_Hz.tolist(),
                "series_resistance_ohm": self.series_resistance_ohm.tolist(),
                "series_inductance_H": self.series_inductance_H.tolist(), "warnings": list(self.warnings)}


# ---------------------------------------------------------------- conversions (pure)

def series_impedance(form: str, f_Hz, first, second) -> np.ndarray:
    """Series-equivalent impedance Rs + jωLs from the two quantities of `form` (SI units, θ in degrees)."""
    w = 2 * np.pi * np.asarray(f_Hz, dtype=float)
    a = np.asarray(first, dtype=float)
    b = np.asarray(second, dtype=float)
    if form == "Ls_Rs":
        return b + 1j * w * a
    if form == "Rs_Xs":
        return a + 1j * b
    if form in ("Ls_Q", "L_Q"):
        x = w * a
        return x / b + 1j * x
    if form in ("Lp_Rp", "Lp_Q"):
        xp = w * a
        rp = b if form == "Lp_Rp" else b * xp
        return 1 / (1 / rp + 1 / (1j * xp))
    if form == "Z_theta":
        return a * np.exp(1j * np.radians(b))
    raise ValueError(f"unknown form {form!r}")


def form_values(form: str, f_Hz, impedance_ohm) -> tuple[np.ndarray, np.ndarray]:
    """The two quantities of `form` (SI units, θ in degrees) for series impedances: the inverse of series_impedance."""
    w = 2 * np.pi * np.asarray(f_Hz, dtype=float)
    z = np.asarray(impedance_ohm, dtype=complex)
    if form == "Ls_Rs":
        return z.imag / w, z.real
    if form == "Rs_Xs":
        return z.real, z.imag
    if form in ("Ls_Q", "L_Q"):
        return z.imag / w, z.imag / z.real
    if form in ("Lp_Rp", "Lp_Q"):
        y = 1 / z
        lp = -1 / (w * y.imag)
        rp = 1 / y.real
        return lp, (rp if form == "Lp_Rp" else rp / (w * lp))
    if form == "Z_theta":
        return np.abs(z), np.degrees(np.angle(z))
    raise ValueError(f"unknown form {form!r}")


# ---------------------------------------------------------------- names and values

@dataclass(frozen=True)
class _Column:
    quantity: str   # "frequency" or a FORMS quantity
    scale: float    # to SI
    unit: str       # the base unit word ("Hz", "H", "ohm", "deg", "")
    name: str       # as written


def _column(name: str, where: str, path) -> _Column:
    """'Ls_uH' → quantity Ls in microhenries; anything unknown is an InputError naming it."""
    text = name.strip()
    quantity, _, unit = text.partition("_")
    if quantity in ("|Z|", "absZ"):
        quantity = "Z"
    if quantity not in _BASE_UNIT:
        raise InputError(f"{where}: unknown quantity '{text}' (known: frequency, Ls, Rs, Xs, Lp, Rp, L, Q, Z, "
                         "theta, each with its unit, e.g. frequency_Hz, Ls_uH, Rs_ohm, Q, Z_ohm, theta_deg)", path)
    base = _BASE_UNIT[quantity]
    scales = _UNIT_SCALE[base]
    if unit not in scales:
        wanted = ", ".join(f"{quantity}_{u}" if u else quantity for u in scales)
        raise InputError(f"{where}: '{text}' does not name a unit rfmeas knows (use {wanted})", path)
    return _Column(quantity, scales[unit], base, text)


def _number(raw, column: _Column, where: str, path) -> float:
    """One value: a number, or text with an optional SI prefix and the column's unit ('10k', '2.2uH').

    A cell that names its unit ('10 kHz') stands for itself; a bare number is in the column's unit.
    """
    if isinstance(raw, bool) or not isinstance(raw, (int, float, str)):
        raise InputError(f"{where}: {column.name} must be a number, not {type(raw).__name__}", path)
    if isinstance(raw, str):
        text = raw.strip()
        if not text:
            raise InputError(f"{where}: {column.name} is missing", path)
        scale = column.scale
        for word in _UNIT_WORDS[column.unit]:
            if text.endswith(word):
                text, scale = text[: -len(word)].rstrip(), 1.0
                break
        if not _NUMBER.fullmatch(text):
            raise InputError(f"{where}: {column.name} '{raw.strip()}' is not a number "
                             "(plain or with an SI prefix such as 10k, 2.2u)", path)
        try:
            value = parse_engineering(text)
        except InputError:
            raise InputError(f"{where}: {column.name} '{raw.strip()}' is not a finite number", path) from None
    else:
        value, scale = float(raw), column.scale
    if not math.isfinite(value * scale):
        raise InputError(f"{where}: {column.name} is not a finite number ({raw!r})", path)
    return value * scale


def _form_of_columns(columns: list, where: str, path) -> str:
    """The form of a header's (or a reading's) columns: a frequency and the two quantities of one form."""
    quantities = [c.quantity for c in columns]
    repeated = sorted({q for q in quantities if quantities.count(q) > 1})
    if repeated:
        raise InputError(f"{where}: {', '.join(repeated)} given twice", path)
    if "frequency" not in quantities:
        raise InputError(f"{where}: frequency_Hz is missing (every reading needs its frequency)", path)
    return _form_of([q for q in quantities if q != "frequency"], where, path)


def _form_of(quantities, where: str, path) -> str:
    """The form given by a set of quantities (without the frequency)."""
    wanted = set(quantities)
    for form, pair in FORMS.items():
        if set(pair) == wanted:
            return form
    given = ", ".join(sorted(wanted)) or "none"
    raise InputError(f"{where}: the quantities {given} are not one of the forms "
                     f"({'; '.join(' + '.join(p) for p in FORMS.values())})", path)


def _check_reading(form: str, f_Hz: float, a: float, b: float, where: str, path, notes: list) -> None:
    """Values that cannot be a reading are errors; odd but possible ones become notes."""
    if f_Hz <= 0:
        raise InputError(f"{where}: frequency must be positive, got {f_Hz:g} Hz", path)
    second = FORMS[form][1]
    if form in ("Lp_Rp", "Lp_Q") and a == 0:
        raise InputError(f"{where}: Lp = 0 is a short circuit, not a reading", path)
    if second in ("Rp", "Q") and b == 0:
        raise InputError(f"{where}: {second} = 0 is not a reading of a winding", path)
    if form == "Z_theta":
        if a <= 0:
            raise InputError(f"{where}: |Z| must be positive, got {a:g} ohm", path)
        if abs(b) > 180:
            raise InputError(f"{where}: theta must lie within ±180 degrees, got {b:g}", path)
        if abs(b) > 90:
            notes.append(f"{where}: theta {b:g}° means a negative resistance (meter compensation residue?)")
    elif second in ("Rs", "Rp", "Q") and b < 0:
        notes.append(f"{where}: negative {second} ({b:g}) kept as read (meter compensation residue?)")
    if form == "L_Q" and abs(b) < _LOW_Q:
        notes.append(f"{where}: L read as the series inductance; at Q = {b:g} the parallel reading "
                     f"would be {100 / b**2:.2g} % larger")


# ---------------------------------------------------------------- files

def _read_bytes(path: Path) -> bytes:
    from rfmeas.io.files import read_regular_file  # regular files only, bounded, non-blocking

    return read_regular_file(path, "file of LCR readings", MAX_READINGS_BYTES)


def _decode(raw: bytes, path: Path) -> str:
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError("not a UTF-8 text file (LCR readings are CSV or TOML text)", path) from None


def _split_row(line: str, delimiter: str) -> list[str]:
    return [cell.strip().strip('"').strip() for cell in line.split(delimiter)]


def _parse_csv(text: str, path) -> tuple[list, str, list]:
    """Rows (line, f_Hz, a, b, form) of a CSV text; one form for the whole file."""
    rows, notes = [], []
    header = None
    for number, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if not stripped or stripped.startswith("#"):
            continue
        where = f"line {number}"
        if header is None:
            delimiter = "," if "," in stripped else (";" if ";" in stripped else ("\t" if "\t" in stripped else ","))
            columns = [_column(name, where, path) for name in _split_row(stripped, delimiter)]
            header = (delimiter, columns, _form_of_columns(columns, where, path))
            continue
        delimiter, columns, form = header
        cells = _split_row(stripped, delimiter)
        if len(cells) != len(columns):
            raise InputError(f"{where}: {len(cells)} values, but the header names {len(columns)} columns", path)
        values = {c.quantity: _number(cell, c, where, path) for c, cell in zip(columns, cells)}
        first, second = FORMS[form]
        rows.append((where, values["frequency"], values[first], values[second], form))
    if header is None:
        raise InputError("no header row (e.g. 'frequency_Hz, Ls_H, Rs_ohm') and no readings", path)
    return rows, header[2], notes


def _reading_lines(text: str) -> list[int]:
    """Line numbers of the `[[reading]]` headers, to name a reading's line in messages."""
    pattern = re.compile(r"^\s*\[\[\s*reading\s*\]\]")
    return [n for n, line in enumerate(text.splitlines(), start=1) if pattern.match(line)]


def _parse_toml(text: str, path) -> tuple[list, str, list]:
    doc = parse_toml(text, path)  # refuses deep nesting too
    for key in doc:
        if key not in _TOML_TOP_KEYS:
            raise InputError(f"unknown key '{key}' (allowed at the top: {', '.join(_TOML_TOP_KEYS)})", path)
    declared = doc.get("form")
    if declared is not None and declared not in FORMS:
        raise InputError(f"form {declared!r} is not known (use one of {', '.join(FORMS)})", path)
    if not isinstance(doc.get("notes", ""), str):
        raise InputError("notes must be a string", path)
    entries = doc.get("reading")
    if not isinstance(entries, list) or not entries:
        raise InputError("no readings: give one [[reading]] table per frequency", path)
    lines = _reading_lines(text)
    rows, forms = [], []
    for i, entry in enumerate(entries):
        where = f"line {lines[i]}" if len(lines) == len(entries) else f"reading {i + 1}"
        where = f"{where} ([[reading]] {i + 1})"
        if not isinstance(entry, dict):
            raise InputError(f"{where}: a reading must be a table", path)
        own = entry.get("form")
        if own is not None and own not in FORMS:
            raise InputError(f"{where}: form {own!r} is not known (use one of {', '.join(FORMS)})", path)
        columns = {key: _column(key, where, path) for key in entry if key != "form"}
        given = _form_of_columns(list(columns.values()), where, path)
        expected = own or declared
        if expected is not None and given != expected:
            raise InputError(f"{where}: declared form {expected} needs {' and '.join(FORMS[expected])}, "
                             f"the reading gives {' and '.join(FORMS[given])}", path)
        forms.append((expected is not None, given, where))
        values = {c.quantity: _number(entry[key], c, where, path) for key, c in columns.items()}
        first, second = FORMS[given]
        rows.append((where, values["frequency"], values[first], values[second], given))
    used = sorted({given for _, given, _ in forms})
    if len(used) > 1:
        undeclared = [where for explicit, _, where in forms if not explicit]
        if undeclared:
            raise InputError(f"{undeclared[0]}: the readings mix forms ({', '.join(used)}); declare "
                             "form = \"...\" on each reading (or once at the top) to mix them", path)
    return rows, (used[0] if len(used) == 1 else "mixed: " + ", ".join(used)), []


def load_readings(path: str | os.PathLike) -> LcrReadings:
    """Read a CSV (.csv, .txt, .tsv) or TOML (.toml) file of LCR readings; any problem is an InputError."""
    path = Path(path)
    raw = _read_bytes(path)
    text = _decode(raw, path)
    suffix = path.suffix.lower()
    if suffix not in (".csv", ".txt", ".tsv", ".toml"):
        raise InputError("LCR readings must be a .csv, .txt, .tsv or .toml file", path)
    rows, form, notes = (_parse_toml if suffix == ".toml" else _parse_csv)(text, path)
    if not rows:
        raise InputError("the file holds no readings", path)
    seen = {}
    for where, f_Hz, a, b, row_form in rows:
        _check_reading(row_form, f_Hz, a, b, where, path, notes)
        if f_Hz in seen:
            raise InputError(f"{where}: frequency {f_Hz:g} Hz was already read ({seen[f_Hz]})", path)
        seen[f_Hz] = where
    f = np.array([r[1] for r in rows])
    z = np.empty(f.size, dtype=complex)
    for row_form in {r[4] for r in rows}:
        mask = np.array([r[4] == row_form for r in rows])
        z[mask] = series_impedance(row_form, f[mask], [r[2] for r in rows if r[4] == row_form],
                                   [r[3] for r in rows if r[4] == row_form])
    if not np.all(np.isfinite(z)):
        raise InputError("a reading converts to a non-finite impedance", path)
    order = np.argsort(f, kind="stable")
    if np.any(order != np.arange(f.size)):
        notes.append("readings were not in frequency order; sorted")
    for note in notes:
        log.info("%s: %s", path, note)
    return LcrReadings(f[order], z[order], form, str(path), tuple(notes), raw)


def format_readings_csv(f_Hz, impedance_ohm, form: str = "Ls_Rs") -> str:
    """CSV text of series impedances in `form` (SI units), readable by load_readings."""
    if form not in FORMS:
        raise InputError(f"form {form!r} is not known (use one of {', '.join(FORMS)})")
    f = np.asarray(f_Hz, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        a, b = form_values(form, f, impedance_ohm)
    if not (np.all(np.isfinite(a)) and np.all(np.isfinite(b))):
        raise InputError(f"these impedances cannot be written as {form} (a zero resistance or reactance); "
                         "use Rs_Xs or Z_theta")
    first, second = FORMS[form]
    names = ["frequency_Hz"] + [f"{q}_{_BASE_UNIT[q]}" if _BASE_UNIT[q] else q for q in (first, second)]
    lines = [", ".join(names)] + [f"{fi!r}, {ai!r}, {bi!r}" for fi, ai, bi in
                                  zip(f.tolist(), a.tolist(), b.tolist())]
    return "\n".join(lines) + "\n"


def write_readings(path: str | os.PathLike, f_Hz, impedance_ohm, form: str = "Ls_Rs") -> None:
    """Write series impedances as a CSV file of readings in `form` (atomically)."""
    atomic_write_text(path, format_readings_csv(f_Hz, impedance_ohm, form))
