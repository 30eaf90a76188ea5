"""One self-contained HTML page per analysis: verdicts first, then numbers, plots and provenance.

The page needs nothing beyond itself: plots are PNG data URIs, the stylesheet
is inline, there is no script. Everything taken from the user (names, notes,
file names, warnings) goes through Jinja2 with autoescaping on.
"""

from __future__ import annotations

import base64
import datetime as _dt
import math
import platform
from pathlib import Path

from rfmeas import __version__, labels
from rfmeas.present.terminal import figure_rows, parameter_rows
from rfmeas.units import format_engineering, format_with_error

CAUTIONS = (
    "These are small-signal results: they say nothing about insulation, saturation, "
    "heating or power handling. Test those separately.",
    "Never connect a network analyser or LCR meter to an energised circuit; a charged "
    "capacitor or live winding can destroy the instrument's input and hurt you.",
    "Mains and high-voltage parts follow local codes and licensed practice; this report is "
    "no approval of any such part.",
)



def format_number(value, unit: str = "", stderr=None) -> str:
    """A number for people, with its standard error when given (rfmeas.units' one rule)."""
    if value is None:
        return "—"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if not isinstance(value, (int, float)):
        return str(value)
    if isinstance(stderr, (int, float)) and stderr:
        return format_with_error(float(value), float(stderr), unit)
    return format_engineering(float(value), unit)


def _state(passed) -> str:
    return "pass" if passed is True else ("fail" if passed is False else "info")


_GRADE_STATE = {"good": "pass", "marginal": "info", "poor": "fail"}


def missed_text(quality) -> str:
    """'thru (8.1×, worst 20 MHz–32 MHz)' for every sweep the model misses."""
    parts = []
    for m in quality.missed:
        band = m.get("worst_band") or {}
        where = (f", worst {format_engineering(band['start_Hz'], 'Hz', 3)}–"
                 f"{format_engineering(band['stop_Hz'], 'Hz', 3)}") if band.get("start_Hz") else ""
        parts.append(f"{m['sweep']} ({m['misfit_ratio']:.2g}×{where})")
    return ", ".join(parts)


def quality_row(analysis) -> dict:
    """The fit judged against the data's own noise, as a verdict row."""
    from rfmeas.fit.result import GOOD_MISFIT_RATIO, POOR_MISFIT_RATIO

    q = analysis.fit.quality
    missed = missed_text(q)
    advice = {"good": "", "marginal": "the standard errors are optimistic",
              "poor": "the standard errors do not describe the error; no design verdict is given"}[q.grade]
    if missed:
        advice = (advice + "; " if advice else "") + f"the model misses {missed}: check how it was connected"
    value = f"{q.misfit_ratio:.2g}× the noise ({q.grade})" if math.isfinite(q.misfit_ratio) else f"— ({q.grade})"
    return {"name": "fit quality: misfit against the data's own noise", "group": "fit",
            "state": _GRADE_STATE[q.grade], "value": value,
            "limit": f"≤ {GOOD_MISFIT_RATIO:g}× good, ≤ {POOR_MISFIT_RATIO:g}× marginal", "margin": "",
            "advice": advice}


def verdict_rows(analysis) -> list[dict]:
    """The verdict table: the fit's own soundness, then every design check."""
    fit = analysis.fit
    rows = [
        {"name": "fit converged", "group": "fit", "state": _state(fit.converged),
         "value": "yes" if fit.converged else "no", "limit": "", "margin": "",
         "advice": "" if fit.converged else fit.message},
        quality_row(analysis),
    ]
    check = analysis.design_check
    if not check:
        advice = ("no design check was made for this target" if analysis.measurement.design is not None
                  else "give a [design] table in the manifest to check against a target")
        rows.append({"name": "no target given", "state": "info", "value": "not checked",
                     "limit": "", "margin": "", "advice": advice})
        return rows
    for v in check.verdicts:
        rows.append({
            "name": v.label,
            "state": "notjudged" if v.passed is None else v.state,
            "value": format_number(v.value, v.unit),
            "limit": format_number(v.limit, v.unit),
            "margin": v.margin,
            "advice": v.advice or v.reason,
        })
    return rows


def overall_verdict(analysis) -> dict:
    check = analysis.design_check
    status = analysis.design_status
    if status == "not judged":
        reasons = check.not_judged
        return {"state": "notjudged", "text": "Design check not judged" + (f": {'; '.join(reasons)}" if reasons else "")}
    if status == "pass":
        return {"state": "pass", "text": "Design check passed"}
    if status == "fail":
        failed = [v.label for v in check.failed]
        return {"state": "fail", "text": "Design check failed" + (f": {'; '.join(failed)}" if failed else "")}
    if not analysis.fit.converged:
        return {"state": "fail", "text": "The fit did not converge; treat every number with suspicion"}
    if analysis.fit.quality.grade == "poor":
        return {"state": "fail", "text": "The fit is poor: the model misses the data far beyond their noise; "
                                         "treat every number as unconfirmed"}
    if analysis.measurement.design is not None:
        return {"state": "info", "text": "Design target given, but no design check was made"}
    return {"state": "info", "text": "No design target given: results only, nothing checked"}


