"""Plots draw the data and the model they claim to: lines are read back and recomputed independently."""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import numpy as np
import pytest

from rfmeas.analysis import analyze_manifest
from rfmeas.errors import InputError
from rfmeas.judge.figures import Figures
from rfmeas.model.circuit import input_impedance, reflection, s_matrix
from rfmeas.model.params import TransformerParams
from rfmeas.present.plots import style
from rfmeas.present.plots.compare import plot_comparison
from rfmeas.present.plots.response import plot_core_spectra, plot_response
from rfmeas.present.plots.smith import plot_smith
from rfmeas.present.plots.sweeps import plot_sweep
from rfmeas.measurement.sweep import DesignTarget
from rfmeas.units import format_engineering

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def before():
    return analyze_manifest(ROOT / "sample_data" / "coupler-before")


@pytest.fixture(scope="module")
def after():
    return analyze_manifest(ROOT / "sample_data" / "coupler-after")


def lines_by_gid(fig) -> dict:
    return {line.get_gid(): line for ax in fig.axes for line in ax.get_lines() if line.get_gid()}


@pytest.fixture
def closing():
    figs = []
    yield figs.append
    for fig in figs:
        style.close(fig)


def one_port_plots(analysis, closing):
    """(sweep, figure) of every one-port sweep of `analysis`."""
    for index, sweep in enumerate(analysis.measurement.sweeps):
        if not sweep.is_two_port:
            fig = plot_sweep(analysis, index)
            closing(fig)
            yield sweep, fig


def test_one_port_sweep_model_line_is_the_circuit_impedance(before, closing):
    for sweep, fig in one_port_plots(before, closing):
        lines = lines_by_gid(fig)
        f = sweep.f_Hz
        # independent: the impedance straight from the circuit's Y matrix (no S parameters involved)
        z = input_impedance(before.fit.params, f, sweep.port1, sweep.termination)
        np.testing.assert_allclose(lines["model:Z"].get_xdata(), f)
        np.testing.assert_allclose(lines["model:Z"].get_ydata(), np.abs(z), rtol=1e-8)
        np.testing.assert_allclose(lines["model:phase"].get_ydata(), np.degrees(np.angle(z)), atol=1e-6)
        s = sweep.measured()[:, 0]
        z0 = sweep.z0_ohm[0]
        np.testing.assert_allclose(lines["data:Z"].get_ydata(), np.abs(z0 * (1 + s) / (1 - s)), rtol=1e-12)
        # the residual panel shows exactly the misfit the fit minimised
        gamma = reflection(before.fit.params, f, sweep.port1, sweep.termination, z0)
        np.testing.assert_allclose(lines["residual:S11"].get_ydata(), np.abs(gamma - s), rtol=1e-8, atol=1e-15)
        np.testing.assert_allclose(lines["residual:S11"].get_ydata(),
                                   np.abs(before.fit.outcome.residuals[before.measurement.sweeps.index(sweep)][:, 0]),
                                   rtol=1e-8, atol=1e-15)


def test_two_port_sweep_model_lines_are_the_circuit_s_matrix(before, closing):
    index = next(i for i, s in enumerate(before.measurement.sweeps) if s.is_two_port)
    sweep = before.measurement.sweeps[index]
    fig = plot_sweep(before, index)
    closing(fig)
    lines = lines_by_gid(fig)
    s = s_matrix(before.fit.params, sweep.f_Hz, sweep.port1, *sweep.z0_ohm)
    np.testing.assert_allclose(lines["model:S11"].get_ydata(), 20 * np.log10(np.abs(s[:, 0, 0])), atol=1e-9)
    np.testing.assert_allclose(lines["model:S21"].get_ydata(), 20 * np.log10(np.abs(s[:, 1, 0])), atol=1e-9)
    measured = sweep.measured()
    np.testing.assert_allclose(lines["data:S21"].get_ydata(), 20 * np.log10(np.abs(measured[:, 1])))
    assert "model:S12" not in lines  # forward-only file: S12/S22 were neither fitted nor drawn


