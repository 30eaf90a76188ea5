"""The transformer in use: gain and return loss in the design's terminations, and the core's spectra.

Gain is the transducer power gain |S21|² and return loss −20·log10|S11| of the
fitted model with port 1 referenced to the source resistance and port 2 to
the load resistance (rfmeas.model.circuit.s_matrix), so a perfect transformer
shows 0 dB gain and infinite return loss. The measured two-port sweeps were
taken in the analyser's own reference impedance and are not redrawn here.

The spectra come from an open-circuit sweep of a winding with known turns:
A_L(f) = Re(Z/jω)/N² and, with the core's dimensions, the complex
permeability by the single-winding method (rfmeas.magnetics.complex_permeability).
The winding capacitance is not removed, so they are shown only up to half
the winding's first self-resonance.
"""

from __future__ import annotations

import math

import numpy as np

from rfmeas.present.plots import style
from rfmeas.present.plots.sweeps import model_sweeps

RESPONSE_POINTS = 600


def figure_value(figures, key: str) -> float | None:
    """A figure's value (rfmeas.judge.figures.Figures) as a float, or None when it is missing or not finite."""
    value = figures[key].value if figures is not None and key in figures else None
    if isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value):
        return float(value)
    return None


def response_terminations(analysis) -> tuple[float, float, str]:
    """(source Ω, load Ω, how they were chosen): the design's, else 50 Ω and 50 Ω·n²."""
    design = analysis.measurement.design
    source = design.source_impedance_ohm if design and design.source_impedance_ohm else None
    load = design.load_impedance_ohm if design and design.load_impedance_ohm else None
    if source and load:
        return float(source), float(load), "design terminations"
    ratio = analysis.fit.params.effective_turns_ratio
    source = float(source or 50.0)
    load = float(load or source * ratio ** 2)
    return source, load, "no design terminations given: load = source · n²"


def transducer_response(params, f_Hz, source_ohm: float, load_ohm: float):
    """(gain dB, return loss dB) of `params` between `source_ohm` and `load_ohm`."""
    from rfmeas.model.circuit import s_matrix

    s = s_matrix(params, f_Hz, "primary", source_ohm, load_ohm)
    with np.errstate(divide="ignore"):
        return 20 * np.log10(np.abs(s[:, 1, 0])), -20 * np.log10(np.abs(s[:, 0, 0]))


def swept_range(analysis) -> tuple[float, float]:
    """Lowest and highest swept frequency over all sweeps (Hz)."""
    lo = min(float(s.f_Hz.min()) for s in analysis.measurement.sweeps)
    hi = max(float(s.f_Hz.max()) for s in analysis.measurement.sweeps)
    return lo, hi


CORNERS = (("low_frequency_corner_1dB_Hz", "1 dB"), ("high_frequency_corner_1dB_Hz", "1 dB"),
           ("low_frequency_corner_3dB_Hz", "3 dB"), ("high_frequency_corner_3dB_Hz", "3 dB"))
# in-sweep corners: one line style per corner kind; any corner outside the sweep is dashed
CORNER_STYLES = {"1 dB": "-", "3 dB": ":"}
EXTRAPOLATED_STYLE = "--"


def response_corners(analysis) -> list[tuple[str, str, float, bool]]:
    """(figure key, '1 dB' or '3 dB', frequency Hz, inside the swept range) of each corner found."""
    lo, hi = swept_range(analysis)
    out = []
    for key, kind in CORNERS:
        value = figure_value(analysis.figures, key)
        if value is not None:
            out.append((key, kind, value, lo <= value <= hi))
    return out


def response_frequencies(analysis) -> np.ndarray:
    """The swept range, widened to take in corners found outside it (extrapolated)."""
    lo, hi = swept_range(analysis)
    for _key, _kind, value, _inside in response_corners(analysis):
        lo, hi = min(lo, value / 1.25), max(hi, value * 1.25)
    return np.geomspace(lo, hi, RESPONSE_POINTS)


