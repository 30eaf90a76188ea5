"""Before/after overlay of two analyses: both measurements as points, both fitted models as lines."""

from __future__ import annotations

import numpy as np

from rfmeas.present.plots import style
from rfmeas.present.plots.sweeps import model_sweeps


def matched_sweeps(before, after) -> list[tuple[int, int]]:
    """Pairs of sweep indices (before, after) taken the same way (same connection description)."""
    later = {s.describe(): j for j, s in reversed(list(enumerate(after.measurement.sweeps)))}
    return [(i, later[s.describe()]) for i, s in enumerate(before.measurement.sweeps) if s.describe() in later]


def _curve(sweep, values):
    """What a panel shows for one sweep: |Z| for a one-port sweep, |S21| (else |S11|) in dB."""
    if not sweep.is_two_port:
        return np.abs(sweep.impedance_ohm(values[:, 0]))
    j = sweep.elements.index("S21") if "S21" in sweep.elements else 0
    with np.errstate(divide="ignore"):
        return 20 * np.log10(np.abs(values[:, j]))


BEFORE_AFTER_COLOURS = {"before": style.PALETTE["data"], "after": style.PALETTE["model"]}


def record_name(analysis) -> str:
    """What names a record in the comparison's title: the unit's name and its manifest's folder or file."""
    from pathlib import Path

    name = getattr(analysis, "name", "") or ""
    path = analysis.measurement.manifest_path
    where = ""
    if path:
        where = Path(path).parent.name if Path(path).name == "manifest.toml" else Path(path).name
    if name and where and where != name:
        return f"{name} ({where})"
    return name or where or "unnamed record"


def plot_comparison(before, after, path=None, names: tuple[str, str] | None = None):
    """One panel per sweep taken both times, with both measurements and both models.

    Before is drawn in blue, after in orange (points measured, lines the
    fitted models); the title names both records: `names` (e.g. 'coupler @12')
    or else each analysis's name. Lines carry gids "data:before:<label>",
    "model:before:<label>" and the same for "after"; one-port panels show |Z|,
    two-port panels |S21| in dB.
    """
    from rfmeas.errors import InputError

    pairs = matched_sweeps(before, after)
    if not pairs:
        raise InputError("the two measurement sets have no sweep taken the same way to compare")
    fig, axes = style.new_figure(len(pairs), 1, height_in=2.6 * len(pairs) + 0.6, sharex=False,
                                 margins={"hspace": 0.55, "top": 0.8})
    models = {"before": model_sweeps(before), "after": model_sweeps(after)}
    for ax, (i, j) in zip(axes[:, 0], pairs):
        for n, (tag, analysis, index) in enumerate((("before", before, i), ("after", after, j))):
            sweep = analysis.measurement.sweeps[index]
            colour = BEFORE_AFTER_COLOURS[tag]
            marker, ls = ("o", "-") if tag == "before" else ("s", "--")
            f = sweep.f_Hz
            d, = ax.plot(f, _curve(sweep, sweep.measured()), color=colour,
                         **dict(style.DATA_STYLE, marker=marker), label=f"{tag}: measured")
            m, = ax.plot(f, _curve(sweep, models[tag][index]), color=colour,
                         **dict(style.MODEL_STYLE, linestyle=ls), label=f"{tag}: fitted model")
            d.set_gid(f"data:{tag}:{sweep.label}")
            m.set_gid(f"model:{tag}:{sweep.label}")
        sweep = before.measurement.sweeps[i]
        if sweep.is_two_port:
            ax.set_ylabel("|S21| (dB)" if "S21" in sweep.elements else "|S11| (dB)")
        else:
            style.decade_axis(ax, "y", "Ω")
            ax.set_ylabel("|Z|")
        style.frequency_axis(ax, label=ax is axes[-1, 0])
        ax.set_title(sweep.describe(), fontsize=9, loc="left")
    names = names or (record_name(before), record_name(after))
    fig.suptitle(f"before: {names[0]}\nafter: {names[1]}", fontsize=10, x=0.02, y=0.995, ha="left",
                 va="top")
    for ax in axes[:, 0]:
        style.place_legend(ax, ncol=2)
    if path is not None:
        style.save_figure(fig, path)
    return fig
