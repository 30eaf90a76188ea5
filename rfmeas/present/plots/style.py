"""One look for every rfmeas plot: our own colour-blind-safe palette, engineering-notation axes.

The palette pairs a dark blue with an orange (the two first series: data and
model, before and after) and adds hues that stay apart under the common colour
vision deficiencies; line styles and markers differ as well, so print in grey
still reads.
"""

from __future__ import annotations

PALETTE = {
    "data": "#1b4f8a",      # dark blue
    "model": "#e07b00",     # orange
    "third": "#2f9e8f",     # teal
    "fourth": "#8e4fa0",    # violet
    "muted": "#6b6b6b",     # grey
    "band": "#cfe3f5",      # pale blue fill (design band, trustworthy band)
    "fail": "#b8322a",      # brick, always paired with a text label
}


FIGURE_MARGINS_IN = {"left": 0.85, "right": 0.2, "bottom": 0.5, "top": 0.32, "hspace": 0.12}


def use_backend() -> None:
    """Select the non-interactive backend (plots go to files and reports, never to a window)."""
    import matplotlib

    matplotlib.use("Agg", force=True)
    # File, sweep and unit names go into titles and legends: a '$' in them must print as
    # itself, not start math text (which can raise on a name such as 'a$\frac$b').
    matplotlib.rcParams["text.parse_math"] = False


def new_figure(rows: int = 1, cols: int = 1, height_ratios=None, width_in: float = 7.0,
               height_in: float = 4.2, sharex: bool = True, margins: dict | None = None):
    """A figure with the house style applied; returns (fig, axes).

    Fixed margins (in inches, so every plot lines up the same in a report)
    instead of an automatic layout, which costs more than the drawing itself.
    """
    use_backend()
    import matplotlib.pyplot as plt

    gridspec = {"height_ratios": height_ratios} if height_ratios else None
    fig, axes = plt.subplots(rows, cols, figsize=(width_in, height_in), sharex=sharex,
                             gridspec_kw=gridspec, squeeze=False)
    m = dict(FIGURE_MARGINS_IN, **(margins or {}))
    fig.subplots_adjust(left=m["left"] / width_in, right=1 - m["right"] / width_in,
                        bottom=m["bottom"] / height_in, top=1 - m["top"] / height_in,
                        hspace=m["hspace"], wspace=0.25)
    for ax in axes.flat:
        style_axes(ax)
    return fig, axes


def style_axes(ax) -> None:
    ax.grid(True, which="major", color="#d0d0d0", linewidth=0.7)
    ax.grid(True, which="minor", color="#ececec", linewidth=0.5)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.tick_params(labelsize=9)


def engineering_axis(ax, axis: str = "x", unit: str = "Hz") -> None:
    """Engineering-notation tick labels ('10 MHz', '2.2 µH') on `axis`."""
    from matplotlib.ticker import EngFormatter

    formatter = EngFormatter(unit=unit, places=None, sep=" ")
    (ax.xaxis if axis == "x" else ax.yaxis).set_major_formatter(formatter)


def save_figure(fig, path, dpi: int = 150) -> None:
    """Write PNG, SVG or PDF by the file's extension, atomically."""
    from pathlib import Path

    from rfmeas.errors import InputError
    from rfmeas.io.atomic import atomic_write_bytes

    path = Path(path)
    fmt = path.suffix.lstrip(".").lower() or "png"
    if fmt not in ("png", "svg", "pdf"):
        raise InputError(f"cannot save a plot as .{fmt}: use .png, .svg or .pdf", path=path)
    atomic_write_bytes(path, figure_bytes(fig, fmt, dpi))


def close(fig) -> None:
    import matplotlib.pyplot as plt

    plt.close(fig)


# How data and model are drawn everywhere: data as small open points, the model as a line.
DATA_STYLE = {"linestyle": "none", "marker": "o", "markersize": 2.2, "markerfacecolor": "none",
              "markeredgewidth": 0.6, "alpha": 0.85}
