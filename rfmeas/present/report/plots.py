"""Every plot of one analysis, named, for the report and for export to files."""

from __future__ import annotations

import logging
from dataclasses import dataclass
from pathlib import Path

log = logging.getLogger(__name__)

EXPORT_FORMATS = ("png", "svg", "pdf")


@dataclass(frozen=True)
class NamedPlot:
    """A finished figure with a file-safe key, a title and a caption for the reader."""

    key: str
    title: str
    caption: str
    figure: object

    def to_dict(self) -> dict:
        return {"key": self.key, "title": self.title, "caption": self.caption}


def _safe(text: str) -> str:
    return "".join(c if c.isalnum() or c in "-_" else "-" for c in text).strip("-") or "sweep"


def analysis_plots(analysis) -> list[NamedPlot]:
    """Response, core spectra, Smith chart and one plot per sweep; close them with `close_plots`."""
    from rfmeas.present.plots.response import plot_core_spectra, plot_response
    from rfmeas.present.plots.smith import plot_smith
    from rfmeas.present.plots.sweeps import model_sweeps, plot_sweep, sweep_title

    model = model_sweeps(analysis)
    plots = [NamedPlot("response", "Gain and return loss",
                       "The fitted model between the design's source and load resistances; the design "
                       "band is shaded, 1 dB and 3 dB corners are marked where they were found.",
                       plot_response(analysis))]
    spectra = plot_core_spectra(analysis, model)
    if spectra is not None:
        plots.append(NamedPlot("core-spectra", "Core: A_L and permeability against frequency",
                               "From the open-circuit sweep of a winding with known turns (single-winding "
                               "method); the winding capacitance is not removed, so the values are "
                               "apparent ones as the self-resonance nears.", spectra))
    plots.append(NamedPlot("smith", "Smith chart of the reflection sweeps",
                           "Every reflection the fit used: measured points and the fitted model.",
                           plot_smith(analysis, model)))
    for i, sweep in enumerate(analysis.measurement.sweeps):
        plots.append(NamedPlot(f"sweep-{i + 1}-{_safe(Path(sweep.label).stem)}", sweep_title(sweep),
                               "Measured points, the fitted model as a line, and the misfit "
                               "|model − data| with the sweep's noise estimate below.",
                               plot_sweep(analysis, i, model)))
    return plots


def close_plots(plots: list[NamedPlot]) -> None:
    from rfmeas.present.plots.style import close

    for plot in plots:
        close(plot.figure)


def export_plots(analysis, folder, formats=EXPORT_FORMATS, plots=None) -> list[Path]:
    """Write every plot of `analysis` into `folder` in each of `formats`; returns the paths."""
    from rfmeas.errors import InputError
    from rfmeas.present.plots.style import save_figure

    bad = [f for f in formats if f not in EXPORT_FORMATS]
    if bad:
        raise InputError(f"unknown plot format {bad[0]!r}: use {', '.join(EXPORT_FORMATS)}")
    folder = Path(folder)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"cannot make the plot folder: {exc.strerror or exc}", path=folder) from exc
    own = plots is None
    plots = analysis_plots(analysis) if own else plots
    written = []
    try:
        for plot in plots:
            for fmt in formats:
                path = folder / f"{plot.key}.{fmt}"
                save_figure(plot.figure, path)
                written.append(path)
    finally:
        if own:
            close_plots(plots)
    log.info("wrote %d plot files into %s", len(written), folder)
    return written
