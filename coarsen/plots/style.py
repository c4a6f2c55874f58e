"""The look shared by every figure: palette, sizes, fonts, and how figures are made and saved.

Palette (our own choice). Six line colours whose CIELAB lightness L* is about 32, 65, 35,
79, 53 and 15, with hues alternating between the blue and the orange-brown sides of the
blue-yellow axis, which dichromats of every kind still see. Simulated with the colour-vision
deficiency matrices of Machado, Oliveira & Fernandes (IEEE TVCG 15, 1291 (2009); recalled
from memory) at full severity, the smallest CIELAB distance between any two of them is
about 42 (normal vision), 17 (protanopia), 14 (deuteranopia) and 23 (tritanopia); a
distance above about 10 is plainly visible (common practice, no source). Every series also
gets its own marker, so colour is never the only cue. Times are coloured with a sequential
map of our own from a dark blue through a muted violet to a sand, monotonic in
lightness, so it reads in grey scale as well.

Figures are made with :class:`matplotlib.figure.Figure` directly, not through pyplot, so
they need no interactive backend and leave no global state behind; saving uses Agg.
"""

from __future__ import annotations

from contextlib import contextmanager

import numpy as np

__all__ = ["COLUMN_WIDTH", "DOUBLE_WIDTH", "LINE_COLOURS", "MARKERS", "PHASE_COLOURS",
           "BAND_COLOUR", "REFERENCE_COLOUR", "INK", "new_figure", "save_figure",
           "time_colour_map", "style"]

#: Width of one journal column and of a full page, inches.
COLUMN_WIDTH = 3.4
DOUBLE_WIDTH = 7.0

#: Text, axes and master-curve colour.
INK = "#1c1f26"
#: Line colours, in the order series take them (see the module docstring).
LINE_COLOURS = ("#1f4b8e", "#e0892e", "#8a3b26", "#9ccbe8", "#5f8a3c", "#23252b")
#: One marker per series, in the same order.
MARKERS = ("o", "s", "^", "D", "v", "P")
#: Reference slopes and lines.
REFERENCE_COLOUR = "#6e6e6e"
#: Posterior bands.
BAND_COLOUR = "#e0892e"
#: Domain pictures: the up phase dark, the down phase light (lightness differs by ~70),
#: missing sites mid grey.
PHASE_COLOURS = {"up": "#1f3f73", "down": "#f1e7cf", "missing": "#9a9a9a"}

# the light end stops at a sand that still stands out on white paper
_TIME_MAP_STOPS = ("#14284f", "#2f5797", "#7a6aa8", "#c58d8a", "#dfae6b")

_RC = {
    "font.size": 8.0,
    "axes.labelsize": 8.0,
    "axes.titlesize": 8.0,
    "legend.fontsize": 7.0,
    "xtick.labelsize": 7.0,
    "ytick.labelsize": 7.0,
    "axes.linewidth": 0.7,
    "lines.linewidth": 1.1,
    "lines.markersize": 3.5,
    "errorbar.capsize": 1.5,
    "xtick.direction": "in",
    "ytick.direction": "in",
    "xtick.top": True,
    "ytick.right": True,
    "xtick.major.width": 0.6,
    "ytick.major.width": 0.6,
    "xtick.minor.width": 0.4,
    "ytick.minor.width": 0.4,
    "legend.frameon": False,
    "axes.edgecolor": INK,
    "axes.labelcolor": INK,
    "text.color": INK,
    "xtick.color": INK,
    "ytick.color": INK,
    "mathtext.fontset": "dejavusans",
    "savefig.bbox": "tight",
    "savefig.pad_inches": 0.03,
}


@contextmanager
def style():
    """Apply the figures' rc settings while artists are created."""
    import matplotlib

    with matplotlib.rc_context(_RC):
        yield


def new_figure(width: float = COLUMN_WIDTH, height: float | None = None, **subplots):
    """A figure (not registered with pyplot) and its axes from ``Figure.subplots``.

    Parameters
    ----------
    width, height : float
        Inches; the height defaults to 0.75 of the width.
    **subplots
        Passed to :meth:`matplotlib.figure.Figure.subplots`.
    """
    from matplotlib.figure import Figure

    figure = Figure(figsize=(width, height if height is not None else 0.75 * width),
                    layout="constrained")
    axes = figure.subplots(**subplots)
    return figure, axes


def time_colour_map():
    """The sequential map for times (dark early, light late)."""
    from matplotlib.colors import LinearSegmentedColormap

    return LinearSegmentedColormap.from_list("coarsen_time", _TIME_MAP_STOPS)


def save_figure(figure, path, *, dpi: int = 300):
    """Write a figure atomically (.png, .pdf or .svg by the suffix).

    Raises
    ------
    ValueError
        For another suffix or a directory that does not exist.
    """
    import os
    import tempfile
    from pathlib import Path

    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in (".png", ".pdf", ".svg"):
        raise ValueError(f"output {str(path)!r}: the suffix must be .png, .pdf or .svg")
    directory = path.parent if str(path.parent) else Path(".")
    if not directory.is_dir():
        raise ValueError(f"output {str(path)!r}: the directory does not exist")
    handle, temporary = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp",
                                         dir=directory)
    os.close(handle)
    try:
        metadata = {"Software": None} if suffix == ".png" else None
        if suffix == ".pdf":
            metadata = {"CreationDate": None, "Producer": None}
        if suffix == ".svg":
            metadata = {"Date": None}
        figure.savefig(temporary, format=suffix[1:], dpi=dpi, metadata=metadata,
                       **{k: v for k, v in (("bbox_inches", "tight"),
                                            ("pad_inches", 0.03))})
        os.replace(temporary, path)
    except BaseException:
        if os.path.exists(temporary):
            os.unlink(temporary)
        raise
    return path


def log_ticks_ok(values) -> np.ndarray:
    """Finite positive entries of ``values`` (what a log axis can show)."""
    values = np.asarray(values, dtype=float)
    return np.isfinite(values) & (values > 0)


def plain_log_labels(axis) -> None:
    """Tick labels like 2, 10, 300 on a log axis (no 3x10^1); minor ticks labelled only on
    axes that span less than about a decade and a half."""
    from matplotlib.ticker import FuncFormatter

    def major(value, _):
        return f"{value:g}"

    def minor(value, _):
        low, high = sorted(axis.get_view_interval())
        if low <= 0 or high / low > 30:
            return ""
        mantissa = value / 10 ** np.floor(np.log10(value) + 1e-12)
        return f"{value:g}" if round(mantissa) in (2, 5) else ""

    axis.set_major_formatter(FuncFormatter(major))
    axis.set_minor_formatter(FuncFormatter(minor))
