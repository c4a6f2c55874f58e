"""Curve figures: scaling collapses, S(k, t) per time, and corner plots of posteriors."""

from __future__ import annotations

import json

import numpy as np

from coarsen.plots.style import (BAND_COLOUR, COLUMN_WIDTH, INK, LINE_COLOURS,
                                 REFERENCE_COLOUR, new_figure, plain_log_labels, style,
                                 time_colour_map)

__all__ = ["plot_collapse", "plot_posterior", "plot_structure"]

#: Most times drawn in a structure-factor figure (evenly chosen in log t).
MAX_CURVES = 8


def _as_dataset(source, what: str):
    if hasattr(source, "data_vars"):
        return source
    if hasattr(source, "to_dataset"):
        return source.to_dataset()
    raise TypeError(f"{what}: {type(source).__name__} is not a result or its dataset")


def _site_dimension(ds) -> int:
    return sum(1 for name in ("x", "y", "z") if name in ds.dims) or 2


def _time_norm(values):
    from matplotlib.colors import LogNorm, Normalize

    values = np.asarray(values, dtype=float)
    positive = values[values > 0]
    if positive.size and positive.max() > positive.min() * 3:
        return LogNorm(positive.min(), positive.max())
    return Normalize(np.min(values), np.max(values) if np.ptp(values) else np.min(values) + 1)


def _porod_line(ax, x, y, dimension: int):
    """A k^-(d+1) segment (Porod's law) below the tail of the data, labelled."""
    ok = np.isfinite(x) & np.isfinite(y) & (x > 0) & (y > 0)
    if ok.sum() < 2:
        return
    x, y = x[ok], y[ok]
    x0 = np.exp(np.log(x.min()) + 0.65 * np.log(x.max() / x.min()))
    x1 = x.max()
    near = np.argmin(np.abs(np.log(x / x0)))
    y0 = 0.35 * y[near]
    xs = np.array([x0, x1])
    ys = y0 * (xs / x0) ** (-(dimension + 1))
    ax.plot(xs, ys, "--", color=REFERENCE_COLOUR, lw=0.9)
    ax.annotate(f"Porod $k^{{-{dimension + 1}}}$", (np.sqrt(x0 * x1), y0 *
                (np.sqrt(x1 / x0)) ** (-(dimension + 1))), xytext=(-4, -4),
                textcoords="offset points", ha="right", va="top", fontsize=7,
                color=REFERENCE_COLOUR)


