"""Configuration figures: domain snapshots, seeded-domain area and interface positions."""

from __future__ import annotations

import numpy as np

from coarsen.plots.style import (COLUMN_WIDTH, DOUBLE_WIDTH, INK, LINE_COLOURS, MARKERS,
                                 PHASE_COLOURS, new_figure, style)
from coarsen.spec import evenly_spread

__all__ = ["plot_seeded", "plot_snapshots", "staggered"]


def staggered(spins: np.ndarray) -> np.ndarray:
    """The staggered field s_i (-1)^(x + y [+ z]) of configurations with site axes last.

    Parameters
    ----------
    spins : ndarray of shape (..., n_x[, n_y[, n_z]])
        The dataset's layout; the site axes are the trailing ones named by the caller
        (here all axes after the first two are sites when ``spins.ndim > 2``).
    """
    spins = np.asarray(spins)
    sites = spins.shape[-2:] if spins.ndim >= 2 else spins.shape
    parity = np.indices(sites).sum(axis=0) % 2
    return np.where(parity == 0, spins, -spins).astype(spins.dtype)


def plot_snapshots(run, *, replicas: int = 2, max_columns: int = 5, title=None):
    """A grid of kept configurations: one column per kept time, one row per replica.

    Two colours: the up phase dark, the down phase light; sites stored as 0 (not measured,
    in a lab dataset with a mask) mid grey. With ``order = "neel"`` the
    staggered field is drawn (so the two checkerboard orders show as the two phases). Of a
    3-d lattice the ``z = 0`` plane is drawn; a chain is drawn as rows of replicas. For a ramp
    scan the rows are the ramp durations (first replica).

    Parameters
    ----------
    run : xarray.Dataset
        A run dataset with ``snapshot``.
    replicas : int, default: 2
        Rows (replicas) to draw, at most.
    max_columns : int, default: 5
        Kept times to draw, at most (evenly chosen, first and last included).
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    from matplotlib.colors import ListedColormap
    from matplotlib.patches import Patch

    if "snapshot" not in run:
        raise ValueError("snapshots: the dataset keeps no configurations (snapshot); set "
                         "[measure] snapshots in the spec")
    snap = run["snapshot"]
    neel = run.attrs.get("order") == "neel"
    if "z" in snap.dims:
        snap = snap.isel(z=0)
    if "ramp_time" in snap.dims:
        snap = snap.isel(replica=0).rename(ramp_time="row")
        row_labels = [f"ramp {v:g} sweeps" for v in run["ramp_time"].values]
    else:
        snap = snap.isel(replica=slice(0, max(1, int(replicas)))).rename(replica="row")
        word = "shot" if run.attrs.get("rule") == "lab" else "replica"
        row_labels = [f"{word} {int(v)}" for v in run["replica"].values[:snap.sizes["row"]]]
    site_dims = [d for d in ("x", "y") if d in snap.dims]
    snap = snap.transpose("row", "snapshot_time", *site_dims)
    values = snap.values
    if neel:
        values = staggered(values) if len(site_dims) == 2 else \
            np.where(np.arange(values.shape[-1]) % 2 == 0, values, -values)
    times = run["snapshot_time"].values
    if values.shape[1] > max_columns:  # a lab dataset keeps every time: draw a few
        pick = np.array(evenly_spread(values.shape[1], max_columns), dtype=int)
        values, times = values[:, pick], times[pick]
    rows, columns = values.shape[0], values.shape[1]
    # -1, 0 (a site that was not measured, in lab data) and +1
    cmap = ListedColormap([PHASE_COLOURS["down"], PHASE_COLOURS["missing"], PHASE_COLOURS["up"]])
    missing = bool((values == 0).any())
    with style():
        width = min(DOUBLE_WIDTH, max(COLUMN_WIDTH, 1.35 * columns))
        figure, axes = new_figure(width, width / columns * rows + 0.35, nrows=rows,
                                  ncols=columns, squeeze=False)
        for i in range(rows):
            for j in range(columns):
                ax = axes[i, j]
                picture = values[i, j]
                if picture.ndim == 1:
                    picture = picture[np.newaxis, :]
                else:
                    picture = picture.T  # rows of the image are y, columns x
                ax.imshow(np.sign(picture).astype(np.int8) + 1, cmap=cmap, vmin=0, vmax=2,
                          origin="lower",
                          interpolation="nearest", aspect="equal" if values.ndim == 4 else "auto")
                ax.set_xticks([])
                ax.set_yticks([])
                for spine in ax.spines.values():
                    spine.set_linewidth(0.5)
                if i == 0:
                    ax.set_title(f"t = {times[j]:g} sweep{'' if times[j] == 1 else 's'}",
                                 fontsize=7)
                if j == 0:
                    ax.set_ylabel(row_labels[i], fontsize=7)
        what = "staggered field" if neel else "spin"
        handles = [Patch(facecolor=PHASE_COLOURS["up"], edgecolor=INK, lw=0.4,
                         label=f"{what} +1"),
                   Patch(facecolor=PHASE_COLOURS["down"], edgecolor=INK, lw=0.4,
                         label=f"{what} -1")]
        if missing:
            handles.append(Patch(facecolor=PHASE_COLOURS["missing"], edgecolor=INK, lw=0.4,
                                 label="not measured"))
        figure.legend(handles=handles, loc="outside lower center", ncols=len(handles),
                      fontsize=7)
        lattice = run.attrs.get("lattice", "")
        figure.suptitle(f"{title}, {lattice}" if title and lattice else
                        title or f"{lattice}, {run.attrs.get('rule', '')}", fontsize=8)
    return figure


def plot_seeded(run, *, title=None):
    """Seeded-domain area (top) and interface positions along each cut (bottom) against time.

    Parameters
    ----------
    run : xarray.Dataset
        A run of a seeded initial state (``seed_area``, ``interface_position``).
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    from coarsen.dataset import replica_mean_and_error

    if "seed_area" not in run or "interface_position" not in run:
        raise ValueError("seeded: the dataset has no seed_area/interface_position (run a "
                         "seeded initial state: disk, stripe, zigzag)")
    if "ramp_time" in run["seed_area"].dims:
        run = run.isel(ramp_time=-1)
    time = run["time"].values
    area, area_err = replica_mean_and_error(run["seed_area"].transpose("replica", "time").values)
    with style():
        figure, (top, bottom) = new_figure(COLUMN_WIDTH, 1.2 * COLUMN_WIDTH, nrows=2,
                                           sharex=True)
        top.errorbar(time, area, yerr=np.nan_to_num(area_err), fmt="o-", color=LINE_COLOURS[0],
                     ms=2.8, lw=0.9, elinewidth=0.7, label="replica mean")
        top.set_ylabel("seeded-domain area (sites)")
        top.set_ylim(bottom=0)
        top.legend(loc="upper right")
        positions = run["interface_position"].transpose("cut", "replica", "time").values
        labels = [str(c) for c in run["cut"].values]
        many = len(labels) > 4
        means = []
        for i, label in enumerate(labels):
            mean, error = replica_mean_and_error(positions[i])
            means.append(mean)
            ok = np.isfinite(mean)
            if many:  # thin lines per cut, their mean on top
                bottom.plot(time[ok], mean[ok], "-", color=LINE_COLOURS[3], lw=0.6,
                            label="single cuts" if i == 0 else None)
                continue
            bottom.errorbar(time[ok], mean[ok], yerr=np.nan_to_num(error[ok]),
                            fmt=MARKERS[i % 6] + "-", color=LINE_COLOURS[i % 6], ms=2.6,
                            lw=0.8, elinewidth=0.6, label=label)
        if many:
            with np.errstate(invalid="ignore"):
                stack = np.array(means)
                count = np.isfinite(stack).sum(axis=0)
                average = np.nanmean(np.where(count > 0, stack, 0.0), axis=0)
                spread = np.nanstd(np.where(count > 0, stack, 0.0), axis=0, ddof=1)
            ok = count > 0
            bottom.errorbar(time[ok], average[ok], yerr=np.nan_to_num(spread[ok]), fmt="o-",
                            color=LINE_COLOURS[0], ms=2.8, lw=1.0, elinewidth=0.7,
                            label=f"mean of {len(labels)} cuts (bars: spread)")
        bottom.set_ylabel("interface position (lattice spacings)")
        bottom.set_xlabel("time $t$ (MC sweeps)")
        bottom.set_ylim(bottom=0)
        # lower left: the interface of a shrinking or moving domain starts high, and the
        # lower left corner stays clear of it
        bottom.legend(loc="lower left", fontsize=6.5, handlelength=1.6)
        if title:
            top.set_title(title)
    return figure
