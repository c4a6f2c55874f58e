"""Ramp scans: one spec, several ramp durations, one dataset along ``ramp_time``.

A spec whose ``temperature.ramp.duration`` is a list runs once per duration
(:meth:`coarsen.spec.Spec.variant`: the same spec with that duration and a seed derived from
the spec's seed and the duration's index). The datasets are stacked along a ``ramp_time``
coordinate (sweeps); the measurement times are the same for every duration. Variables that
depend on the duration (everything measured, the temperature, ``crossing_time``) gain the
``ramp_time`` dimension; the attrs are those of the scan (its seed and spec text).

Written by :func:`run_ramp_scan`: each finished duration is kept beside the output as
``<output>.ramp-<index>.part`` (written atomically), the running one checkpoints as
``<output>.ramp-<index>.checkpoint``; with ``resume`` the finished parts are reused and the
running duration continues from its checkpoint, so a killed scan loses at most a
checkpoint interval. The parts are removed once the output is written.
"""

from __future__ import annotations

from pathlib import Path
from typing import Callable

import numpy as np
import xarray as xr

from coarsen.checkpoint import remove_stale_temporaries
from coarsen.dataset import open_dataset, write_dataset

__all__ = ["combine_ramp_datasets", "run_ramp_scan"]

_PER_RUN_ATTRS = ("seed", "spec", "crossing_time", "created")


def combine_ramp_datasets(spec, datasets: list[xr.Dataset]) -> xr.Dataset:
    """Stack the datasets of a scan's durations along ``ramp_time``.

    Parameters
    ----------
    spec : coarsen.spec.Spec
        The scan.
    datasets : list of xarray.Dataset
        One per duration, in the order of ``spec.ramp_times``.

    Returns
    -------
    xarray.Dataset
    """
    if len(datasets) != len(spec.ramp_times):
        raise ValueError(f"datasets: {len(datasets)} given for {len(spec.ramp_times)} ramp times")
    prepared = []
    for index, ds in enumerate(datasets):
        ds = ds.copy()
        crossing = ds.attrs.get("crossing_time", np.nan)
        ds["crossing_time"] = xr.Variable((), float(crossing), attrs={
            "units": "sweeps", "long_name": "time at which the ramp passes Tc (NaN: never)"})
        variant_seed = ds.attrs.get("seed")
        ds["run_seed"] = xr.Variable((), str(variant_seed), attrs={
            "units": "1", "long_name": "seed of this duration's run (from the scan's seed)"})
        for name in _PER_RUN_ATTRS:
            ds.attrs.pop(name, None)
        prepared.append(ds)
    ramp_time = xr.Variable(("ramp_time",), np.asarray(spec.ramp_times, dtype=np.float64),
                            attrs={"units": "sweeps", "long_name": "ramp duration"})
    varying = [name for name, var in prepared[0].data_vars.items()
               if "time" in var.dims or "replica" in var.dims or name in
               ("crossing_time", "run_seed")]
    combined = xr.concat(prepared, dim=ramp_time, data_vars=varying, coords="minimal",
                         compat="override", combine_attrs="override")
    combined.attrs.update({
        "spec": spec.text,
        "seed": int(spec.seed) if spec.seed < 2**63 else str(spec.seed),
        "ramp_scan": 1,
    })
    created = datasets[-1].attrs.get("created")
    if created is not None:
        combined.attrs["created"] = created
    return combined


def _part_path(output: Path, index: int, suffix: str) -> Path:
    return output.with_name(f"{output.name}.ramp-{index}.{suffix}")


def _finished_part(path: Path, variant) -> xr.Dataset | None:
    """The finished part of a duration, or None if it is missing or belongs elsewhere."""
    if not path.is_file():
        return None
    try:
        ds = open_dataset(path)
    except (OSError, ValueError):
        return None
    if ds.attrs.get("spec") != variant.text:
        ds.close()
        return None
    return ds


def run_ramp_scan(spec, output, *, threads: int | None = None, resume: bool = False,
                  checkpoint_every: float = 60.0, progress: bool = False,
                  notify: Callable[[str], None] | None = None, after_call=None):
    """Run a ramp scan and write its dataset to ``output`` atomically.

    Parameters are those of :func:`coarsen.simulate.run_spec`.

    Returns
    -------
    coarsen.simulate.RunResult
        With the combined dataset; the times are summed over the durations run now.
    """
    from coarsen.simulate import RunResult, simulate

    notify = notify or (lambda message: None)
    output = Path(output)
    datasets = []
    totals = {"dynamics": 0.0, "measuring": 0.0, "checkpoint": 0.0}
    resumed_at = None
    for index, duration in enumerate(spec.ramp_times):
        variant = spec.variant(index)
        part = _part_path(output, index, "part")
        remove_stale_temporaries(part)
        done = _finished_part(part, variant) if resume else None
        if done is not None:
            notify(f"ramp time {duration:g}: reusing the finished run {str(part)!r}")
            datasets.append(done.load())
            done.close()
            continue
        notify(f"ramp time {duration:g} ({index + 1} of {len(spec.ramp_times)})")
        checkpoint = _part_path(output, index, "checkpoint")
        result = simulate(variant, threads=threads, checkpoint=checkpoint,
                          checkpoint_every=checkpoint_every, resume=resume,
                          progress=progress, notify=notify, after_call=after_call)
        if result.resumed_at is not None and resumed_at is None:
            resumed_at = result.resumed_at
        totals["dynamics"] += result.dynamics_seconds
        totals["measuring"] += result.measuring_seconds
        totals["checkpoint"] += result.checkpoint_seconds
        write_dataset(result.dataset, part)
        checkpoint.unlink(missing_ok=True)
        datasets.append(result.dataset)
    combined = combine_ramp_datasets(spec, datasets)
    write_dataset(combined, output)
    for index in range(len(spec.ramp_times)):
        _part_path(output, index, "part").unlink(missing_ok=True)
    return RunResult(dataset=combined, dynamics_seconds=totals["dynamics"],
                     measuring_seconds=totals["measuring"],
                     checkpoint_seconds=totals["checkpoint"], resumed_at=resumed_at)
