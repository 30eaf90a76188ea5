"""CSV text of the results, for spreadsheets and scripts: units in the headers, SI numbers at
full precision (Python's shortest round-trip repr), empty cells where there is no number.

Pure functions of the JSON contract's dicts (DESIGN.md) and of a BatchResult; the commands
write the text (rfmeas.io.atomic). Labels come from the one labels table of the parameters
(rfmeas.fit.result.LABELS) and of the figures (rfmeas.judge.figures.FIGURE_LABELS).
"""

from __future__ import annotations

import csv
import io
import math

from rfmeas.fit.result import LABELS, PARAMETER_KEYS
from rfmeas.judge.figures import FIGURE_LABELS
from rfmeas.labels import bare_label

ANALYSIS_COLUMNS = ("key", "label", "value", "standard_error", "unit", "note")
SPECTRUM_COLUMNS = ("frequency_Hz", "mu_real", "mu_real_stderr", "mu_imag", "mu_imag_stderr", "trustworthy")
DIMENSIONLESS = "1"  # the SI unit of a ratio, written in headers and unit cells

_PARAMETER_UNITS = {key: unit.replace("Ω", "ohm") for key, _, unit in PARAMETER_KEYS}
_BAND_LABELS = {"start_Hz": ("return-loss band start", "start_stderr_Hz"),
                "stop_Hz": ("return-loss band stop", "stop_stderr_Hz")}


def number(value) -> str:
    """A cell: the float at full precision, '' for None or a value that is not a finite number."""
    if value is None or isinstance(value, bool) or not isinstance(value, (int, float)):
        return ""
    value = float(value)
    return repr(value) if math.isfinite(value) else ""


def label_and_unit(key: str) -> tuple[str, str]:
    """The people's label and the unit ('1' for a ratio) of a parameter or figure JSON key."""
    key = key.split(".", 1)[-1]  # a batch key may carry its section ("figures.turns_ratio")
    if key in LABELS:
        return LABELS[key], _PARAMETER_UNITS.get(key) or DIMENSIONLESS
    if key in FIGURE_LABELS:  # "A_L (nH/turn²)": the unit has a column of its own
        return bare_label(key), FIGURE_LABELS[key][1] or DIMENSIONLESS
    return key, ""


def _to_text(rows, header=(), comments=()) -> str:
    buf = io.StringIO()
    for line in comments:
        buf.write(f"# {line}\n")
    writer = csv.writer(buf, lineterminator="\n")
    if header:
        writer.writerow(header)
    writer.writerows(rows)
    return buf.getvalue()


def _notes(entry: dict) -> str:
    return "; ".join(str(entry[k]) for k in ("note", "stderr_note") if entry.get(k))


def analysis_rows(result: dict) -> list[tuple[str, str, str, str, str, str]]:
    """One row per quantity of an analysis result (its JSON dict): key, label, value, standard
    error, unit, note. A parameter the fit did not determine has no value (its note says why and
    where it was held)."""
    rows = []
    for key, entry in (result.get("parameters") or {}).items():
        label, unit = label_and_unit(key)
        note = _notes(entry)
        value, stderr = entry.get("value"), entry.get("stderr")
        if entry.get("determined") is False:
            held = entry.get("held_at")
            note = "; ".join(t for t in ("not determined by the sweeps"
                                         + (f", held at {number(held) or held} {unit}" if held is not None else ""), note) if t)
            value = stderr = None
        rows.append((key, label, number(value), number(stderr), unit, note))
    for key, entry in (result.get("figures") or {}).items():
        if key == "return_loss_band" and isinstance(entry, dict):
            for edge, (label, err_key) in _BAND_LABELS.items():
                rows.append((f"return_loss_band.{edge}", label, number(entry.get(edge)),
                             number(entry.get(err_key)), "Hz", _notes(entry)))
            continue
        if key not in FIGURE_LABELS or not isinstance(entry, dict):
            continue
        label, unit = label_and_unit(key)
        rows.append((key, label, number(entry.get("value")), number(entry.get("stderr")), unit, _notes(entry)))
    return rows


def analysis_csv(result: dict) -> str:
    """CSV text of `analysis_rows` with its header."""
    return _to_text(analysis_rows(result), ANALYSIS_COLUMNS)


def spectrum_csv(core: dict) -> str:
    """The permeability spectrum of a core result (JSON dict) per point, after comment lines
    ('# ') with the core, µi and the trustworthy band."""
    spectrum = core.get("spectrum") or {}
    mu_i = core.get("initial_permeability") or {}
    band = core.get("trustworthy_band") or {}
    comments = [f"permeability spectrum of {(core.get('source') or {}).get('winding') or 'the winding'}, "
                f"{(core.get('core') or {}).get('description') or 'core size not given'}",
                f"initial permeability mu_i = {number(mu_i.get('value')) or 'not found'}"
                + (f" +- {number(mu_i.get('stderr'))}" if number(mu_i.get("stderr")) else "")
                + (f" ({mu_i['source']})" if mu_i.get("source") else ""),
                f"trustworthy band {number(band.get('start_Hz'))} Hz to {number(band.get('stop_Hz'))} Hz"
                if band else "no trustworthy band",
                "mu_real, mu_imag: relative complex permeability mu' - j mu'' (dimensionless); "
                "trustworthy: 1 where the VNA error model resolves mu to 10 % and below the winding's self-resonance, else 0"]
    f = spectrum.get("frequency_Hz") or []
    columns = [spectrum.get(name) or [None] * len(f) for name in SPECTRUM_COLUMNS[1:5]]
    trust = spectrum.get("trustworthy") or [False] * len(f)
    rows = [(number(f[i]), *(number(c[i]) for c in columns), "1" if trust[i] else "0") for i in range(len(f))]
    return _to_text(rows, SPECTRUM_COLUMNS, comments)


def batch_columns(keys) -> list[str]:
    """Headers of the value columns of a lot: 'label [unit]' and 'label standard error [unit]'."""
    out = []
    for key in keys:
        label, unit = label_and_unit(key)
        unit = f" [{unit}]" if unit else ""
        out += [f"{label}{unit}", f"{label} standard error{unit}"]
    return out


def batch_csv(result) -> str:
    """One row per unit of a BatchResult: manifest, name, status, error, then each value and its
    standard error under a header with its unit."""
    keys = sorted({k for u in result.units for k in u.values})
    rows = [[u.path, u.name or "", u.status, u.error or ""] +
            [number(d.get(k)) for k in keys for d in (u.values, u.stderrs)] for u in result.units]
    return _to_text(rows, ["path", "name", "status", "error"] + batch_columns(keys))