def plot_structure(run, *, times=None, title=None):
    """S(k, t) on log-log axes, one curve per time, with the Porod slope.

    Shells up to |k| = pi are drawn (beyond it only the zone's corners are left).

    Parameters
    ----------
    run : xarray.Dataset
        A run or lab dataset with ``structure_factor`` (for a ramp scan the longest ramp).
    times : sequence of float, optional
        Times to draw (nearest measured ones); default up to 8 evenly in log t.
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    if "structure_factor" not in run:
        raise ValueError("structure: the dataset has no structure_factor")
    if "ramp_time" in run["structure_factor"].dims:
        run = run.isel(ramp_time=-1)
    all_times = run["time"].values
    if times is None:
        index = np.unique(np.round(np.linspace(0, all_times.size - 1,
                                               min(MAX_CURVES, all_times.size))).astype(int))
    else:
        index = np.unique([int(np.argmin(np.abs(all_times - t))) for t in times])
    k = run["k"].values
    d = _site_dimension(run)
    cmap, norm = time_colour_map(), _time_norm(all_times[index])
    with style():
        figure, ax = new_figure(COLUMN_WIDTH, 0.8 * COLUMN_WIDTH)
        tail_x, tail_y = None, None
        for i in index:
            s = run["structure_factor"].isel(time=i).values
            e = run["structure_factor_sem"].isel(time=i).values
            # shells beyond |k| = pi hold only the corners of the Brillouin zone (few modes,
            # not a radial average): they made a spurious spike and drop at the right edge
            ok = (k > 0) & (k <= np.pi * (1 + 1e-9)) & np.isfinite(s) & (s > 0)
            colour = cmap(norm(all_times[i]))
            ax.plot(k[ok], s[ok], "-", color=colour, lw=1.0)
            low = np.clip(s - e, s * 1e-3, None)
            ax.fill_between(k[ok], low[ok], (s + e)[ok], color=colour, alpha=0.25, lw=0)
            tail_x, tail_y = k[ok], s[ok]
        if tail_x is not None:
            _porod_line(ax, tail_x, tail_y, d)
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.set_xlabel("wave number $|k|$ (1/lattice spacing)")
        ax.set_ylabel("structure factor $S(k, t)$")
        _colour_bar(figure, ax, cmap, norm)
        if title:
            ax.set_title(title)
    return figure


def _colour_bar(figure, ax, cmap, norm, label="time $t$ (MC sweeps)"):
    from matplotlib.cm import ScalarMappable

    bar = figure.colorbar(ScalarMappable(norm=norm, cmap=cmap), ax=ax, pad=0.02,
                          fraction=0.06, aspect=25)
    bar.set_label(label)
    if getattr(norm, "vmin", 1) > 0 and type(norm).__name__ == "LogNorm":
        plain_log_labels(bar.ax.yaxis)
    bar.outline.set_linewidth(0.5)
    return bar


def _collapse_labels(ds, summary):
    observable = ds.attrs.get("observable")
    form = ds.attrs.get("form")
    lattice_k = summary.get("wave_number") == "lattice"
    k = r"2\sin(k/2)" if lattice_k else "k"
    if form == "dynamic":
        scale = r"(t/t_\mathrm{ref})^{n}"
        if observable == "correlation":
            return rf"$r\,/\,{scale}$", r"$C(r, t)$"
        return rf"${k}\,{scale}$", r"$S(k, t)\,(t/t_\mathrm{ref})^{-d n}$"
    if form == "measured":
        if observable == "correlation":
            return r"$r\,/\,L(t)$", r"$C(r, t)$"
        return rf"${k}\,L(t)$", r"$S(k, t)\,/\,L(t)^{d}$"
    name = summary.get("reference_name") or "p"
    return f"rescaled $x$ ({name})", "rescaled $y$"


def plot_collapse(collapse, *, dimension: int = 2, title=None):
    """Rescaled curves coloured by time (or the curve label) with the master curve and band.

    For a structure factor the axes are logarithmic, which shows the Porod tail
    k^-(d+1) (drawn as a reference).

    Parameters
    ----------
    collapse : coarsen.fit.CollapseFit or xarray.Dataset
        A collapse or its dataset (``coarsen collapse -o``).
    dimension : int, default: 2
        Space dimension for the Porod reference.
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    ds = _as_dataset(collapse, "collapse")
    if "master_curve" not in ds:
        raise ValueError("collapse: the dataset is not a collapse (no master_curve); make one "
                         "with coarsen collapse -o")
    summary = json.loads(ds.attrs.get("summary", "{}"))
    log_x, log_y = bool(summary.get("log_x")), bool(summary.get("log_y"))
    observable = ds.attrs.get("observable")
    label = ds["point_parameter"].values
    x, y = ds["rescaled_x"].values, ds["rescaled_y"].values
    e = ds["rescaled_error"].values
    grid = ds["grid"].values
    cmap, norm = time_colour_map(), _time_norm(label)
    with style():
        figure, ax = new_figure(COLUMN_WIDTH, 0.8 * COLUMN_WIDTH)
        ax.fill_between(grid, ds["master_curve_low95"].values, ds["master_curve_high95"].values,
                        color=BAND_COLOUR, alpha=0.3, lw=0, label="95% band", zorder=1)
        ax.fill_between(grid, ds["master_curve_low68"].values, ds["master_curve_high68"].values,
                        color=BAND_COLOUR, alpha=0.45, lw=0, label="68% band", zorder=1)
        ax.plot(grid, ds["master_curve"].values, "-", color=INK, lw=1.0, zorder=4,
                label="master curve")
        for value in np.unique(label):
            pick = label == value
            colour = cmap(norm(value))
            ax.errorbar(x[pick], y[pick], yerr=e[pick], fmt="o", ms=2.6, color=colour,
                        mec=INK, mew=0.25, elinewidth=0.5, lw=0, zorder=3)
        if log_x:
            ax.set_xscale("log")
        if log_y:
            ax.set_yscale("log")
        if observable == "structure_factor":
            _porod_line(ax, grid, ds["master_curve"].values, dimension)
        xlabel, ylabel = _collapse_labels(ds, summary)
        ax.set_xlabel(xlabel)
        ax.set_ylabel(ylabel)
        name = summary.get("reference_name") or "time"
        _colour_bar(figure, ax, cmap, norm,
                    "time $t$ (MC sweeps)" if name == "time" else name.replace("_", " "))
        exponents = summary.get("exponents", {})
        words = [f"{n} = {s['median']:.3f} [{s['hdi95'][0]:.3f}, {s['hdi95'][1]:.3f}]"
                 for n, s in exponents.items() if not s.get("fixed")]
        words.append(f"quality S = {float(ds.attrs.get('quality', np.nan)):.2f}")
        summary_line = "; ".join(words)
        ax.set_title(f"{title}\n{summary_line}" if title else summary_line, fontsize=7)
        ax.legend(loc="lower left", handlelength=1.4)
    return figure