def test_smith_chart_draws_each_reflection_and_its_model(before, closing):
    fig = plot_smith(before)
    closing(fig)
    lines = lines_by_gid(fig)
    for sweep in before.measurement.sweeps:
        f = sweep.f_Hz
        if sweep.is_two_port:
            gamma = s_matrix(before.fit.params, f, sweep.port1, *sweep.z0_ohm)[:, 0, 0]
        else:
            gamma = reflection(before.fit.params, f, sweep.port1, sweep.termination, sweep.z0_ohm[0])
        model = lines[f"model:{sweep.label}"]
        np.testing.assert_allclose(model.get_xdata(), gamma.real, atol=1e-10)
        np.testing.assert_allclose(model.get_ydata(), gamma.imag, atol=1e-10)
        data = lines[f"data:{sweep.label}"]
        np.testing.assert_allclose(data.get_xdata(), sweep.measured()[:, 0].real)


def test_response_of_a_near_ideal_1_to_2_transformer(before, closing):
    # Ideal 1:N between 50 Ω ports: S21 = 2N/(1 + N²), N = 2 gives 0.800 (−1.94 dB) and
    # S11 = (1 − N²)/(1 + N²) = −0.600, return loss 4.44 dB [derived, see REFERENCES].
    ideal = TransformerParams(L1_H=1.0, L2_H=4.0, k=1 - 1e-12)
    analysis = dataclasses.replace(
        before, fit=dataclasses.replace(before.fit, params=ideal),
        measurement=dataclasses.replace(before.measurement, design=DesignTarget(50.0, 50.0, 1e6, 10e6)))
    fig = plot_response(analysis)
    closing(fig)
    lines = lines_by_gid(fig)
    gain = lines["model:gain"].get_ydata()
    rl = lines["model:return_loss"].get_ydata()
    np.testing.assert_allclose(gain, 20 * np.log10(0.8), atol=1e-3)
    np.testing.assert_allclose(rl, -20 * np.log10(0.6), atol=1e-3)


def test_response_uses_design_terminations_and_marks_corners(before, closing):
    corners = {"low_frequency_corner_1dB_Hz": (1.1e6, 1e3), "low_frequency_corner_3dB_Hz": (0.55e6, None),
               "high_frequency_corner_1dB_Hz": (40e6, None), "high_frequency_corner_3dB_Hz": (None, None)}
    own = before.figures
    band = own.return_loss_band
    figures = Figures(
        tuple(dataclasses.replace(f, value=corners[f.name][0], stderr=corners[f.name][1])
              if f.name in corners else f for f in own.figures),
        dataclasses.replace(band, start=dataclasses.replace(band.start, value=2e6),
                            stop=dataclasses.replace(band.stop, value=25e6), threshold_dB=15.0),
        own.terminations)
    analysis = dataclasses.replace(before, figures=figures)
    fig = plot_response(analysis)
    closing(fig)
    lines = lines_by_gid(fig)
    f = lines["model:gain"].get_xdata()
    design = before.measurement.design
    s = s_matrix(before.fit.params, f, "primary", design.source_impedance_ohm, design.load_impedance_ohm)
    np.testing.assert_allclose(lines["model:gain"].get_ydata(), 20 * np.log10(np.abs(s[:, 1, 0])), atol=1e-9)
    assert lines["marker:low 1 dB corner"].get_xdata()[0] == 1.1e6
    assert lines["marker:low 3 dB corner"].get_xdata()[0] == 0.55e6
    assert lines["marker:high 1 dB corner"].get_xdata()[0] == 40e6
    assert "marker:high 3 dB corner" not in lines  # a missing value draws nothing
    band = [p for p in fig.axes[0].patches if p.get_label() == "design band"]
    assert len(band) == 1
    start, width = band[0].get_x(), band[0].get_width()
    assert np.isclose(start, design.lowest_frequency_Hz)
    assert np.isclose(start + width, design.highest_frequency_Hz)


