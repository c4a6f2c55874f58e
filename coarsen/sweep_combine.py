"""Combining a sweep's parts into one dataset (``coarsen.open_sweep``).

Within a grid point the batches are concatenated along ``replica`` (renumbered 0 .. R-1 in
batch order), and the replica-mean variables (``structure_factor``, ``correlation``) and their
standard errors are recomputed over all replicas from the batches' means, errors and sizes
(pooled exactly: the within-batch sums of squares plus the spread of the batch means).
Across points the grid keys become dimensions with the grid's values as coordinates
(``combine = "product"``) or coordinates along one ``point`` dimension (``"zip"``); lists and
tables among the values (``lattice.size``) are stored as their JSON text (``"[16, 16]"``).
Points that differ in size are joined outer: ``k``, ``r``, ``time`` and the snapshots' site
coordinates are the union, missing entries NaN (snapshot sites 0, ``task_seed`` -1).

Per-run attrs become: ``task_seed`` (grid..., replica), the seed of the task that ran each
replica; constant attrs stay attrs; attrs that vary across the grid (``lattice``, ``tc``,
``crossing_time``, ...) become variables along the grid dimensions. The dataset's ``spec``
attr is the base spec's text, ``seed`` the sweep seed and ``sweep`` the sweep file's text.
"""

from __future__ import annotations

import json
from datetime import datetime, timezone
from pathlib import Path

import numpy as np
import xarray as xr

from coarsen.sweep_file import SweepError

__all__ = ["MANIFEST", "MANIFEST_FORMAT", "PARTS", "open_sweep", "pool_batches",
           "read_manifest"]

MANIFEST = "manifest.json"
MANIFEST_FORMAT = "coarsen-sweep-manifest-1"
PARTS = "parts"
#: Above this many bytes of parts, :func:`open_sweep` keeps the data in Dask arrays.
LAZY_BYTES = 512 * 2**20

_DROPPED_VARIABLES = ("run_seed",)  # a ramp scan's per-duration seeds: task_seed replaces them
_UNITS = {
    "temperature.value": "J/k_B",
    "temperature.relative": "Tc",
    "temperature.ramp.duration": "sweeps",
    "temperature.ramp.hold": "sweeps",
    "lattice.size": "sites per axis",
    "model.J": "J",
    "model.h": "J",
    "field.value": "J",
}
_ATTR_UNITS = {"tc": "J/k_B", "J": "J", "h": "J", "crossing_time": "sweeps",
               "equilibrium_energy": "J"}


def read_manifest(directory) -> dict:
    """The manifest of a sweep directory (``DIR/manifest.json``).

    Raises
    ------
    SweepError
        If it is missing or unreadable.
    """
    path = Path(directory) / MANIFEST
    try:
        manifest = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise SweepError(f"{str(directory)!r}: no sweep manifest ({MANIFEST}) there",
                         key="output") from None
    except (OSError, ValueError) as error:
        raise SweepError(f"{str(path)!r}: not a readable sweep manifest ({error})",
                         key="output") from None
    if not isinstance(manifest, dict) or manifest.get("format") != MANIFEST_FORMAT:
        raise SweepError(f"{str(path)!r}: not a coarsen sweep manifest", key="output")
    return manifest


def pool_batches(means, errors, counts) -> tuple[np.ndarray, np.ndarray]:
    """Mean and standard error over all replicas, from those of replica batches.

    Parameters
    ----------
    means, errors : array_like of shape (B, ...)
        Each batch's replica mean and its standard error (``std(ddof=1) / sqrt(n)``, NaN for
        a batch of one).
    counts : array_like of int, shape (B,)
        Replicas per batch.

    Returns
    -------
    mean, error : ndarray
        The mean over all N replicas and ``std(ddof=1) / sqrt(N)``: the batch sums of squares
        ``(n - 1) n err^2`` plus ``n (mean_b - mean)^2``, over ``N - 1``. NaN error for N = 1.
    """
    means = xr.DataArray(means) if not isinstance(means, xr.DataArray) else means
    errors = xr.DataArray(errors) if not isinstance(errors, xr.DataArray) else errors
    return _pool(means, errors, np.asarray(counts), means.dims[0])