def _hdi(values, probability):
    from coarsen.fit.sampling import hdi

    return hdi(values, probability)


def _density_levels(h, masses=(0.95, 0.68)):
    flat = np.sort(h.ravel())[::-1]
    total = flat.sum()
    cumulative = np.cumsum(flat) / total if total > 0 else flat
    return [flat[min(np.searchsorted(cumulative, m), flat.size - 1)] for m in masses]


def _posterior_draws(ds):
    """(names, draws, units) from a fit or collapse dataset."""
    if "posterior" in ds and "parameter" in ds.coords:
        names = [str(n) for n in ds["parameter"].values]
        draws = ds["posterior"].values
        keep = [i for i, n in enumerate(names) if not n.startswith("gp_")] or \
            list(range(len(names)))
        return [names[i] for i in keep], draws[:, keep]
    model = ds.attrs.get("model")
    if model and f"posterior_{model}" in ds:
        names = [str(n) for n in ds[f"parameter_{model}"].values]
        draws = ds[f"posterior_{model}"].values.copy()
        if "A" in names:
            draws[:, names.index("A")] = np.log(draws[:, names.index("A")])
            names[names.index("A")] = "ln A"
        return names, draws
    raise ValueError("posterior: the dataset holds no posterior draws (a fit from coarsen fit "
                     "-o or a collapse from coarsen collapse -o without --quick)")


#: Short symbols for the panel titles (the axis labels carry the units).
_PARAMETER_SYMBOLS = {"n": "$n$", "ln A": r"$\ln A$", "L0": "$L_0$", "t0": "$t_0$",
                      "sigma_extra": r"$\sigma_\mathrm{extra}$", "a": "$a$", "b": "$b$"}

_PARAMETER_LABELS = {"n": "$n$", "ln A": r"$\ln A$", "L0": "$L_0$ (lattice spacings)",
                     "t0": "$t_0$ (MC sweeps)", "sigma_extra": r"$\sigma_\mathrm{extra}$",
                     "a": "$a$", "b": "$b$"}