def sweep_rows(analysis) -> list[dict]:
    rows = []
    qualities = {q.label: q for q in analysis.fit.sweeps}
    for sweep in analysis.measurement.sweeps:
        f = sweep.f_Hz
        q = qualities.get(sweep.label)
        rows.append({
            "label": sweep.label,
            "file": sweep.path or "",
            "description": sweep.describe(),
            "points": int(f.size),
            "range": f"{format_engineering(float(f[0]), 'Hz', 3)} – {format_engineering(float(f[-1]), 'Hz', 3)}",
            "reference": " / ".join(f"{z:g} Ω" for z in sweep.z0_ohm),
            "misfit": "" if q is None else f"{q.rms_residual:.2g}",
            "noise": "" if q is None else f"{q.data_noise:.2g}",
            "ratio": "" if q is None else f"{q.misfit_ratio:.3g}×",
            "missed": q is not None and any(m["sweep"] == q.label for m in analysis.fit.quality.missed),
            "sha256": sweep.sha256 or "not recorded",
        })
    return rows


def design_rows(analysis) -> list[dict]:
    design = analysis.measurement.design
    if design is None:
        return []
    rows = []
    for key, value in design.to_dict().items():
        if value is None:
            continue
        rows.append({"label": labels.label(key), "value": format_number(value, labels.unit(key))})
    return rows


def software_versions() -> list[dict]:
    from importlib.metadata import PackageNotFoundError, version

    rows = [{"name": "rfmeas", "version": __version__}, {"name": "Python", "version": platform.python_version()}]
    for dist in ("numpy", "scipy", "scikit-rf", "matplotlib", "jinja2"):
        try:
            rows.append({"name": dist, "version": version(dist)})
        except PackageNotFoundError:
            rows.append({"name": dist, "version": "not installed"})
    return rows


def png_data_uri(figure, dpi: int = 110) -> str:
    from rfmeas.present.plots.style import figure_bytes

    return "data:image/png;base64," + base64.b64encode(figure_bytes(figure, "png", dpi)).decode("ascii")


def report_context(analysis, plots, generated: str | None = None) -> dict:
    """Everything the template shows, as plain text and numbers (no objects, no markup)."""
    fit = analysis.fit
    ms = analysis.measurement
    verdicts = verdict_rows(analysis)
    embedded = []
    for plot in plots:
        width_in, height_in = plot.figure.get_size_inches()
        embedded.append({"key": plot.key, "title": plot.title, "caption": plot.caption,
                         "src": png_data_uri(plot.figure),
                         "width": int(round(width_in * 110)), "height": int(round(height_in * 110))})
    return {
        "name": analysis.name,
        "generated": generated or _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC"),
        "overall": overall_verdict(analysis),
        "verdicts": verdicts,
        "fit_checks": sum(1 for row in verdicts if row.get("group") == "fit"),
        "parameters": parameter_rows(analysis),
        "figures": [{"label": label, "value": value, "note": note}
                    for label, value, note in figure_rows(analysis)],
        "design": design_rows(analysis),
        "warnings": analysis.all_warnings,
        "advice": list(analysis.advice),
        "plots": embedded,
        "sweeps": sweep_rows(analysis),
        "turns": {"primary": ms.primary_turns, "secondary": ms.secondary_turns},
        "manifest": ms.manifest_path or "",
        "notes": ms.notes or "",
        "fit": {"converged": fit.converged, "points": fit.points, "free": fit.free_parameters,
                "rms": f"{fit.rms_residual:.2g}", "grade": fit.quality.grade,
                "quality": fit.quality.summary(),
                "stderr_describes_error": fit.quality.stderr_describes_error,
                "elapsed_ms": f"{fit.elapsed_s * 1000:.0f}",
                "polarity": "inverting" if fit.params.polarity < 0 else "non-inverting"},
        "software": software_versions(),
        "cautions": list(CAUTIONS),
    }


def _environment():
    from jinja2 import Environment, FileSystemLoader, StrictUndefined

    return Environment(loader=FileSystemLoader(str(Path(__file__).parent / "templates")),
                       autoescape=True, undefined=StrictUndefined, trim_blocks=True, lstrip_blocks=True)


def render_report(analysis, plots=None, generated: str | None = None) -> str:
    """The report page as HTML text; `plots` (from analysis_plots) are made and closed if not given."""
    from rfmeas.present.report.plots import analysis_plots, close_plots

    own = plots is None
    plots = analysis_plots(analysis) if own else plots
    try:
        context = report_context(analysis, plots, generated)
    finally:
        if own:
            close_plots(plots)
    return _environment().get_template("report.html.j2").render(**context)


def write_report(analysis, path, plots=None) -> Path:
    """Render the report and write it to `path` atomically; returns the path."""
    from rfmeas.io.atomic import atomic_write_text

    path = Path(path)
    atomic_write_text(path, render_report(analysis, plots))
    return path