def _pool(means: xr.DataArray, errors: xr.DataArray, counts: np.ndarray, dim: str):
    n = xr.DataArray(counts.astype(np.float64), dims=(dim,))
    total = float(counts.sum())
    mean = (n * means).sum(dim, skipna=False) / total
    within = xr.where(n > 1, (n - 1.0) * n * errors ** 2, 0.0)
    squares = within.sum(dim, skipna=False) + (n * (means - mean) ** 2).sum(dim, skipna=False)
    if total > 1:
        error = np.sqrt(squares / (total - 1.0) / total)
    else:
        error = xr.full_like(mean, np.nan)
    return mean, error


def _open_part(path: Path, lazy: bool) -> xr.Dataset:
    if not path.is_file():
        raise SweepError(f"{str(path)!r}: the part is missing; resume the sweep to run it",
                         key="output")
    if lazy:
        return xr.open_dataset(path, engine="h5netcdf", chunks={})
    from coarsen.dataset import open_dataset

    return open_dataset(path)


def _prepare_part(ds: xr.Dataset) -> tuple[xr.Dataset, dict]:
    """Seed attr -> task_seed variable; per-run attrs taken out (returned)."""
    attrs = dict(ds.attrs)
    ds = ds.drop_vars([name for name in _DROPPED_VARIABLES if name in ds.variables])
    seed = int(attrs["seed"])
    ds["task_seed"] = xr.Variable(("replica",), np.full(ds.sizes["replica"], seed, np.int64),
                                  attrs={"units": "1", "long_name": "seed of the sweep task "
                                         "that ran this replica (coarsen run reproduces it)"})
    ds.attrs = {}
    return ds, attrs


def _combine_batches(parts: list[xr.Dataset]) -> xr.Dataset:
    if len(parts) == 1:
        return parts[0]
    counts = np.array([p.sizes["replica"] for p in parts])
    first = parts[0]
    along = [name for name, v in first.data_vars.items() if "replica" in v.dims]
    ds = xr.concat(parts, dim="replica", data_vars=along, coords="minimal",
                   compat="override", join="exact", combine_attrs="override")
    ds = ds.assign_coords(replica=np.arange(int(counts.sum()), dtype=np.int64))
    ds["replica"].attrs.update(first["replica"].attrs)
    for name in list(first.data_vars):
        sem = f"{name}_sem"
        if sem not in first.data_vars or "replica" in first[name].dims:
            continue
        means = xr.concat([p[name] for p in parts], dim="batch", join="exact",
                          coords="minimal", compat="override")
        errors = xr.concat([p[sem] for p in parts], dim="batch", join="exact",
                           coords="minimal", compat="override")
        mean, error = _pool(means, errors, counts, "batch")
        ds[name] = mean.assign_attrs(first[name].attrs)
        ds[sem] = error.assign_attrs(first[sem].attrs)
    return ds


def _coordinate_values(values: list) -> np.ndarray:
    if all(isinstance(v, (bool, int, float, str)) for v in values):
        kinds = {type(v) for v in values}
        if kinds <= {int, float} or len(kinds) == 1:
            return np.asarray(values)
    return np.asarray([json.dumps(v) for v in values])


def _nested(items: list, shape: tuple[int, ...]):
    if len(shape) == 1:
        return list(items)
    step = len(items) // shape[0]
    return [_nested(items[i * step:(i + 1) * step], shape[1:]) for i in range(shape[0])]


def _attr_variable(values: list, dims, shape, name: str):
    if all(isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, bool)
           for v in values):
        data = np.asarray(values, dtype=np.float64)
    else:
        data = np.asarray([v if isinstance(v, str) else json.dumps(np.asarray(v).tolist())
                           for v in values])
    return xr.Variable(dims, data.reshape(shape), attrs={
        "units": _ATTR_UNITS.get(name, "1"),
        "long_name": f"the runs' {name!r} attr at each grid point"})


