"""One plot per sweep: measured points, the fitted model as a line, and the misfit below.

One-port sweeps are shown as the impedance the winding presents (|Z| and
phase), two-port sweeps as |S| in dB and phase of each fitted element. The
model values are exactly those the fit compared with the data (each sweep's own
forward model, rfmeas.measurement.sweep.Sweep.predict, at the fitted parameters).
"""

from __future__ import annotations

import numpy as np

from rfmeas.present.plots import style


def model_sweeps(analysis) -> list[np.ndarray]:
    """Model S elements of every sweep at the fitted parameters: list of (F, E) complex arrays."""
    params = analysis.fit.params
    return [sweep.predict(params) for sweep in analysis.measurement.sweeps]


def sweep_title(sweep) -> str:
    return f"{sweep.label}: {sweep.describe()}"


def plot_sweep(analysis, index: int, model=None, path=None):
    """Figure for sweep `index` of `analysis`: response on top, phase, residual magnitude below.

    Lines carry gids ("data:S11", "model:S11", "residual:S11", for one-port
    sweeps "data:Z", "model:Z" in the |Z| panel) so their data can be read back.
    `model` (from `model_sweeps`) saves re-evaluating when plotting every sweep.
    """
    sweep = analysis.measurement.sweeps[index]
    model = (model_sweeps(analysis) if model is None else model)[index]
    measured = sweep.measured()
    f = sweep.f_Hz
    fig, axes = style.new_figure(3, 1, height_ratios=[3, 2, 1.4], height_in=5.6)
    top, phase, resid = axes[:, 0]
    if sweep.is_two_port:
        _plot_s_elements(top, phase, f, sweep.elements, measured, model)
    else:
        _plot_impedance(top, phase, f, sweep, measured[:, 0], model[:, 0])
    for j, element in enumerate(sweep.elements):
        data_colour, _m, marker, _ls = style.pair(j)
        line, = resid.plot(f, np.abs(model[:, j] - measured[:, j]), color=data_colour,
                           **dict(style.DATA_STYLE, marker=marker), label=f"|Δ{element}|")
        line.set_gid(f"residual:{element}")
    quality = analysis.fit.sweeps[index] if index < len(analysis.fit.sweeps) else None
    if quality is not None:
        resid.axhline(quality.noise_estimate * np.sqrt(2.0), color=style.PALETTE["muted"],
                      linestyle=":", linewidth=1.0, label="noise estimate")
        band = quality.worst_band
        for ax in axes[:, 0]:  # the worst band through every panel, so the eye finds it above too
            ax.axvspan(band["start_Hz"], band["stop_Hz"], facecolor=style.PALETTE["fail"],
                       alpha=0.16 if ax is resid else 0.07, lw=0, zorder=0,
                       label="worst tenth of the misfit" if ax is resid else None)
    resid.set_yscale("log")
    resid.set_ylabel("|model − data|", fontsize=9)
    for ax in axes[:, 0]:
        style.frequency_axis(ax, label=ax is resid)
    if not sweep.is_two_port:
        style.decade_axis(top, "y", "Ω")
    top.set_title(sweep_title(sweep), fontsize=10, loc="left")
    style.place_legend(top, fontsize=8, ncol=1 if not sweep.is_two_port else 2)
    style.place_legend(resid, ncol=3)
    if path is not None:
        style.save_figure(fig, path)
    return fig


def _plot_impedance(top, phase, f, sweep, s_data, s_model):
    z_data = sweep.impedance_ohm(s_data)
    z_model = sweep.impedance_ohm(s_model)
    data_colour, model_colour, marker, ls = style.pair(0)
    for ax, fn, unit in ((top, np.abs, "Ω"), (phase, lambda z: np.degrees(np.angle(z)), "°")):
        d, = ax.plot(f, fn(z_data), color=data_colour, **dict(style.DATA_STYLE, marker=marker),
                     label="measured")
        m, = ax.plot(f, fn(z_model), color=model_colour, **dict(style.MODEL_STYLE, linestyle=ls),
                     label="fitted model")
        tag = "Z" if ax is top else "phase"
        d.set_gid(f"data:{tag}")
        m.set_gid(f"model:{tag}")
    top.set_ylabel("|Z|")
    phase.set_ylabel("phase of Z (°)")
    phase.set_ylim(-95, 95)
    phase.set_yticks([-90, -45, 0, 45, 90])


def _plot_s_elements(top, phase, f, elements, measured, model):
    with np.errstate(divide="ignore"):
        for j, element in enumerate(elements):
            data_colour, model_colour, marker, ls = style.pair(j)
            d, = top.plot(f, 20 * np.log10(np.abs(measured[:, j])), color=data_colour,
                          **dict(style.DATA_STYLE, marker=marker), label=f"{element} measured")
            m, = top.plot(f, 20 * np.log10(np.abs(model[:, j])), color=model_colour,
                          **dict(style.MODEL_STYLE, linestyle=ls), label=f"{element} model")
            d.set_gid(f"data:{element}")
            m.set_gid(f"model:{element}")
            phase.plot(f, np.degrees(np.angle(measured[:, j])), color=data_colour,
                       **dict(style.DATA_STYLE, marker=marker))
            phase.plot(f, np.degrees(np.angle(model[:, j])), color=model_colour,
                       **dict(style.MODEL_STYLE, linestyle=ls))
    top.set_ylabel("|S| (dB)")
    phase.set_ylabel("phase of S (°)")
    phase.set_ylim(-185, 185)
    phase.set_yticks([-180, -90, 0, 90, 180])
