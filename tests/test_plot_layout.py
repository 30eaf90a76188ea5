"""The pictures read at a glance: legends off the data, every |Z| decade labelled, extrapolation shown.

Layout is checked in display coordinates after `fig.canvas.draw()` (matplotlib's
own renderer), independently of the placement code: each legend's window
extent is compared with every drawn data and model point.
"""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import numpy as np
import pytest

from rfmeas.analysis import analyze_manifest
from rfmeas.judge.figures import Figures
from rfmeas.model.circuit import reflection
from rfmeas.present.plots import style
from rfmeas.present.plots.compare import plot_comparison
from rfmeas.present.plots.response import plot_core_spectra, plot_response
from rfmeas.present.plots.smith import plot_smith
from rfmeas.present.plots.sweeps import plot_sweep
from rfmeas.units import format_engineering

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def before():
    return analyze_manifest(ROOT / "sample_data" / "coupler-before")


@pytest.fixture(scope="module")
def after():
    return analyze_manifest(ROOT / "sample_data" / "coupler-after")


@pytest.fixture
def closing():
    figs = []
    yield figs.append
    for fig in figs:
        style.close(fig)


def lines_by_gid(fig) -> dict:
    return {line.get_gid(): line for ax in fig.axes for line in ax.get_lines() if line.get_gid()}


def assert_legends_off_the_data(fig):
    """No measured or model point of an axes lies inside that axes' legend box."""
    fig.canvas.draw()
    legends = 0
    for ax in fig.axes:
        legend = ax.get_legend()
        if legend is None:
            continue
        legends += 1
        box = legend.get_window_extent()
        for line in ax.get_lines():
            gid = line.get_gid() or ""
            if not gid or gid.startswith("marker:"):
                continue
            xy = np.column_stack([line.get_xdata(), line.get_ydata()]).astype(float)
            xy = line.get_transform().transform(xy[np.all(np.isfinite(xy), axis=1)])
            inside = ((xy[:, 0] > box.x0) & (xy[:, 0] < box.x1) & (xy[:, 1] > box.y0) & (xy[:, 1] < box.y1))
            assert not inside.any(), f"legend of {ax.get_title() or ax.get_ylabel()!r} covers {gid}"
    assert legends, "the figure has no legend at all"


def test_sweep_legends_are_off_the_data(before, closing):
    for index in range(len(before.measurement.sweeps)):
        fig = plot_sweep(before, index)
        closing(fig)
        assert_legends_off_the_data(fig)


def test_response_spectra_and_comparison_legends_are_off_the_data(before, after, closing):
    for fig in (plot_response(before), plot_core_spectra(before), plot_comparison(before, after)):
        closing(fig)
        assert_legends_off_the_data(fig)


def test_legend_moves_to_an_empty_corner(closing):
    # data filling the upper left to lower right diagonal band and the upper right corner:
    # the legend must end up where no point is (placement in display coordinates)
    fig, axes = style.new_figure()
    closing(fig)
    ax = axes[0, 0]
    x = np.linspace(0, 1, 200)
    ax.plot(x, 1 - x, "o", gid="data:diagonal", label="diagonal")
    ax.plot(x[150:], np.full(50, 0.98), "o", gid="data:top", label="top right")
    style.place_legend(ax)
    assert_legends_off_the_data(fig)


def test_worst_band_is_shaded_and_named(before, closing):
    fig = plot_sweep(before, 0)
    closing(fig)
    band = before.fit.sweeps[0].worst_band
    resid = fig.axes[-1]
    shaded = [p for p in resid.patches if p.get_label().startswith("worst")]
    assert len(shaded) == 1 and shaded[0].get_alpha() >= 0.15
    assert np.isclose(shaded[0].get_x(), band["start_Hz"])
    assert np.isclose(shaded[0].get_x() + shaded[0].get_width(), band["stop_Hz"])
    assert any(t.get_text().startswith("worst") for t in resid.get_legend().get_texts())


def decade_labels(ax) -> dict[int, str]:
    """{decade exponent: tick label} of the y axis, after drawing."""
    ax.figure.canvas.draw()
    out = {}
    for tick in ax.yaxis.get_major_ticks():
        loc = tick.get_loc()
        if loc > 0 and abs(math.log10(loc) - round(math.log10(loc))) < 1e-9:
            out[round(math.log10(loc))] = tick.label1.get_text()
    return out


def spanned_decades(ax) -> list[int]:
    lo, hi = ax.get_ylim()
    return list(range(math.ceil(math.log10(lo) - 1e-9), math.floor(math.log10(hi) + 1e-9) + 1))


def test_impedance_axis_labels_every_decade(before, closing):
    for index, sweep in enumerate(before.measurement.sweeps):
        if sweep.is_two_port:
            continue
        fig = plot_sweep(before, index)
        closing(fig)
        top = fig.axes[0]
        labels = decade_labels(top)
        decades = spanned_decades(top)
        assert len(decades) >= 2
        for k in decades:
            # the label reads the decade in engineering notation, e.g. '100 Ω', '1 kΩ'
            assert labels.get(k) == format_engineering(10.0 ** k, "Ω", 1).replace(".0", ""), (k, labels)


@pytest.mark.parametrize("lo, hi", [(1e-3, 1e6), (150.0, 600.0), (2.0, 9e4)])
def test_decade_axis_on_wide_and_narrow_spans(lo, hi, closing):
    # matplotlib's default LogLocator thins a 9-decade axis to every other decade (numticks);
    # a span inside one decade has no decade tick at all: both must end up labelled
    fig, axes = style.new_figure()
    closing(fig)
    ax = axes[0, 0]
    ax.plot([1, 2], [lo, hi], gid="data:z")
    style.decade_axis(ax, "y", "Ω")
    labels = decade_labels(ax)
    decades = spanned_decades(ax)
    assert len(decades) >= 2
    assert all(labels.get(k) for k in decades), (decades, labels)