def test_core_spectra_show_the_winding_inductance_per_turn_squared(before, closing):
    fig = plot_core_spectra(before)
    closing(fig)
    lines = lines_by_gid(fig)
    sweep = before.measurement.sweeps[0]
    f = lines["model:A_L"].get_xdata()
    z = input_impedance(before.fit.params, f, sweep.port1, sweep.termination)
    turns = before.measurement.primary_turns
    np.testing.assert_allclose(lines["model:A_L"].get_ydata(), (z / (2j * np.pi * f)).real / turns**2 * 1e9,
                               rtol=1e-8)
    # At low frequency A_L ≈ L1/N²; the invented core has A_L = 455.90 nH/turn²
    # (sample_data/README.md, µ0·µ/C1 of the ring [derived]).
    assert lines["model:A_L"].get_ydata()[0] == pytest.approx(455.9, rel=0.01)
    # µ' ≈ µi = 800 at low frequency, the value the sample core was built with
    assert lines["model:mu_real"].get_ydata()[0] == pytest.approx(800, rel=0.01)


def test_core_spectra_need_turns(before):
    analysis = dataclasses.replace(before, measurement=dataclasses.replace(
        before.measurement, primary_turns=None, secondary_turns=None))
    assert plot_core_spectra(analysis) is None


def test_comparison_overlays_both_measurements_and_both_models(before, after, closing):
    fig = plot_comparison(before, after)
    closing(fig)
    lines = lines_by_gid(fig)
    for tag, analysis in (("before", before), ("after", after)):
        sweep = analysis.measurement.sweeps[0]
        z = input_impedance(analysis.fit.params, sweep.f_Hz, sweep.port1, sweep.termination)
        np.testing.assert_allclose(lines[f"model:{tag}:{sweep.label}"].get_ydata(), np.abs(z), rtol=1e-8)
        assert f"data:{tag}:{sweep.label}" in lines
    two = next(s for s in after.measurement.sweeps if s.is_two_port)
    s = s_matrix(after.fit.params, two.f_Hz, two.port1, *two.z0_ohm)
    np.testing.assert_allclose(lines[f"model:after:{two.label}"].get_ydata(), 20 * np.log10(np.abs(s[:, 1, 0])),
                               atol=1e-9)


def test_comparison_needs_a_common_sweep(before, after):
    only_two_port = dataclasses.replace(after, measurement=dataclasses.replace(
        after.measurement, sweeps=tuple(s for s in after.measurement.sweeps if s.is_two_port)))
    no_two_port = dataclasses.replace(before, measurement=dataclasses.replace(
        before.measurement, sweeps=tuple(s for s in before.measurement.sweeps if not s.is_two_port)))
    with pytest.raises(InputError):
        plot_comparison(no_two_port, only_two_port)


@pytest.mark.parametrize("suffix, magic", [(".png", b"\x89PNG"), (".svg", b"<?xml"), (".pdf", b"%PDF")])
def test_save_figure_writes_each_format(tmp_path, suffix, magic, closing):
    fig, _axes = style.new_figure()
    closing(fig)
    path = tmp_path / f"plot{suffix}"
    style.save_figure(fig, path)
    assert path.read_bytes().startswith(magic)


def test_save_figure_refuses_unknown_formats(tmp_path, closing):
    fig, _axes = style.new_figure()
    closing(fig)
    with pytest.raises(InputError):
        style.save_figure(fig, tmp_path / "plot.bmpx")
    assert list(tmp_path.iterdir()) == []


def test_frequency_axes_use_engineering_notation(closing):
    fig, axes = style.new_figure()
    closing(fig)
    ax = axes[0, 0]
    ax.plot([1e5, 1e8], [1, 2])
    style.frequency_axis(ax)
    assert ax.xaxis.get_major_formatter()(1e6) == "1 MHz"


# The pictures read at a glance: legends off the data, every |Z| decade labelled, extrapolation
# shown. Layout is checked in display coordinates after `fig.canvas.draw()` (matplotlib's own
# renderer), independently of the placement code: each legend's window extent against every
# drawn data and model point.


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
    for _sweep, fig in one_port_plots(before, closing):
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
