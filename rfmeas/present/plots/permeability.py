"""µ'(f) and µ''(f) of a core on log axes, with the fitted dispersion model, the plateau and the trustworthy band."""

from __future__ import annotations

import numpy as np

from rfmeas.units import format_engineering
from rfmeas.present.plots.style import (PALETTE, close, engineering_axis, new_figure, place_legend,
                                        plot_loss_part, robust_limits, save_figure)

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
    # log axes cannot show µ ≤ 0: µ′ ≤ 0 is masked; µ″ < 0 (noise at the low end) is drawn hollow at |µ″|
    real = np.where(analysis.mu_real > 0, analysis.mu_real, np.nan)
    ax.plot(f, real, ".", color=PALETTE["data"], ms=2, label="µ′ measured", gid="measured-real")
    plot_loss_part(ax, f, analysis.mu_imag, PALETTE["third"], "µ″ measured", "measured-imag")
    model_f = np.geomspace(f[0], f[-1], MODEL_POINTS)
    mu = analysis.model_permeability(model_f)
    ax.plot(model_f, mu.real, "-", color=PALETTE["model"], lw=1.6,
            label=f"µ′ {analysis.model.name} model", gid="model-real")
    ax.plot(model_f, -mu.imag, "--", color=PALETTE["fourth"], lw=1.6,
            label=f"µ″ {analysis.model.name} model", gid="model-imag")
    if analysis.plateau_band_Hz is not None:
        lo, hi = analysis.plateau_band_Hz
        ax.plot([lo, hi], [analysis.initial_permeability] * 2, "-", color=PALETTE["muted"], lw=3, alpha=0.8,
                label="µi plateau", gid="plateau")
    fr = analysis.relaxation_frequency_Hz
    if fr is not None and f[0] <= fr <= f[-1]:
        ax.axvline(fr, color=PALETTE["muted"], lw=0.8, ls=":", label="µ″ peak")
    ax.set_xscale("log")
    ax.set_yscale("log")
    # scale to a percentile range of the trustworthy points and the model: unresolved points can be wild
    keep = analysis.trustworthy if analysis.trustworthy.any() else np.ones(f.size, bool)
    limits = robust_limits(np.concatenate([real[keep], np.abs(analysis.mu_imag[keep])]), log=True,
                           include=np.concatenate([mu.real, -mu.imag]))
    if limits is not None:
        ax.set_ylim(limits[0], limits[1])
    engineering_axis(ax, "x", "Hz")
    ax.set_xlabel("frequency")
    ax.set_ylabel("relative permeability  µ = µ′ − jµ″")
    peak = "no µ″ peak in the sweep" if fr is None else f"µ″ peak {format_engineering(fr, 'Hz', 3)}"
    source = "" if analysis.initial_permeability_source == "plateau" else " (extrapolated)"
    ax.set_title(f"µi {analysis.initial_permeability:.4g}{source}, {peak}, {analysis.turns} turns",
                 fontsize=10)
    place_legend(ax, fontsize=7)
    if path is not None:
        save_figure(fig, path)
        close(fig)
    return fig
