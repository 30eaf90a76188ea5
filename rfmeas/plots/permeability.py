"""µ'(f) and µ''(f) of a core on log axes, with the fitted relaxation and the trustworthy band."""

from __future__ import annotations

import numpy as np

from ..units import format_engineering
from .style import PALETTE, close, engineering_axis, new_figure, save_figure

MODEL_POINTS = 400


def plot_permeability(analysis, path=None):
    """Draw the measured spectrum, the fitted model and the trustworthy band; save to `path` if given.

    Returns the matplotlib Figure (closed after saving when `path` is given).
    Lines carry gids "measured-real", "measured-imag", "model-real", "model-imag".
    """
    fig, axes = new_figure(1, 1)
    ax = axes[0, 0]
    f = analysis.f_Hz
    if analysis.trustworthy_band_Hz is not None:
        lo, hi = analysis.trustworthy_band_Hz
        ax.axvspan(lo, hi, color=PALETTE["band"], alpha=0.6, lw=0, label="trustworthy band", zorder=0)
    # log axes cannot show µ'' ≤ 0 (noise at the low end); those points are masked, not altered
    real = np.where(analysis.mu_real > 0, analysis.mu_real, np.nan)
    imag = np.where(analysis.mu_imag > 0, analysis.mu_imag, np.nan)
    ax.plot(f, real, ".", color=PALETTE["data"], ms=3, label="µ′ measured", gid="measured-real")
    ax.plot(f, imag, "x", color=PALETTE["third"], ms=3, label="µ″ measured", gid="measured-imag")
    model_f = np.geomspace(f[0], f[-1], MODEL_POINTS)
    mu = analysis.model_permeability(model_f)
    ax.plot(model_f, mu.real, "-", color=PALETTE["model"], lw=1.6,
            label=f"µ′ {analysis.model.name} model", gid="model-real")
    ax.plot(model_f, -mu.imag, "--", color=PALETTE["fourth"], lw=1.6,
            label=f"µ″ {analysis.model.name} model", gid="model-imag")
    fr = analysis.relaxation_frequency_Hz
    if f[0] <= fr <= f[-1]:
        ax.axvline(fr, color=PALETTE["muted"], lw=0.8, ls=":", label="relaxation frequency")
    ax.set_xscale("log")
    ax.set_yscale("log")
    top = np.nanmax(np.concatenate([real, mu.real]))
    ax.set_ylim(top * 1e-3, top * 2)
    engineering_axis(ax, "x", "Hz")
    ax.set_xlabel("frequency")
    ax.set_ylabel("relative permeability  µ = µ′ − jµ″")
    ax.set_title(f"µi {analysis.initial_permeability:.4g}, fr {format_engineering(fr, 'Hz', 3)}, "
                 f"{analysis.turns} turns",
                 fontsize=10)
    ax.legend(fontsize=8, loc="lower left")
    if path is not None:
        save_figure(fig, path)
        close(fig)
    return fig
