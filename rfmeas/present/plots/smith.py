"""Smith chart of every reflection the fit used (one-port sweeps and the S11 of two-port sweeps)."""

from __future__ import annotations

import numpy as np

from rfmeas.present.plots import style
from rfmeas.units import format_engineering
from rfmeas.present.plots.sweeps import model_sweeps


def reflection_series(analysis, model=None) -> list[tuple[str, np.ndarray, np.ndarray]]:
    """(label, f_Hz, measured Γ, model Γ) of each sweep's S11, in manifest order."""
    model = model_sweeps(analysis) if model is None else model
    out = []
    for sweep, m in zip(analysis.measurement.sweeps, model):
        if "S11" not in sweep.elements:
            continue
        j = sweep.elements.index("S11")
        out.append((sweep.label, sweep.f_Hz, sweep.measured()[:, j], m[:, j]))
    return out


def marker_frequencies(f_Hz, count: int = 4) -> np.ndarray:
    """A few round frequencies (1-2-5 steps) spread over the sweep in log steps, for labelled markers."""
    lo, hi = float(np.min(f_Hz)), float(np.max(f_Hz))
    if not (lo > 0 and hi > lo):
        return np.empty(0)
    rounded = []
    for target in np.geomspace(lo, hi, count + 2)[1:-1]:
        decade = 10 ** np.floor(np.log10(target))
        steps = decade * np.array([1, 2, 5, 10])
        rounded.append(steps[np.argmin(np.abs(np.log(steps / target)))])
    return np.unique([r for r in rounded if lo <= r <= hi])


def plot_smith(analysis, model=None, path=None):
    """Smith chart (scikit-rf's grid) with measured points and model lines per sweep.

    Lines carry gids "data:<label>" and "model:<label>"; x/y are Re Γ and Im Γ.
    Round frequencies along each model line are marked and labelled (gid
    "marker:frequency:<label>"); the model lines are drawn over the points.
    """
    import skrf.plotting

    fig, axes = style.new_figure(1, 1, width_in=6.0, height_in=6.0, sharex=False,
                                 margins={"left": 0.45, "right": 0.45, "bottom": 1.0, "top": 0.4})
    ax = axes[0, 0]
    ax.grid(False)
    skrf.plotting.smith(ax=ax, draw_labels=True, chart_type="z")
    style.soften_chart(ax)
    from matplotlib import patheffects

    halo = [patheffects.withStroke(linewidth=3.2, foreground="white")]
    for i, (label, f, data, fitted) in enumerate(reflection_series(analysis, model)):
        data_colour, model_colour, marker, ls = style.pair(i)
        d, = ax.plot(data.real, data.imag, color=data_colour, zorder=2,
                     **dict(style.DATA_STYLE, marker=marker, markersize=1.8, alpha=0.55),
                     label=f"{label} measured")
        # the model over the points, with a white halo so it reads against them
        m, = ax.plot(fitted.real, fitted.imag, color=model_colour, zorder=4, path_effects=halo,
                     **dict(style.MODEL_STYLE, linestyle=ls, linewidth=1.4), label=f"{label} model")
        d.set_gid(f"data:{label}")
        m.set_gid(f"model:{label}")
        marks = marker_frequencies(f)
        if marks.size:
            at = np.interp(np.log(marks), np.log(f), fitted.real), np.interp(np.log(marks), np.log(f), fitted.imag)
            dots, = ax.plot(*at, linestyle="none", marker="o", markersize=4.5, color=model_colour,
                            markeredgecolor="black", markeredgewidth=0.6, zorder=5)
            dots.set_gid(f"marker:frequency:{label}")
            for fm, x, y in zip(marks, *at):
                ax.annotate(format_engineering(float(fm), "Hz", 3), (x, y), xytext=(4, 3),
                            textcoords="offset points", fontsize=6.5, color="black", zorder=6,
                            path_effects=halo)
    ax.set_title("reflection at port 1 (normalised to the port's reference impedance)", fontsize=10,
                 loc="left")
    ax.legend(fontsize=7, frameon=False, loc="upper left", bbox_to_anchor=(0.0, -0.02), ncol=2)
    if path is not None:
        style.save_figure(fig, path)
    return fig