def plot_response(analysis, path=None):
    """Gain and return loss of the fitted model, design band shaded, 1 dB / 3 dB corners marked.

    Lines carry gids "model:gain" and "model:return_loss"; corner markers
    "marker:<side> <1 dB|3 dB> corner" (" (extrapolated)" appended, and drawn
    dashed, when the corner lies outside the swept range, where the plot is
    widened to show it and the unswept part is greyed).
    """
    from rfmeas.units import format_engineering

    source, load, how = response_terminations(analysis)
    f = response_frequencies(analysis)
    swept_lo, swept_hi = swept_range(analysis)
    gain_dB, return_loss_dB = transducer_response(analysis.fit.params, f, source, load)
    fig, axes = style.new_figure(2, 1, height_ratios=[1, 1], height_in=5.0)
    gain_ax, rl_ax = axes[:, 0]
    design = analysis.measurement.design
    figures = analysis.figures
    for ax in (gain_ax, rl_ax):
        if design is not None:
            style.mark_band(ax, design.lowest_frequency_Hz, design.highest_frequency_Hz,
                            label="design band")
        for a, b in ((f[0], swept_lo), (swept_hi, f[-1])):
            if b > a:
                ax.axvspan(a, b, facecolor="#e6e6e6", alpha=0.7, lw=0, zorder=0, label="not swept")
    g, = gain_ax.plot(f, gain_dB, color=style.PALETTE["data"], **style.MODEL_STYLE, label="gain (model)")
    g.set_gid("model:gain")
    r, = rl_ax.plot(f, return_loss_dB, color=style.PALETTE["model"], **style.MODEL_STYLE,
                    label="return loss (model)")
    r.set_gid("model:return_loss")
    for key, kind, value, inside in response_corners(analysis):
        side = "low" if key.startswith("low") else "high"
        extrapolated = "" if inside else " (extrapolated)"
        style.mark_frequency(gain_ax, value, f"{side} {kind} corner{extrapolated}",
                             style=CORNER_STYLES[kind] if inside else EXTRAPOLATED_STYLE)
        gain_ax.lines[-1].set_label(f"{kind} corners" if inside else "corner outside the sweep (extrapolated)")
        style.annotate_frequency(gain_ax, value, f"{kind} {format_engineering(value, 'Hz', 3)}"
                                 + (" extrapolated" if not inside else ""), y=0.03 if kind == "3 dB" else 0.97)
    band = None if figures is None else figures.return_loss_band
    if band is not None:
        threshold = band.threshold_dB
        rl_ax.axhline(threshold, color=style.PALETTE["muted"], linestyle="--", linewidth=1.0,
                      label=f"{threshold:g} dB return loss")
        for value in (band.start.value, band.stop.value):
            if isinstance(value, (int, float)) and math.isfinite(value):
                rl_ax.axvline(value, color=style.PALETTE["third"], linestyle="-.", linewidth=1.0,
                              label=f"band edges (≥ {threshold:g} dB)")
                style.annotate_frequency(rl_ax, value, format_engineering(value, "Hz", 3),
                                         color=style.PALETTE["third"])
    finite_gain = gain_dB[np.isfinite(gain_dB)]
    gain_ax.set_ylim(max(float(finite_gain.min()) - 1, -30) if finite_gain.size else -30, 1)
    rl_ax.set_ylim(0, min(float(np.nanmax(np.where(np.isfinite(return_loss_dB), return_loss_dB, 0))) + 5,
                          60))
    gain_ax.set_ylabel("gain (dB)")
    rl_ax.set_ylabel("return loss (dB)")
    for ax in (gain_ax, rl_ax):
        style.frequency_axis(ax, label=ax is rl_ax)
    gain_ax.set_title(f"fitted model between {source:g} Ω and {load:g} Ω ({how})", fontsize=10, loc="left")
    for ax in (gain_ax, rl_ax):
        style.place_legend(ax, fontsize=7)
    if path is not None:
        style.save_figure(fig, path)
    return fig


def spectra_sweep(analysis) -> int | None:
    """Index of the open-circuit one-port sweep of a winding whose turns are known, or None."""
    ms = analysis.measurement
    turns = {"primary": ms.primary_turns, "secondary": ms.secondary_turns}
    for i, s in enumerate(ms.sweeps):
        if not s.is_two_port and s.termination.is_open and turns.get(s.port1):
            return i
    return None