MODEL_STYLE = {"linestyle": "-", "linewidth": 1.4}
# (data colour, model colour, data marker, model line style) per S element or series
PAIRS = [
    (PALETTE["data"], PALETTE["model"], "o", "-"),
    (PALETTE["third"], PALETTE["fourth"], "s", "--"),
    (PALETTE["muted"], PALETTE["fail"], "^", "-."),
    (PALETTE["fourth"], PALETTE["third"], "D", ":"),
]


def pair(index: int):
    """Colours, marker and line style of the `index`-th data/model pair."""
    return PAIRS[index % len(PAIRS)]


def frequency_axis(ax, label: bool = True) -> None:
    """Logarithmic frequency axis in engineering notation."""
    from matplotlib.ticker import NullFormatter

    ax.set_xscale("log")
    engineering_axis(ax, "x", "Hz")
    ax.xaxis.set_minor_formatter(NullFormatter())
    if label:
        ax.set_xlabel("frequency")


def mark_band(ax, start_Hz, stop_Hz, label: str = "design band") -> None:
    """Shade a frequency band (drawn behind the data)."""
    if start_Hz is None or stop_Hz is None:
        return
    ax.axvspan(start_Hz, stop_Hz, color=PALETTE["band"], alpha=0.6, zorder=0, label=label, lw=0)


def mark_frequency(ax, f_Hz, label: str, style: str = "--", color: str | None = None) -> None:
    """A labelled vertical line at `f_Hz` (skipped when the value is missing)."""
    if f_Hz is None:
        return
    line = ax.axvline(f_Hz, color=color or PALETTE["muted"], linestyle=style, linewidth=1.0, label=label)
    line.set_gid(f"marker:{label}")


def figure_bytes(fig, fmt: str = "svg", dpi: int = 110) -> bytes:
    """The figure encoded as SVG, PNG or PDF bytes (SVG text as paths: no fonts needed)."""
    import io

    import matplotlib

    _plain_library_text(fig)
    buffer = io.BytesIO()
    with matplotlib.rc_context({"svg.fonttype": "path", "svg.hashsalt": "rfmeas"}):
        fig.savefig(buffer, format=fmt, dpi=dpi, metadata=_metadata(fmt))
    return buffer.getvalue()


_SUPERSCRIPT = str.maketrans("0123456789-+.", "⁰¹²³⁴⁵⁶⁷⁸⁹⁻⁺·")


def _plain_power(text: str) -> str:
    """'$\\mathdefault{2\\times10^{-3}}$' -> '2×10⁻³' (math text off: see use_backend)."""
    import re

    text = text.replace("$", "").replace("\\mathdefault", "").replace("\\times", "×")
    text = re.sub(r"\^\{([^}]*)\}", lambda m: m.group(1).translate(_SUPERSCRIPT), text)
    return text.replace("{", "").replace("}", "").replace("\\,", "")


def _plain_library_text(fig) -> None:
    """Library text meant as math text (log-axis ticks, the Smith chart's ∞) as plain text."""
    from matplotlib.ticker import Formatter, LogFormatterMathtext

    class PlainText(Formatter):
        def __init__(self, inner):
            self.inner = inner

        def set_axis(self, axis):
            super().set_axis(axis)
            self.inner.set_axis(axis)

        def set_locs(self, locs):
            self.inner.set_locs(locs)

        def __call__(self, x, pos=None):
            return _plain_power(self.inner(x, pos))

    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            for get, put in ((axis.get_major_formatter, axis.set_major_formatter),
                             (axis.get_minor_formatter, axis.set_minor_formatter)):
                if isinstance(get(), LogFormatterMathtext):
                    put(PlainText(get()))
    from matplotlib.text import Text

    for text in fig.findobj(Text):  # scikit-rf's Smith chart labels its right end in math text
        if text.get_text() == "$\\infty$":
            text.set_text("∞")


def _metadata(fmt: str):
    # no creation dates: the same analysis gives the same file
    if fmt == "svg":
        return {"Date": None}
    if fmt == "pdf":
        return {"CreationDate": None}
    return None


def soften_chart(ax, color: str = "#b5b5b5") -> None:
    """Turn an already drawn chart grid (circles and lines) light grey so the data stand out."""
    for artist in list(ax.patches) + list(ax.lines):
        if hasattr(artist, "set_edgecolor"):
            artist.set_edgecolor(color)
        else:
            artist.set_color(color)
        artist.set_linewidth(0.7)
    for text in ax.texts:
        text.set_fontsize(7)
        text.set_color("#555555")


