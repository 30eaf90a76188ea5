"""The analysis as one self-contained HTML page (plots embedded), plot export, and a PDF when possible."""

from rfmeas.present.report.html import render_report, write_report
from rfmeas.present.report.plots import analysis_plots, export_plots

__all__ = ["analysis_plots", "export_plots", "render_report", "write_report"]