def plot_posterior(source, *, bins: int = 40, title=None):
    """A corner plot: each parameter's marginal with its median and 95 % HDI, and every pair.

    Parameters
    ----------
    source : coarsen.fit.GrowthFit, coarsen.fit.CollapseFit or xarray.Dataset
        A fit or a collapse (the exponents; the Gaussian process's hyperparameters are left
        out) or their datasets. ``A`` is shown as ``ln A``.
    bins : int, default: 40
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    ds = _as_dataset(source, "posterior")
    names, draws = _posterior_draws(ds)
    k = len(names)
    # axis ranges from the central 99.8 % of the draws, so a few stragglers of the chain do
    # not squeeze the bulk of the posterior into a corner
    limits = []
    for i in range(k):
        low, high = np.quantile(draws[:, i], [0.001, 0.999])
        pad = 0.08 * (high - low) if high > low else 0.5 * max(abs(low), 1.0)
        limits.append((low - pad, high + pad))
    with style():
        size = max(COLUMN_WIDTH, 1.25 * k)
        figure, axes = new_figure(size, size, nrows=k, ncols=k, squeeze=False)
        for i in range(k):
            for j in range(k):
                ax = axes[i, j]
                if j > i:
                    ax.set_axis_off()
                    continue
                if i == j:
                    values = draws[:, i]
                    ax.hist(values, bins=bins, range=limits[i], color=LINE_COLOURS[3],
                            histtype="stepfilled",
                            edgecolor=LINE_COLOURS[0], lw=0.7)
                    low, high = _hdi(values, 0.95)
                    median = float(np.median(values))
                    for v, dash in ((low, ":"), (median, "-"), (high, ":")):
                        ax.axvline(v, color=INK, ls=dash, lw=0.8)
                    ax.set_yticks([])
                    ax.set_xlim(*limits[i])
                    ax.set_title(f"{_PARAMETER_SYMBOLS.get(names[i], names[i])} = "
                                 f"{median:.3g} [{low:.3g}, {high:.3g}]", fontsize=6.5)
                    if names[i] == "n":
                        # the classical exponents as dashed lines, labelled in a white box at
                        # the bottom (1/2 right of its line, 1/3 left of it), where they
                        # neither hide the histogram's peak nor overlap each other
                        for exponent, text, dx, align in ((0.5, "1/2", 2, "left"),
                                                          (1.0 / 3.0, "1/3", -2, "right")):
                            if limits[i][0] <= exponent <= limits[i][1]:
                                ax.axvline(exponent, color=LINE_COLOURS[2], ls="--", lw=0.8)
                                ax.annotate(text, (exponent, 0.0), xycoords=("data",
                                            "axes fraction"), xytext=(dx, 2), ha=align,
                                            textcoords="offset points", va="bottom",
                                            fontsize=6, color=LINE_COLOURS[2],
                                            bbox=dict(boxstyle="square,pad=0.1", fc="white",
                                                      ec="none", alpha=0.85))
                else:
                    h, xe, ye = np.histogram2d(draws[:, j], draws[:, i], bins=bins // 2,
                                              range=[limits[j], limits[i]])
                    levels = sorted(set(_density_levels(h)))
                    centres_x, centres_y = 0.5 * (xe[1:] + xe[:-1]), 0.5 * (ye[1:] + ye[:-1])
                    ax.plot(draws[::max(1, len(draws) // 800), j],
                            draws[::max(1, len(draws) // 800), i], ".", ms=0.8,
                            color=LINE_COLOURS[3], alpha=0.6, rasterized=True)
                    ax.set_xlim(*limits[j])
                    ax.set_ylim(*limits[i])
                    if len(levels) >= 1 and h.max() > levels[0]:
                        ax.contourf(centres_x, centres_y, h.T, levels=levels + [h.max()],
                                    colors=[LINE_COLOURS[0]], alpha=0.35)
                        ax.contour(centres_x, centres_y, h.T, levels=levels,
                                   colors=[LINE_COLOURS[0]], linewidths=0.6)
                if i == k - 1:
                    ax.set_xlabel(_PARAMETER_LABELS.get(names[j], names[j]))
                else:
                    ax.tick_params(labelbottom=False)
                if j == 0 and i > 0:
                    ax.set_ylabel(_PARAMETER_LABELS.get(names[i], names[i]))
                elif i != j:
                    ax.tick_params(labelleft=False)
        if title:
            figure.suptitle(title)
    return figure
