"""Growth figures: L(t) per estimator with the fitted law, and the effective exponent n_eff(t)."""

from __future__ import annotations

import json

import numpy as np

from coarsen.plots.style import (BAND_COLOUR, COLUMN_WIDTH, INK, LINE_COLOURS, MARKERS,
                                 REFERENCE_COLOUR, new_figure, plain_log_labels, style)

__all__ = ["fit_band", "model_effective_exponent", "plot_exponent", "plot_growth"]

#: The classical exponents drawn as references: Allen-Cahn (non-conserved) and
#: Lifshitz-Slyozov (conserved); see :data:`coarsen.fit.growth.LAWS`.
REFERENCE_EXPONENTS = ((0.5, "1/2"), (1.0 / 3.0, "1/3"))
_ESTIMATOR_LABELS = {"corr_zero": "C(r) zero", "corr_half": "C(r) = 1/2",
                     "sk_moment": "S(k) moment", "wall": "wall density"}
_MAX_DRAWS = 2000


def _as_fit_dataset(fit):
    """A fit dataset from a GrowthFit, a dataset or None."""
    if fit is None or hasattr(fit, "data_vars"):
        return fit
    if hasattr(fit, "to_dataset"):
        return fit.to_dataset()
    raise TypeError(f"fit: {type(fit).__name__} is not a growth fit or its dataset")


def is_fit_dataset(ds) -> bool:
    """True for the dataset of ``coarsen fit -o``."""
    return "input_time" in ds.variables and "model" in ds.attrs


def _posterior_draws(ds) -> tuple[str, dict]:
    """(model, parameter name -> draws) of a fit dataset: at most ``_MAX_DRAWS`` draws, evenly
    thinned, and parameters held fixed in the fit as constant arrays of their value."""
    model = ds.attrs["model"]
    draws = ds[f"posterior_{model}"].values
    names = [str(v) for v in ds[f"parameter_{model}"].values]
    if draws.shape[0] > _MAX_DRAWS:
        draws = draws[np.linspace(0, draws.shape[0] - 1, _MAX_DRAWS).astype(int)]
    values = {name: draws[:, i] for i, name in enumerate(names)}
    for name, entry in json.loads(ds.attrs["summary"])["parameters"].items():
        values.setdefault(name, np.full(draws.shape[0], float(entry["median"])))
    return model, values


def fit_band(fit, time=None, *, probability: float = 0.95) -> dict:
    """The fitted law's posterior median and central band of L(t).

    Parameters
    ----------
    fit : coarsen.fit.GrowthFit or xarray.Dataset
        A growth fit or its dataset.
    time : array_like, optional
        Times (sweeps); default 100 log-spaced times across the fit window.
    probability : float, default: 0.95

    Returns
    -------
    dict with ``time``, ``median``, ``low``, ``high`` (lattice spacings) and ``model``
    """
    ds = _as_fit_dataset(fit)
    model, values = _posterior_draws(ds)
    if time is None:
        time = np.geomspace(float(ds.attrs["tmin"]), float(ds.attrs["tmax"]), 100)
    t = np.asarray(time, dtype=float)[np.newaxis]
    n, a = values["n"][:, np.newaxis], values["A"][:, np.newaxis]
    with np.errstate(invalid="ignore", over="ignore"):
        if model == "power":
            length = a * t ** n
        elif model == "offset":
            length = values["L0"][:, np.newaxis] + a * t ** n
        else:
            length = a * np.where(t + values["t0"][:, np.newaxis] > 0,
                                  t + values["t0"][:, np.newaxis], np.nan) ** n
    tail = 50.0 * (1.0 - probability)
    low, median, high = np.nanpercentile(length, [tail, 50.0, 100.0 - tail], axis=0)
    return {"time": t[0], "median": median, "low": low, "high": high, "model": model}


def model_effective_exponent(fit, time, *, probability: float = 0.95) -> dict:
    """The fitted law's own n_eff(t) = d ln L / d ln t: median and central band.

    A pure power has n_eff = n at all times; L0 + A t^n has n A t^n / (L0 + A t^n), and
    A (t + t0)^n has n t / (t + t0), so only their late-time limit is the fitted n.

    Returns
    -------
    dict with ``time``, ``median``, ``low``, ``high``
    """
    model, values = _posterior_draws(_as_fit_dataset(fit))
    t = np.asarray(time, dtype=float)[np.newaxis]
    n = values["n"][:, np.newaxis]
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        if model == "offset":
            grown = values["A"][:, np.newaxis] * t ** n
            slope = n * grown / (values["L0"][:, np.newaxis] + grown)
        elif model == "shifted":
            slope = n * t / (t + values["t0"][:, np.newaxis])
        else:
            slope = np.broadcast_to(n, (n.shape[0], t.shape[1]))
    tail = 50.0 * (1.0 - probability)
    low, median, high = np.nanpercentile(slope, [tail, 50.0, 100.0 - tail], axis=0)
    return {"time": t[0], "median": median, "low": low, "high": high}


