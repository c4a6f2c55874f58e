"""Progress bars: a tqdm bar on stderr, or an object with the same interface that does nothing.

Only the command line decides whether a bar is shown (stderr is a terminal and ``--quiet`` was
not given); library functions take a ``progress`` flag and never print.
"""

from __future__ import annotations

import sys

__all__ = ["progress_bar", "wants_progress"]


class _NoBar:
    """Stands in for a tqdm bar when progress is not shown."""

    def update(self, n=1):
        pass

    def set_postfix_str(self, text, refresh=True):
        pass

    def close(self):
        pass

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
        return False


def wants_progress(quiet: bool = False, stream=None) -> bool:
    """True when a progress bar should be shown: not quiet and ``stream`` is a terminal."""
    stream = sys.stderr if stream is None else stream
    if quiet:
        return False
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError):
        return False


def progress_bar(show: bool, *, total: float, description: str, unit: str = "sweep",
                 initial: float = 0):
    """A tqdm bar on stderr when ``show`` is true, otherwise a bar that does nothing.

    Parameters
    ----------
    show : bool
        Whether to draw anything.
    total : float
        Total amount of work in ``unit``.
    description : str
        Text shown before the bar.
    unit : str, default: "sweep"
        Name of one unit of work.
    initial : float, default: 0
        Work already done (a resumed run).
    """
    if not show:
        return _NoBar()
    from tqdm import tqdm

    return tqdm(total=total, desc=description, unit=unit, initial=initial, file=sys.stderr,
                dynamic_ncols=True, leave=False)