def _with_corners(analysis, corners):
    own = analysis.figures
    figures = Figures(tuple(dataclasses.replace(f, value=corners[f.name]) if f.name in corners else f
                            for f in own.figures), own.return_loss_band, own.terminations)
    return dataclasses.replace(analysis, figures=figures)


def test_extrapolated_corner_is_dashed_and_labelled(before, closing):
    # swept 100 kHz–100 MHz; a low corner at 20 kHz lies outside and is the model's extrapolation
    analysis = _with_corners(before, {"low_frequency_corner_1dB_Hz": 20e3, "low_frequency_corner_3dB_Hz": 300e3,
                                      "high_frequency_corner_1dB_Hz": 40e6, "high_frequency_corner_3dB_Hz": None})
    fig = plot_response(analysis)
    closing(fig)
    lines = lines_by_gid(fig)
    outside = lines["marker:low 1 dB corner (extrapolated)"]
    assert outside.get_linestyle() == "--"
    assert outside.get_xdata()[0] == 20e3
    assert fig.axes[0].get_xlim()[0] < 20e3  # widened to show it
    for inside in ("marker:low 3 dB corner", "marker:high 1 dB corner"):
        assert lines[inside].get_linestyle() != "--"
    texts = [t.get_text() for t in fig.axes[0].texts]
    assert any("extrapolated" in t and format_engineering(20e3, "Hz", 3) in t for t in texts), texts
    assert any(format_engineering(40e6, "Hz", 3) in t for t in texts), texts
    legend = [t.get_text() for t in fig.axes[0].get_legend().get_texts()]
    assert len(legend) == len(set(legend))
    assert any("extrapolated" in t for t in legend)
    assert sum("1 dB" in t for t in legend) == 1  # one entry per line style, not one per corner


def test_response_marks_return_loss_band_edges_with_their_values(before, closing):
    fig = plot_response(before)
    closing(fig)
    band = before.figures.return_loss_band
    texts = [t.get_text() for t in fig.axes[1].texts]
    for edge in (band.start.value, band.stop.value):
        if edge is not None:
            assert format_engineering(edge, "Hz", 3) in texts


def test_smith_frequency_markers_sit_on_the_model_and_lines_are_on_top(before, closing):
    fig = plot_smith(before)
    closing(fig)
    lines = lines_by_gid(fig)
    sweep = before.measurement.sweeps[0]
    marks = lines[f"marker:frequency:{sweep.label}"]
    labels = [t.get_text() for t in fig.axes[0].texts]
    # independent: Γ from the circuit's closed form at the labelled frequencies
    f_marks = [f for f in (5e5, 1e6, 2e6, 5e6, 1e7, 2e7, 5e7) if format_engineering(f, "Hz", 3) in labels]
    assert len(f_marks) >= 2
    gamma = reflection(before.fit.params, np.array(f_marks), sweep.port1, sweep.termination, sweep.z0_ohm[0])
    got = marks.get_xdata() + 1j * marks.get_ydata()
    for g in gamma:
        assert np.min(np.abs(got - g)) < 0.02  # interpolated along the model line
    assert lines[f"model:{sweep.label}"].get_zorder() > lines[f"data:{sweep.label}"].get_zorder()


def test_comparison_names_both_records_in_two_colours(before, after, closing):
    fig = plot_comparison(before, after, names=("unit 3 @12", "unit 3 @13"))
    closing(fig)
    title = fig._suptitle.get_text()
    assert "unit 3 @12" in title and "unit 3 @13" in title
    assert title.index("before") < title.index("@12") < title.index("after") < title.index("@13")
    colours = {tag: {line.get_color() for line in fig.axes[0].get_lines() if f":{tag}:" in (line.get_gid() or "")}
               for tag in ("before", "after")}
    assert len(colours["before"]) == 1 and len(colours["after"]) == 1
    assert colours["before"] != colours["after"]
    legend = " ".join(t.get_text() for t in fig.axes[0].get_legend().get_texts())
    assert "before" in legend and "after" in legend


def test_negative_loss_points_are_drawn_not_dropped(closing):
    fig, axes = style.new_figure()
    closing(fig)
    ax = axes[0, 0]
    f = np.array([1e5, 2e5, 3e5, 4e5])
    count = style.plot_loss_part(ax, f, np.array([2.0, -0.5, 3.0, -1.5]), "#000000", "µ″ measured", "data:mu_imag")
    ax.set_yscale("log")
    lines = lines_by_gid(fig)
    assert count == 2
    np.testing.assert_allclose(lines["data:mu_imag-negative"].get_ydata(), [np.nan, 0.5, np.nan, 1.5])
    np.testing.assert_allclose(lines["data:mu_imag"].get_ydata(), [2.0, np.nan, 3.0, np.nan])
    assert lines["data:mu_imag-negative"].get_markerfacecolor() == "none"
    assert "< 0" in lines["data:mu_imag-negative"].get_label()


def test_core_spectra_ranges_ignore_outliers(before, closing):
    fig = plot_core_spectra(before)
    closing(fig)
    al = fig.axes[0]
    data = lines_by_gid(fig)["data:A_L"].get_ydata()
    lo, hi = al.get_ylim()
    # the range hugs the bulk of the points: within a third of the data's own spread of them
    spread = np.percentile(data, 99) - np.percentile(data, 1)
    assert lo >= np.percentile(data, 1) - spread / 3 and hi <= np.percentile(data, 99) + spread / 3
    assert fig.axes[1].get_yscale() == "log"  # the same scale as `rfmeas core` draws µ with