def _replica_mean(values):
    from coarsen.dataset import replica_mean_and_error

    return replica_mean_and_error(values)


def _lengths(ds, estimator):
    values = ds["length"].sel(estimator=estimator).transpose("replica", "time").values
    mean, error = _replica_mean(values)
    return ds["time"].values, mean, error


def _reference_slopes(ax, time, level, *, exponents=REFERENCE_EXPONENTS):
    """Lines L ~ t^n through (t_mid, level) over the middle of the time range, labelled."""
    t = np.geomspace(time[0] ** 0.6 * time[-1] ** 0.4, time[-1], 2)
    for (exponent, text), style_ in zip(exponents, ("--", ":")):
        y = level * (t / t[0]) ** exponent
        ax.plot(t, y, style_, color=REFERENCE_COLOUR, lw=0.9, zorder=1)
        ax.annotate(f"$t^{{{text}}}$", (t[-1], y[-1]), xytext=(2, 0),
                    textcoords="offset points", va="center", ha="left", fontsize=7,
                    color=REFERENCE_COLOUR)


def plot_growth(run=None, fit=None, *, estimators=None, title=None):
    """L(t) on log-log axes per estimator with replica error bars and the fitted law.

    Parameters
    ----------
    run : xarray.Dataset, optional
        A run or lab dataset (``length``), or a fit dataset (its input lengths are drawn).
    fit : coarsen.fit.GrowthFit or xarray.Dataset, optional
        A growth fit: its posterior median and 95 % band are drawn over the fit window.
    estimators : sequence of str, optional
        Which length estimators to draw (default: all in the dataset).
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    fit = _as_fit_dataset(fit)
    if run is not None and is_fit_dataset(run):
        run, fit = None, run if fit is None else fit
    if run is None and fit is None:
        raise ValueError("growth: give a run dataset, a fit, or both")
    with style():
        figure, ax = new_figure(COLUMN_WIDTH, 1.0 * COLUMN_WIDTH)
        all_times, lowest = [], []
        if run is not None:
            names = list(estimators or [str(e) for e in run["estimator"].values])
            # a length beyond the system's largest side says only that the estimator has
            # saturated (the wall length diverges as the last wall vanishes): not drawn
            size = float(np.max(run.attrs.get("size", np.inf)))
            every = [str(e) for e in run["estimator"].values]
            unknown = [name for name in names if name not in every]
            if unknown:
                raise ValueError(f"estimator: {unknown[0]!r} is not one of {', '.join(every)}")
            for name in names:
                i = every.index(name)  # one style per estimator, whichever are drawn
                time, mean, error = _lengths(run, name)
                ok = np.isfinite(mean) & (mean > 0) & (time > 0) & (mean <= size)
                if not ok.any():
                    continue
                ax.errorbar(time[ok], mean[ok], yerr=np.nan_to_num(error[ok]),
                            fmt=MARKERS[i % 6],
                            color=LINE_COLOURS[i % 6], ms=3.0, lw=0.8, elinewidth=0.7,
                            mfc="white" if i % 2 else LINE_COLOURS[i % 6],
                            label=_ESTIMATOR_LABELS.get(name, name), zorder=3)
                all_times.append(time[ok])
                lowest.append(np.min(mean[ok]))
        elif fit is not None:
            time = fit["input_time"].values
            length = np.exp(fit["input_log_length"].values)
            inside = fit["in_window"].values.astype(bool)
            label = _ESTIMATOR_LABELS.get(fit.attrs.get("estimator"), "input")
            ax.plot(time[inside], length[inside], "o", color=LINE_COLOURS[0], ms=3.0,
                    label=f"{label} (fitted)", zorder=3)
            ax.plot(time[~inside], length[~inside], "o", mfc="white", color=LINE_COLOURS[0],
                    ms=3.0, label="outside the window", zorder=3)
            all_times.append(time)
            lowest.append(np.min(length))
        if fit is not None:
            band = fit_band(fit)
            s = json.loads(fit.attrs["summary"])["exponent"]
            ax.fill_between(band["time"], band["low"], band["high"], color=BAND_COLOUR,
                            alpha=0.35, lw=0, zorder=2, label="95% band")
            ax.plot(band["time"], band["median"], "-", color=INK, lw=1.0, zorder=4,
                    label=f"fit ({band['model']}, {fit.attrs.get('estimator') or 'table'}): "
                          f"n = {s['median']:.3f} "
                          f"[{s['hdi95'][0]:.3f}, {s['hdi95'][1]:.3f}]")
        time = np.concatenate(all_times)
        time = np.sort(time[time > 0])
        _reference_slopes(ax, time, 0.55 * min(lowest))
        ax.set_xscale("log")
        ax.set_yscale("log")
        plain_log_labels(ax.xaxis)
        plain_log_labels(ax.yaxis)
        ax.set_xlabel("time $t$ (MC sweeps)")
        ax.set_ylabel("domain length $L$ (lattice spacings)")
        ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.15), ncols=2, handlelength=1.6,
                  columnspacing=1.0)
        if title:
            ax.set_title(title)
    return figure


def _effective_from_run(run, estimator):
    from coarsen.fit.effective import effective_exponent
    from coarsen.fit.inputs import growth_data_from_dataset

    return effective_exponent(growth_data_from_dataset(run, estimator))


def plot_exponent(source, *, estimator: str = "corr_half", title=None):
    """The effective exponent n_eff(t) = d ln L / d ln t with its band and the references.

    Parameters
    ----------
    source : xarray.Dataset or coarsen.fit.GrowthFit
        A fit (its n_eff and fitted n are drawn) or a run dataset (n_eff from ``estimator``).
    estimator : str, default: "corr_half"
        For a run dataset.
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    fit = None
    if not hasattr(source, "data_vars") or is_fit_dataset(source):
        fit = _as_fit_dataset(source)
        time = fit["effective_time"].values
        value = fit["effective_exponent"].values
        error = fit["effective_exponent_err"].values
        label = fit.attrs.get("estimator") or "table"
    else:
        effective = _effective_from_run(source, estimator)
        time, value, error, label = effective.time, effective.exponent, effective.error, \
            estimator
    label = _ESTIMATOR_LABELS.get(label, label)
    with style():
        figure, ax = new_figure(COLUMN_WIDTH, 0.85 * COLUMN_WIDTH)
        ok = np.isfinite(value) & (time > 0)
        err = np.where(np.isfinite(error), error, 0.0)
        ax.fill_between(time[ok], (value - 1.96 * err)[ok], (value + 1.96 * err)[ok],
                        color=LINE_COLOURS[3], alpha=0.45, lw=0, label="95% band")
        ax.fill_between(time[ok], (value - err)[ok], (value + err)[ok], color=LINE_COLOURS[0],
                        alpha=0.35, lw=0, label="68% band")
        ax.plot(time[ok], value[ok], "o-", color=LINE_COLOURS[0], ms=2.8, lw=0.9,
                label=f"$n_\\mathrm{{eff}}$ ({label})")
        for (exponent, text), dash in zip(REFERENCE_EXPONENTS, ("--", ":")):
            ax.axhline(exponent, ls=dash, color=REFERENCE_COLOUR, lw=0.9)
            ax.annotate(text, (1.0, exponent), xycoords=("axes fraction", "data"),
                        xytext=(2, 0), textcoords="offset points", va="center",
                        fontsize=7, color=REFERENCE_COLOUR)
        if fit is not None:
            s = json.loads(fit.attrs["summary"])["exponent"]
            tmin, tmax = float(fit.attrs["tmin"]), float(fit.attrs["tmax"])
            model = fit.attrs["model"]
            if model == "power":
                ax.fill_between([tmin, tmax], *s["hdi95"], color=BAND_COLOUR, alpha=0.4,
                                lw=0, label=f"fitted n, 95% HDI [{s['hdi95'][0]:.3f}, "
                                            f"{s['hdi95'][1]:.3f}]")
            else:
                # the asymptotic n of L0 + A t^n or A (t + t0)^n is not n_eff in the window:
                # draw the fitted law's own n_eff(t), and its n as a bar at the right edge
                curve = model_effective_exponent(fit, np.geomspace(tmin, tmax, 60))
                ax.fill_between(curve["time"], curve["low"], curve["high"], color=BAND_COLOUR,
                                alpha=0.4, lw=0, label=f"$n_\\mathrm{{eff}}$ of the {model} "
                                                       f"fit, 95%")
                ax.errorbar([tmax], [s["median"]], yerr=[[s["median"] - s["hdi95"][0]],
                                                         [s["hdi95"][1] - s["median"]]],
                            fmt="D", color=LINE_COLOURS[2], ms=3.5, elinewidth=1.0,
                            capsize=2.5, zorder=5,
                            label=f"fitted asymptotic n = {s['median']:.3f} "
                                  f"[{s['hdi95'][0]:.3f}, {s['hdi95'][1]:.3f}]")
        finite = value[ok]
        low = min(0.0, np.nanmin(finite - 1.96 * err[ok])) if finite.size else 0.0
        high = max(0.75, np.nanmax(finite + 1.96 * err[ok])) if finite.size else 1.0
        ax.set_ylim(max(low, -0.5), min(high, 1.5))
        ax.set_xscale("log")
        plain_log_labels(ax.xaxis)
        ax.set_xlabel("time $t$ (MC sweeps)")
        ax.set_ylabel(r"$n_\mathrm{eff} = d\ln L / d\ln t$")
        ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.22), ncols=2, handlelength=1.4,
                  columnspacing=1.0)
        if title:
            ax.set_title(title)
    return figure