def core_spectra(analysis, model=None):
    """Spectra of the winding in `spectra_sweep`: dict of f_Hz and data/model arrays, or None.

    Keys: sweep, turns, f_Hz, al_data / al_model (nH/turn²) and, with a core
    geometry, mu_data / mu_model (complex, µ' − jµ'').
    """
    index = spectra_sweep(analysis)
    if index is None:
        return None
    ms = analysis.measurement
    sweep = ms.sweeps[index]
    model = (model_sweeps(analysis) if model is None else model)[index][:, 0]
    turns = ms.primary_turns if sweep.port1 == "primary" else ms.secondary_turns
    f = sweep.f_Hz
    z_data = sweep.impedance_ohm()
    z_model = sweep.impedance_ohm(model)
    keep = f <= 0.5 * _first_resonance(f, z_model)
    f, z_data, z_model = f[keep], z_data[keep], z_model[keep]
    w = 2 * np.pi * f
    out = {"sweep": sweep.label, "turns": turns, "f_Hz": f,
           "al_data": (z_data / (1j * w)).real / turns ** 2 * 1e9,
           "al_model": (z_model / (1j * w)).real / turns ** 2 * 1e9}
    if ms.core:
        from rfmeas.magnetics import geometry as geo
        from rfmeas.magnetics.permeability import complex_permeability

        core = geo.geometry_from_table(ms.core)
        p = analysis.fit.params
        rw = p.R1_ohm if sweep.port1 == "primary" else p.R2_ohm
        out["mu_data"] = complex_permeability(z_data, f, turns, core, rw)
        out["mu_model"] = complex_permeability(z_model, f, turns, core, rw)
    return out


def _first_resonance(f_Hz, z) -> float:
    """Frequency where the reactance first turns from inductive to capacitive (inf if never)."""
    x = z.imag
    cross = np.nonzero((x[:-1] > 0) & (x[1:] <= 0))[0]
    return float(f_Hz[cross[0]]) if cross.size else math.inf


def plot_core_spectra(analysis, model=None, path=None):
    """A_L and (with core dimensions) µ', µ'' against frequency, or None when not available.

    Lines carry gids "data:A_L", "model:A_L", "data:mu_real", "model:mu_real",
    "data:mu_imag", "model:mu_imag".
    """
    spectra = core_spectra(analysis, model)
    if spectra is None or spectra["f_Hz"].size < 2:
        return None
    has_mu = "mu_data" in spectra
    fig, axes = style.new_figure(2 if has_mu else 1, 1, height_in=5.0 if has_mu else 3.2)
    f = spectra["f_Hz"]
    al_ax = axes[0, 0]
    _pair_plot(al_ax, f, spectra["al_data"], spectra["al_model"], 0, "A_L")
    al_ax.set_ylabel("A_L (nH/turn²)")
    limits = style.robust_limits(spectra["al_data"], include=spectra["al_model"])
    if limits is not None:
        al_ax.set_ylim(*limits)
    al_ax.set_title(f"{spectra['sweep']}, {spectra['turns']} turns; up to half the self-resonance",
                    fontsize=10, loc="left")
    if has_mu:
        mu_ax = axes[1, 0]
        mu_d, mu_m = spectra["mu_data"], spectra["mu_model"]
        # the same log scale as `rfmeas core` draws µ with; µ″ < 0 (noise) shown hollow, not dropped
        real_colour, model_colour, _marker, _ls = style.pair(0)
        loss_colour, loss_model_colour, _m2, loss_ls = style.pair(1)
        mu_ax.plot(f, np.where(mu_d.real > 0, mu_d.real, np.nan), color=real_colour,
                   **dict(style.DATA_STYLE, marker="o"), label="µ′ measured", gid="data:mu_real")
        mu_ax.plot(f, mu_m.real, color=model_colour, **style.MODEL_STYLE, label="µ′ model", gid="model:mu_real")
        style.plot_loss_part(mu_ax, f, -mu_d.imag, loss_colour, "µ″ measured", "data:mu_imag")
        mu_ax.plot(f, np.where(-mu_m.imag > 0, -mu_m.imag, np.nan), color=loss_model_colour,
                   **dict(style.MODEL_STYLE, linestyle=loss_ls), label="µ″ model", gid="model:mu_imag")
        mu_ax.set_yscale("log")
        limits = style.robust_limits(np.concatenate([mu_d.real, np.abs(mu_d.imag)]), log=True,
                                     include=np.concatenate([mu_m.real, -mu_m.imag]))
        if limits is not None:
            mu_ax.set_ylim(*limits)
        mu_ax.set_ylabel("relative permeability")
    for ax in axes[:, 0]:
        style.frequency_axis(ax, label=ax is axes[-1, 0])
        style.place_legend(ax, fontsize=7)
    if path is not None:
        style.save_figure(fig, path)
    return fig


def _pair_plot(ax, f, data, model, index, gid, name=None):
    data_colour, model_colour, marker, ls = style.pair(index)
    name = name or gid
    d, = ax.plot(f, data, color=data_colour, **dict(style.DATA_STYLE, marker=marker), label=f"{name} measured")
    m, = ax.plot(f, model, color=model_colour, **dict(style.MODEL_STYLE, linestyle=ls), label=f"{name} model")
    d.set_gid(f"data:{gid}")
    m.set_gid(f"model:{gid}")
