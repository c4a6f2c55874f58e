"""Protocol figures: the temperature (and field) schedule above L(t) on a shared time axis."""

from __future__ import annotations

import numpy as np

from coarsen.plots.style import (COLUMN_WIDTH, LINE_COLOURS, MARKERS, REFERENCE_COLOUR,
                                 new_figure, plain_log_labels, style)

__all__ = ["plot_protocol"]


def _schedules(run):
    """(labels, T schedules, h schedule) from the dataset's spec text, or None for lab data."""
    from coarsen.spec import SpecError, parse_spec

    text = run.attrs.get("spec")
    if not text:
        return None
    try:
        spec = parse_spec(str(text))
    except (SpecError, ValueError, OSError):
        return None
    if spec.ramp_times:
        return [f"ramp {t:g} sweeps" for t in spec.ramp_times], list(spec.ramp_schedules), \
            spec.field
    return [None], [spec.temperature], spec.field


def plot_protocol(run, *, estimator: str = "corr_half", title=None):
    """T(t) (and h(t) when the field varies) above L(t), for quenches, ramps and holds.

    The schedule is drawn from the spec kept in the dataset (sweep by sweep), the lengths are
    replica means with standard errors; dashed verticals mark where a ramp crosses Tc.

    Parameters
    ----------
    run : xarray.Dataset
        A run or ramp-scan dataset.
    estimator : str, default: "corr_half"
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    from coarsen.dataset import replica_mean_and_error

    time = run["time"].values
    schedules = _schedules(run)
    t_fine = np.linspace(0.0, float(time.max()), 600)
    scan = "ramp_time" in run["length"].dims
    durations = run["ramp_time"].values if scan else [None]
    field_varies = False
    if schedules is not None:
        labels, temperature, field = schedules
        field_values = field.at(t_fine)
        field_varies = bool(np.ptp(field_values) > 0)
    tc = float(run.attrs.get("tc", np.nan))
    with style():
        rows = 3 if field_varies else 2
        figure, axes = new_figure(COLUMN_WIDTH, (0.55 + 0.45 * rows) * COLUMN_WIDTH, nrows=rows,
                                  sharex=True, height_ratios=[1] * (rows - 1) + [1.5])
        top, bottom = axes[0], axes[-1]
        for i, duration in enumerate(durations):
            colour = LINE_COLOURS[i % 6]
            if schedules is not None:
                top.plot(t_fine, temperature[i].at(t_fine), "-", color=colour,
                         label=labels[i])
            else:
                values = run["temperature"].values if not scan else \
                    run["temperature"].isel(ramp_time=i).values
                top.plot(time, values, MARKERS[i % 6] + "-", color=colour, ms=2.5)
            part = run.isel(ramp_time=i) if scan else run
            values = part["length"].sel(estimator=estimator).transpose("replica", "time").values
            mean, error = replica_mean_and_error(values)
            ok = np.isfinite(mean) & (mean > 0)
            bottom.errorbar(time[ok], mean[ok], yerr=np.nan_to_num(error[ok]),
                            fmt=MARKERS[i % 6] + "-", color=colour, ms=2.6, lw=0.8,
                            elinewidth=0.6, label=labels[i] if schedules else None)
            crossing = float(part["crossing_time"].values) if "crossing_time" in part else \
                float(part.attrs.get("crossing_time", np.nan))
            if np.isfinite(crossing):
                for ax in axes:
                    ax.axvline(crossing, color=colour, ls="--", lw=0.7)
        if np.isfinite(tc):
            top.axhline(tc, color=REFERENCE_COLOUR, ls=":", lw=0.9)
            top.annotate("$T_c$", (1.0, tc), xycoords=("axes fraction", "data"),
                         xytext=(-3, 1.5), textcoords="offset points", ha="right",
                         va="bottom", fontsize=7, color=REFERENCE_COLOUR)
        top.set_ylabel("temperature $T$ ($J/k_B$)")
        if np.isfinite(tc) and tc > 0:
            right = top.secondary_yaxis("right", functions=(lambda v: v / tc,
                                                            lambda v: v * tc))
            right.set_ylabel("$T / T_c$")
        if field_varies:
            axes[1].plot(t_fine, field_values, "-", color=LINE_COLOURS[2])
            axes[1].set_ylabel("field $h$ ($J$)")
        bottom.set_yscale("log")
        plain_log_labels(bottom.yaxis)
        from coarsen.plots.growth import _ESTIMATOR_LABELS

        bottom.set_ylabel(f"$L$ ({_ESTIMATOR_LABELS.get(estimator, estimator)}; lattice "
                          f"spacings)")
        bottom.set_xlabel("time $t$ (MC sweeps)")
        bottom.set_xlim(0, float(time.max()) * 1.02)
        if scan or (schedules and labels[0]):
            bottom.legend(loc="lower right", fontsize=6.5)
        if title:
            top.set_title(title)
    return figure