def open_sweep(directory, *, lazy: bool | None = None) -> xr.Dataset:
    """One dataset from a finished sweep directory.

    Parameters
    ----------
    directory : path-like
        A directory written by ``coarsen sweep`` (:func:`coarsen.sweep.run_sweep`).
    lazy : bool, optional
        Keep the data in Dask arrays, reading the parts on demand (the files stay open until
        the dataset is closed). Default: lazy when the parts exceed 512 MiB.

    Returns
    -------
    xarray.Dataset
        The grid keys as dimensions (product) or as coordinates along ``point`` (zip), the
        replicas of all batches along ``replica``; see the module docstring.

    Raises
    ------
    SweepError
        If the directory holds no sweep or a part is missing (unfinished sweep).
    """
    directory = Path(directory)
    manifest = read_manifest(directory)
    parts_dir = directory / PARTS
    tasks = manifest["tasks"]
    missing = [t["part"] for t in tasks if t["part"] not in manifest["finished"]]
    if missing:
        raise SweepError(f"{str(directory)!r}: {len(missing)} of {len(tasks)} parts are not "
                         f"finished (first {missing[0]}); resume the sweep", key="output")
    if lazy is None:
        size = sum((parts_dir / t["part"]).stat().st_size for t in tasks
                   if (parts_dir / t["part"]).is_file())
        lazy = size > LAZY_BYTES
    by_point: dict[int, list] = {}
    for task in sorted(tasks, key=lambda t: (t["point"], t["batch"])):
        by_point.setdefault(task["point"], []).append(task)
    points, point_attrs = [], []
    for index in range(len(manifest["points"])):
        prepared = [_prepare_part(_open_part(parts_dir / t["part"], lazy))
                    for t in by_point[index]]
        points.append(_combine_batches([ds for ds, _ in prepared]))
        attrs = dict(prepared[0][1])
        attrs["replicas"] = int(points[-1].sizes["replica"])
        point_attrs.append(attrs)
    keys, names = manifest["keys"], manifest["coordinates"]
    options = dict(data_vars="all", coords="different", compat="equals", join="outer",
                   combine_attrs="drop_conflicts",
                   fill_value={"snapshot": 0, "task_seed": -1})
    if manifest["combine"] == "product":
        shape = tuple(manifest["shape"])
        dims = tuple(names)
        combined = xr.combine_nested(_nested(points, shape), concat_dim=list(names), **options)
        coords = {name: (name, _coordinate_values(manifest["values"][key]))
                  for key, name in zip(keys, names)}
    else:
        shape = (len(points),)
        dims = ("point",)
        combined = xr.concat(points, dim="point", **options)
        coords = {"point": ("point", np.arange(len(points), dtype=np.int64))}
        coords.update({name: ("point", _coordinate_values([p[key] for p in manifest["points"]]))
                       for key, name in zip(keys, names)})
    combined = combined.assign_coords(coords)
    for key, name in zip(keys, names):
        combined[name].attrs.update(units=_UNITS.get(key, "1"),
                                    long_name=f"sweep grid: {key}")
    if "point" in combined.coords and manifest["combine"] == "zip":
        combined["point"].attrs.update(units="1", long_name="sweep grid point")
    combined = combined.transpose(*dims, ...)
    attrs = {}
    for name in point_attrs[0]:
        if name in ("seed", "spec", "created", "spec_file"):
            continue
        values = [a.get(name) for a in point_attrs]
        texts = {json.dumps(np.asarray(v).tolist()) for v in values}
        if len(texts) == 1:
            attrs[name] = point_attrs[0][name]
        elif all(v is not None for v in values):
            combined[name] = _attr_variable(values, dims, shape, name)
    attrs.update({
        "coarsen_version": point_attrs[0].get("coarsen_version", ""),
        "spec": manifest["base_text"],
        "seed": int(manifest["seed"]),
        "sweep": manifest["sweep_text"],
        "sweep_combine": manifest["combine"],
        "sweep_keys": json.dumps(keys),
        "created": datetime.now(timezone.utc).replace(microsecond=0).isoformat(),
    })
    combined.attrs = attrs
    return combined