LEGEND_CORNERS = ("upper right", "upper left", "lower right", "lower left", "upper center",
                  "lower center", "center right", "center left")


def data_points_px(ax):
    """Display coordinates (N×2) of every drawn data and model point of `ax`.

    Lines count when they carry a gid other than "marker:…" (the gids every
    plot gives its measured points and model curves); grid lines, band edges
    and reference lines do not.
    """
    import numpy as np

    chunks = []
    for line in ax.get_lines():
        gid = line.get_gid() or ""
        if not gid or gid.startswith("marker:") or not line.get_visible():
            continue
        xy = np.column_stack([np.asarray(line.get_xdata(), float), np.asarray(line.get_ydata(), float)])
        xy = xy[np.all(np.isfinite(xy), axis=1)]
        if xy.size:
            chunks.append(line.get_transform().transform(xy))
    renderer = ax.figure.canvas.get_renderer()
    for text in ax.texts:  # value labels are kept clear of the legend too
        box = text.get_window_extent(renderer)
        xs, ys = np.linspace(box.x0, box.x1, 4), np.linspace(box.y0, box.y1, 8)
        chunks.append(np.column_stack([np.repeat(xs, ys.size), np.tile(ys, xs.size)]))
    return np.concatenate(chunks) if chunks else np.empty((0, 2))


def points_inside(box, points, pad_px: float = 2.0) -> int:
    """How many of `points` (display coordinates) fall inside `box` (a Bbox), padded by `pad_px`."""
    import numpy as np

    if not len(points):
        return 0
    x, y = points[:, 0], points[:, 1]
    return int(np.count_nonzero((x >= box.x0 - pad_px) & (x <= box.x1 + pad_px)
                                & (y >= box.y0 - pad_px) & (y <= box.y1 + pad_px)))


def _legend_entries(ax):
    """Handles and labels with one entry per label (repeated labels drawn once)."""
    handles, labels = ax.get_legend_handles_labels()
    seen = {}
    for handle, label in zip(handles, labels):
        seen.setdefault(label, handle)
    return list(seen.values()), list(seen.keys())


def _grow_top(ax, share: float) -> None:
    """Add headroom above the data: `share` of the current height (in log space on a log axis)."""
    import math

    lo, hi = ax.get_ylim()
    if ax.get_yscale() == "log" and lo > 0 and hi > 0:
        ax.set_ylim(lo, 10 ** (math.log10(hi) + share * (math.log10(hi) - math.log10(lo))))
    else:
        ax.set_ylim(lo, hi + share * (hi - lo))


def place_legend(ax, tries: int = 4, **kwargs):
    """A legend in the emptiest corner of `ax`, off the data; returns the Legend.

    Tries each corner and keeps the first whose box covers no data point (in
    display coordinates); when every corner is taken, it adds headroom above the
    data and tries again, and as a last resort puts the legend outside the axes,
    under them.
    """
    fig = ax.figure
    renderer = fig.canvas.get_renderer()
    handles, labels = _legend_entries(ax)
    if not handles:
        return None
    options = dict({"fontsize": 7, "frameon": True, "framealpha": 0.9, "edgecolor": "none"}, **kwargs)
    ax.get_ylim()  # settle the autoscaled limits before measuring
    for attempt in range(tries):
        points = data_points_px(ax)
        for loc in LEGEND_CORNERS:
            legend = ax.legend(handles, labels, loc=loc, **options)
            if points_inside(legend.get_window_extent(renderer), points) == 0:
                return legend
        if attempt < tries - 1:
            _grow_top(ax, 0.25)
    legend = ax.legend(handles, labels, loc="upper left", bbox_to_anchor=(1.0, 1.0), **options)
    return legend


