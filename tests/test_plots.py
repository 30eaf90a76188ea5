"""Plots draw the data and the model they claim to: lines are read back and recomputed independently."""

from __future__ import annotations

import dataclasses
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


def test_one_port_sweep_model_line_is_the_circuit_impedance(before, closing):
    for index, sweep in enumerate(before.measurement.sweeps):
        if sweep.is_two_port:
            continue
        fig = plot_sweep(before, index)
        closing(fig)
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
                                   np.abs(before.fit.outcome.residuals[index][:, 0]), rtol=1e-8, atol=1e-15)


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
