"""Publication figures of runs, fits and collapses: one function per kind, and ``coarsen plot``.

=============  =========================================================  ====================
kind           what                                                       input
=============  =========================================================  ====================
``growth``     L(t) per estimator, replica error bars, the fitted law's   run (+ fit) or fit
               median and 95 % band, reference slopes 1/2 and 1/3
``exponent``   n_eff(t) with its 68/95 % band, references 1/2 and 1/3     fit or run
``collapse``   rescaled curves coloured by time, master curve and band;   collapse
               log-log with the Porod slope for S(k)
``structure``  S(k, t) per time on log-log axes, Porod slope              run
``snapshots``  kept configurations (staggered field for order = neel)     run
``posterior``  corner plot of the fitted parameters                       fit or collapse
``protocol``   T(t) (and h(t)) above L(t), crossings of Tc marked         run or ramp scan
``seeded``     seeded-domain area and interface positions against time   seeded run
=============  =========================================================  ====================

The functions live in :mod:`coarsen.plots` and return :class:`matplotlib.figure.Figure`
objects made without pyplot; :func:`save_figure` writes .png, .pdf or .svg atomically.
"""

from __future__ import annotations

from pathlib import Path

from coarsen.plots import (fit_band, plot_collapse, plot_exponent, plot_growth, plot_posterior,
                           plot_protocol, plot_seeded, plot_snapshots, plot_structure,
                           save_figure)

__all__ = ["KINDS", "default_kind", "fit_band", "make_figure", "plot_collapse", "plot_exponent",
           "plot_file", "plot_growth", "plot_posterior", "plot_protocol", "plot_seeded",
           "plot_snapshots", "plot_structure", "save_figure"]

#: Figure kinds, in the order of the contract.
KINDS = ("growth", "exponent", "collapse", "structure", "snapshots", "posterior", "protocol",
         "seeded")


def default_kind(ds) -> str:
    """The kind a dataset is drawn as without ``--kind``: collapse, growth (fits, runs)."""
    if "master_curve" in ds:
        return "collapse"
    return "growth"


def make_figure(kind: str, source, *, fit=None, estimator: str | None = None, title=None):
    """The figure of one kind.

    Parameters
    ----------
    kind : str
        One of :data:`KINDS`.
    source : xarray.Dataset or a fit/collapse result
        What the kind draws (see the table above).
    fit : coarsen.fit.GrowthFit or xarray.Dataset, optional
        ``growth``: a fit to draw over the run's lengths.
    estimator : str, optional
        ``exponent``/``protocol`` with a run: the length estimator (default corr_half);
        ``growth``: draw only this estimator.
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    if kind not in KINDS:
        raise ValueError(f"kind: {kind!r} is not one of {', '.join(KINDS)}")
    if kind == "growth":
        return plot_growth(source, fit, estimators=[estimator] if estimator else None,
                           title=title)
    if fit is not None:
        raise ValueError(f"fit: only the growth figure draws a separate fit (kind {kind!r})")
    if kind == "exponent":
        return plot_exponent(source, estimator=estimator or "corr_half", title=title)
    if kind == "collapse":
        return plot_collapse(source, title=title)
    if kind == "structure":
        return plot_structure(source, title=title)
    if kind == "snapshots":
        return plot_snapshots(source, title=title)
    if kind == "posterior":
        return plot_posterior(source, title=title)
    if kind == "protocol":
        return plot_protocol(source, estimator=estimator or "corr_half", title=title)
    return plot_seeded(source, title=title)


def _needs(kind: str, ds, path) -> None:
    """A one-line error when the dataset cannot make this kind of figure."""
    need = {"structure": "structure_factor", "snapshots": "snapshot", "seeded": "seed_area",
            "protocol": "temperature", "collapse": "master_curve"}
    name = need.get(kind)
    if name and name not in ds:
        raise ValueError(f"{str(path)!r}: has no {name!r}, which a {kind} figure needs")
    if kind in ("growth", "exponent") and "length" not in ds and "input_time" not in ds:
        raise ValueError(f"{str(path)!r}: has no lengths (a run, lab or fit dataset is needed "
                         f"for a {kind} figure)")
    if kind == "posterior" and "posterior" not in ds and \
            f"posterior_{ds.attrs.get('model')}" not in ds:
        raise ValueError(f"{str(path)!r}: holds no posterior draws (use a fit or a collapse "
                         f"dataset)")


def plot_file(input_path, output, *, kind: str | None = None, fit=None,
              estimator: str | None = None, title=None) -> Path:
    """Draw a dataset file as one kind of figure and save it (``coarsen plot``).

    Parameters
    ----------
    input_path : path-like
        A run, lab, ramp-scan, fit or collapse dataset (.nc).
    output : path-like
        .png, .pdf or .svg.
    kind : str, optional
        Default: ``collapse`` for a collapse dataset, ``growth`` otherwise.
    fit : path-like, optional
        ``growth``: a fit dataset (``coarsen fit -o``) to draw over the lengths.
    estimator, title
        See :func:`make_figure`.

    Returns
    -------
    pathlib.Path
        The written figure.
    """
    from coarsen.dataset import open_dataset

    suffix = Path(output).suffix.lower()
    if suffix not in (".png", ".pdf", ".svg"):
        raise ValueError(f"output {str(output)!r}: the suffix must be .png, .pdf or .svg")
    ds = open_dataset(input_path)
    kind = kind or default_kind(ds)
    if kind not in KINDS:
        raise ValueError(f"kind: {kind!r} is not one of {', '.join(KINDS)}")
    _needs(kind, ds, input_path)
    fit_ds = None
    if fit is not None:
        fit_ds = open_dataset(fit)
        if "input_time" not in fit_ds or "model" not in fit_ds.attrs:
            raise ValueError(f"fit {str(fit)!r}: is not a growth fit (make one with coarsen "
                             f"fit -o)")
    figure = make_figure(kind, ds, fit=fit_ds, estimator=estimator, title=title)
    return save_figure(figure, output)