def decade_axis(ax, axis: str = "y", unit: str = "Ω") -> None:
    """Log axis with a labelled tick at every decade it spans, in engineering notation.

    Limits that hold fewer than two decades are widened to the decades around
    them, so a reader always has two labelled decades to read a value between.
    """
    import math

    from matplotlib.ticker import EngFormatter, LogLocator, NullFormatter

    target = ax.yaxis if axis == "y" else ax.xaxis
    get_lim, set_lim = (ax.get_ylim, ax.set_ylim) if axis == "y" else (ax.get_xlim, ax.set_xlim)
    (ax.set_yscale if axis == "y" else ax.set_xscale)("log")
    lo, hi = get_lim()
    if lo > 0 and hi > lo:
        decades = math.floor(math.log10(hi)) - math.ceil(math.log10(lo)) + 1
        if decades < 2:
            set_lim(min(lo, 10 ** math.floor(math.log10(lo))), max(hi, 10 ** math.ceil(math.log10(hi))))
    target.set_major_locator(LogLocator(base=10, numticks=100))
    target.set_minor_locator(LogLocator(base=10, subs=tuple(range(2, 10)), numticks=100))
    target.set_major_formatter(EngFormatter(unit=unit, places=None, sep=" "))
    target.set_minor_formatter(NullFormatter())


def annotate_frequency(ax, f_Hz: float, text: str, color: str | None = None, y: float = 0.98) -> None:
    """A small rotated value label beside a vertical marker at `f_Hz` (top of the axes)."""
    ax.annotate(text, xy=(f_Hz, y), xycoords=ax.get_xaxis_transform(), xytext=(2, 0),
                textcoords="offset points", rotation=90, va="top" if y > 0.5 else "bottom", ha="left",
                fontsize=7, color=color or PALETTE["muted"], annotation_clip=False,
                bbox={"facecolor": "white", "edgecolor": "none", "pad": 0.6, "alpha": 0.8})


def robust_limits(values, log: bool = False, percentiles=(1.0, 99.0), pad: float = 0.08,
                  include=()) -> tuple[float, float] | None:
    """Axis limits from a percentile range of `values` (so a few wild points cannot set the scale).

    `include` are values that must stay in view (a model curve, a plateau). On a
    log axis only positive values count and the padding is in decades.
    """
    import numpy as np

    v = np.asarray(values, float).ravel()
    v = v[np.isfinite(v) & ((v > 0) if log else True)]
    extra = np.asarray(list(include), float).ravel()
    extra = extra[np.isfinite(extra) & ((extra > 0) if log else True)]
    if v.size == 0 and extra.size == 0:
        return None
    lo_hi = [np.percentile(v, percentiles[0]), np.percentile(v, percentiles[1])] if v.size else []
    lo, hi = float(np.min(np.concatenate([lo_hi, extra]))), float(np.max(np.concatenate([lo_hi, extra])))
    if log:
        lo, hi = np.log10(lo), np.log10(hi)
        span = max(hi - lo, 0.3)
        return 10 ** (lo - pad * span - 0.05), 10 ** (hi + pad * span + 0.05)
    span = (hi - lo) or abs(hi) or 1.0
    return lo - pad * span, hi + pad * span


def plot_loss_part(ax, f_Hz, loss, color: str, label: str, gid: str, marker: str = "s"):
    """µ″ (or any loss part) on a log axis: positive points filled, negative ones as hollow red triangles at |value|.

    Noise makes a small loss part come out below zero; a log axis cannot show
    it, and dropping it would hide that the value is not resolved there.
    Returns the number of negative points shown.
    """
    import numpy as np

    loss = np.asarray(loss, float)
    positive = np.where(loss > 0, loss, np.nan)
    negative = np.where(loss < 0, -loss, np.nan)
    ax.plot(f_Hz, positive, linestyle="none", marker=marker, markersize=2.2, color=color,
            markerfacecolor=color, markeredgewidth=0.0, alpha=0.85, label=label, gid=gid)
    count = int(np.count_nonzero(np.isfinite(negative)))
    if count:
        ax.plot(f_Hz, negative, linestyle="none", marker="v", markersize=3.2, markerfacecolor="none",
                markeredgecolor=PALETTE["fail"], markeredgewidth=0.7,
                label=f"{label.split(' ')[0]} < 0, drawn at |value| ({count} points)", gid=f"{gid}-negative")
    return count
