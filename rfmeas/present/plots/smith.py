"""Smith chart of every reflection the fit used (one-port sweeps and the S11 of two-port sweeps)."""

from __future__ import annotations

import numpy as np

from rfmeas.present.plots import style
from rfmeas.present.plots.sweeps import model_sweeps


def reflection_series(analysis, model=None) -> list[tuple[str, np.ndarray, np.ndarray]]:
    """(label, measured Γ, model Γ) of each sweep's S11, in manifest order."""
    model = model_sweeps(analysis) if model is None else model
    out = []
    for sweep, m in zip(analysis.measurement.sweeps, model):
        if "S11" not in sweep.elements:
            continue
        j = sweep.elements.index("S11")
        out.append((sweep.label, sweep.measured()[:, j], m[:, j]))
    return out


def plot_smith(analysis, model=None, path=None):
    """Smith chart (scikit-rf's grid) with measured points and model lines per sweep.

    Lines carry gids "data:<label>" and "model:<label>"; x/y are Re Γ and Im Γ.
    """
    import skrf.plotting

    fig, axes = style.new_figure(1, 1, width_in=6.0, height_in=6.0, sharex=False,
                                 margins={"left": 0.45, "right": 0.45, "bottom": 1.0, "top": 0.4})
    ax = axes[0, 0]
    ax.grid(False)
    skrf.plotting.smith(ax=ax, draw_labels=True, chart_type="z")
    style.soften_chart(ax)
    for i, (label, data, fitted) in enumerate(reflection_series(analysis, model)):
        data_colour, model_colour, marker, ls = style.pair(i)
        d, = ax.plot(data.real, data.imag, color=data_colour,
                     **dict(style.DATA_STYLE, marker=marker, markersize=1.8), label=f"{label} measured")
        m, = ax.plot(fitted.real, fitted.imag, color=model_colour,
                     **dict(style.MODEL_STYLE, linestyle=ls, linewidth=1.1), label=f"{label} model")
        d.set_gid(f"data:{label}")
        m.set_gid(f"model:{label}")
    ax.set_title("reflection at port 1 (normalised to the port's reference impedance)", fontsize=10,
                 loc="left")
    ax.legend(fontsize=7, frameon=False, loc="upper left", bbox_to_anchor=(0.0, -0.02), ncol=2)
    if path is not None:
        style.save_figure(fig, path)
    return fig
