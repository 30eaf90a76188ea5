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
SERIES = [PALETTE["data"], PALETTE["model"], PALETTE["third"], PALETTE["fourth"], PALETTE["muted"]]


def use_backend() -> None:
    """Select the non-interactive backend (plots go to files and reports, never to a window)."""
    import matplotlib

    matplotlib.use("Agg", force=True)


def new_figure(rows: int = 1, cols: int = 1, height_ratios=None, width_in: float = 7.0,
               height_in: float = 4.2, sharex: bool = True):
    """A figure with the house style applied; returns (fig, axes)."""
    use_backend()
    import matplotlib.pyplot as plt

    gridspec = {"height_ratios": height_ratios} if height_ratios else None
    fig, axes = plt.subplots(rows, cols, figsize=(width_in, height_in), sharex=sharex,
                             gridspec_kw=gridspec, squeeze=False, constrained_layout=True)
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
    import io
    from pathlib import Path

    from ..io.atomic import atomic_write_bytes

    path = Path(path)
    buffer = io.BytesIO()
    fig.savefig(buffer, format=path.suffix.lstrip(".").lower() or "png", dpi=dpi)
    atomic_write_bytes(path, buffer.getvalue())


def close(fig) -> None:
    import matplotlib.pyplot as plt

    plt.close(fig)
