"""The dataset schema: variable names, units, provenance, atomic NetCDF writing, CSV export.

Only this module builds datasets. Every variable carries ``units`` and ``long_name``; attrs are
plain strings and numbers, so they survive NetCDF (see the design document for the names).

Layout of the configurations
----------------------------
The engine stores a configuration as an array of shape ``(z, y, x)`` (the last axis runs along
a row). The dataset's ``snapshot`` variable uses the design's dimension order
``(snapshot_time, replica, x[, y[, z]])``, so ``snapshot.sel(x=i, y=j)`` is the site with
coordinates ``(i, j)``: :func:`snapshot_array` and :func:`engine_layout` convert between the two.
"""

from __future__ import annotations

import csv
import io
import json
import os
import platform
import tempfile
from datetime import datetime, timezone
from pathlib import Path

import numpy as np
import xarray as xr

# the length estimators, in the order of the ``estimator`` coordinate, are defined with them
from coarsen.observables.lengths import ESTIMATORS

__all__ = [
    "ESTIMATORS",
    "VARIABLES",
    "build_dataset",
    "engine_layout",
    "lengths_table",
    "open_dataset",
    "provenance",
    "replica_mean_and_error",
    "snapshot_array",
    "write_dataset",
    "write_lengths_csv",
    "write_text_atomically",
]


_SITE_DIMS = ("x", "y", "z")

#: name -> (dims, units, long_name); site dims of ``snapshot`` are added per dimension.
VARIABLES: dict[str, tuple[tuple[str, ...], str, str]] = {
    "energy": (("replica", "time"), "J", "energy per site"),
    "magnetization": (("replica", "time"), "1", "order parameter per site"),
    "temperature": (("time",), "J/k_B", "temperature at the measurement time"),
    "field": (("time",), "J", "uniform field h at the measurement time"),
    "structure_factor": (("time", "k"), "1",
                         "radially averaged structure factor S(|k|), mean over replicas"),
    "structure_factor_sem": (("time", "k"), "1",
                             "standard error of the replica mean of S(|k|)"),
    "correlation": (("time", "r"), "1",
                    "radially averaged correlation C(r), mean over replicas"),
    "correlation_sem": (("time", "r"), "1", "standard error of the replica mean of C(r)"),
    "length": (("estimator", "replica", "time"), "lattice spacings", "domain length"),
    "domain_count": (("replica", "time"), "1", "number of domains (both signs)"),
    "largest_domain": (("replica", "time"), "1",
                       "area of the largest domain as a fraction of the sites"),
    "seed_area": (("replica", "time"), "sites",
                  "area of the seeded domain (largest down domain overlapping the seed)"),
    "interface_position": (("cut", "replica", "time"), "lattice spacings",
                           "interface position along each cut (distance from the cut's "
                           "origin to the zero of the coarse-grained order parameter)"),
    "wall_energy": (("replica", "time"), "J",
                    "excess energy per site on the walls of coarse-grained domains"),
    "bulk_energy": (("replica", "time"), "J",
                    "excess energy per site of bulk excitations (clusters below the "
                    "smallest domain area)"),
    "snapshot": (("snapshot_time", "replica"), "1", "kept spin configurations (+1/-1)"),
}

_COORDS = {
    "time": ("sweeps", "time since the start of the run (Monte Carlo sweeps)"),
    "k": ("1/lattice spacing", "|k| shell centre"),
    "r": ("lattice spacings", "distance bin centre"),
    "replica": ("1", "replica index (shot index for lab data)"),
    "snapshot_time": ("sweeps", "time of the kept configuration"),
    "estimator": ("1", "length estimator"),
    "cut": ("1", "interface cut"),
}


def snapshot_array(configurations: np.ndarray) -> np.ndarray:
    """Reorder configurations ``(..., z, y, x)`` to the dataset's ``(..., x, y, z)``.

    Parameters
    ----------
    configurations : ndarray of shape (..., *lattice.shape)
        Engine layout; the number of site axes is inferred as ``ndim - 2``.
    """
    d = configurations.ndim - 2
    lead = list(range(2))
    return np.ascontiguousarray(configurations.transpose(lead + list(range(d + 1, 1, -1))))


def engine_layout(snapshot: np.ndarray, dimension: int) -> np.ndarray:
    """Reorder site axes ``(x, y, z)`` (the last ``dimension`` axes) to the engine's ``(z, y, x)``."""
    lead = snapshot.ndim - dimension
    order = list(range(lead)) + list(range(snapshot.ndim - 1, lead - 1, -1))
    return np.ascontiguousarray(snapshot.transpose(order))


def provenance() -> str:
    """Versions of the software that made a dataset, as a JSON string."""
    import numba
    import scipy

    import coarsen

    return json.dumps({
        "coarsen": coarsen.__version__,
        "python": platform.python_version(),
        "numpy": np.__version__,
        "numba": numba.__version__,
        "scipy": scipy.__version__,
        "xarray": xr.__version__,
    }, sort_keys=True)


def created_now() -> str:
    """The current UTC time in ISO 8601, to the second (the ``created`` attr)."""
    return datetime.now(timezone.utc).replace(microsecond=0).isoformat()


def build_dataset(arrays: dict[str, np.ndarray], *, times, k, r, attrs: dict,
                  snapshots: np.ndarray | None = None, snapshot_times=None,
                  extra_variables: dict | None = None, extra_coords: dict | None = None,
                  ) -> xr.Dataset:
    """Assemble the dataset of a run or of measured lab data.

    Parameters
    ----------
    arrays : dict of str to ndarray
        The variables of :data:`VARIABLES` except ``snapshot``, with the shapes their dims
        give; ``temperature`` and ``field`` may be missing (lab data without a protocol).
    times, k, r : array_like
        Coordinates: measurement times (sweeps), |k| shell centres and distance bin centres.
    attrs : dict
        Dataset attrs (str or number values); ``coarsen_version``, ``created`` and
        ``provenance`` are added.
    snapshots : ndarray of shape (n_snapshots, R, *lattice.shape), optional
        Kept configurations in the engine layout (int8).
    snapshot_times : array_like, optional
        Their times.
    extra_variables : dict, optional
        ``name -> (dims, values, units, long_name)`` for variables outside the contract.
    extra_coords : dict, optional
        ``name -> (dims, values, units, long_name)`` for further coordinates (the cuts of
        ``interface_position``).

    Returns
    -------
    xarray.Dataset
    """
    import coarsen

    times = np.asarray(times, dtype=np.float64)
    replicas = np.asarray(arrays["energy"]).shape[0]
    data_vars = {}
    for name, (dims, units, long_name) in VARIABLES.items():
        if name == "snapshot" or name not in arrays:
            continue
        data_vars[name] = xr.Variable(dims, np.asarray(arrays[name]),
                                      attrs={"units": units, "long_name": long_name})
    coords = {
        "time": ("time", times),
        "k": ("k", np.asarray(k, dtype=np.float64)),
        "r": ("r", np.asarray(r, dtype=np.float64)),
        "replica": ("replica", np.arange(replicas, dtype=np.int64)),
        "estimator": ("estimator", np.array(ESTIMATORS)),
    }
    if snapshots is not None and len(snapshots):
        dims, units, long_name = VARIABLES["snapshot"]
        d = snapshots.ndim - 2
        site_dims = _SITE_DIMS[:d]
        values = snapshot_array(np.asarray(snapshots, dtype=np.int8))
        data_vars["snapshot"] = xr.Variable(dims + site_dims, values,
                                            attrs={"units": units, "long_name": long_name})
        coords["snapshot_time"] = ("snapshot_time",
                                   np.asarray(snapshot_times, dtype=np.float64))
        for axis, name in enumerate(site_dims):
            coords[name] = (name, np.arange(values.shape[2 + axis], dtype=np.int64))
    for name, (dims, values, units, long_name) in (extra_variables or {}).items():
        data_vars[name] = xr.Variable(dims, np.asarray(values),
                                      attrs={"units": units, "long_name": long_name})
    for name, (dims, values, units, long_name) in (extra_coords or {}).items():
        coords[name] = xr.Variable(dims, np.asarray(values),
                                   attrs={"units": units, "long_name": long_name})
    ds = xr.Dataset(data_vars, coords=coords)
    for name, (units, long_name) in _COORDS.items():
        if name in ds.coords:
            ds[name].attrs.update(units=units, long_name=long_name)
    for name in _SITE_DIMS:
        if name in ds.coords:
            ds[name].attrs.update(units="lattice spacings", long_name=f"site coordinate {name}")
    full = {"coarsen_version": coarsen.__version__, "created": created_now()}
    full.update(attrs)
    full["provenance"] = provenance()
    for key, value in full.items():
        if isinstance(value, bool) or value is None or isinstance(value, dict):
            raise TypeError(f"dataset attr {key!r}: {value!r} cannot be stored in NetCDF")
    ds.attrs.update(full)
    return ds


def _encoding(ds: xr.Dataset) -> dict:
    encoding = {}
    for name, variable in ds.data_vars.items():
        if variable.ndim >= 2 and variable.size >= 4096:
            encoding[name] = {"compression": "gzip", "compression_opts": 1}
    return encoding


def _fsync_directory(directory: Path) -> None:
    try:
        handle = os.open(directory, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(handle)
    except OSError:
        pass
    finally:
        os.close(handle)


def _temporary_beside(path: Path, suffix: str = ".tmp") -> Path:
    """An empty temporary file in the directory of ``path``, with the usual permissions.

    ``mkstemp`` creates files readable by the owner only; the renamed result should get the
    permissions any new file gets (0666 less the umask).
    """
    handle, name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=suffix, dir=path.parent)
    umask = os.umask(0)
    os.umask(umask)
    try:
        os.fchmod(handle, 0o666 & ~umask)
    finally:
        os.close(handle)
    return Path(name)


def write_dataset(ds: xr.Dataset, path) -> Path:
    """Write ``ds`` as NetCDF-4 (h5netcdf) atomically: a temporary file, fsync, then rename.

    A reader never sees a half-written file, and an interrupted write leaves the previous file
    (if any) in place.

    Raises
    ------
    ValueError
        If the directory of ``path`` does not exist.
    """
    path = Path(path)
    if not path.parent.is_dir():
        raise ValueError(f"output {str(path)!r}: the directory {str(path.parent)!r} does not exist")
    temporary = _temporary_beside(path)
    try:
        ds.to_netcdf(temporary, engine="h5netcdf", encoding=_encoding(ds))
        with open(temporary, "rb+") as handle:
            os.fsync(handle.fileno())
        os.replace(temporary, path)
    except BaseException:
        temporary.unlink(missing_ok=True)
        raise
    _fsync_directory(path.parent)
    return path


def write_text_atomically(text: str, path) -> Path:
    """Write a text file atomically (temporary file, fsync, rename)."""
    path = Path(path)
    if not path.parent.is_dir():
        raise ValueError(f"output {str(path)!r}: the directory {str(path.parent)!r} does not exist")
    temporary = _temporary_beside(path)
    try:
        with open(temporary, "w", encoding="utf-8", newline="") as handle:
            handle.write(text)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(temporary, path)
    except BaseException:
        temporary.unlink(missing_ok=True)
        raise
    return path


def open_dataset(path) -> xr.Dataset:
    """Load a dataset written by coarsen (fully into memory; the file is closed afterwards).

    Raises
    ------
    ValueError
        If the file is missing or is not a NetCDF file that xarray can read.
    """
    path = Path(path)
    if not path.is_file():
        raise ValueError(f"{str(path)!r}: no such file")
    try:
        return xr.load_dataset(path, engine="h5netcdf")
    except (OSError, ValueError) as error:
        raise ValueError(f"{str(path)!r}: not a readable NetCDF dataset ({error})") from None


def lengths_table(ds: xr.Dataset, estimator: str = "corr_half") -> dict[str, np.ndarray]:
    """Replica mean of one length estimator per time, with its standard error.

    Returns
    -------
    dict with ``time``, ``length``, ``length_err`` and ``replicas`` (finite values used)
        ``length_err`` is the standard error of the mean (NaN with fewer than two values).
    """
    if estimator not in ESTIMATORS:
        raise ValueError(f"estimator: {estimator!r} is not one of {', '.join(ESTIMATORS)}")
    values = ds["length"].sel(estimator=estimator).transpose("replica", "time").values
    mean, error = replica_mean_and_error(values)
    return {"time": ds["time"].values, "length": mean, "length_err": error,
            "replicas": np.isfinite(values).sum(axis=0).astype(np.int64)}


def replica_mean_and_error(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Mean over axis 0 and its standard error, ignoring NaN rows (missing shots).

    The standard error is ``std(ddof=1) / sqrt(n)``; NaN where fewer than two values exist.
    The sums run in a fixed order, so the result does not depend on threads.
    """
    values = np.asarray(values, dtype=np.float64)
    finite = np.isfinite(values)
    count = finite.sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = np.where(finite, values, 0.0).sum(axis=0) / count
        deviation = np.where(finite, values - mean, 0.0)
        variance = (deviation ** 2).sum(axis=0) / (count - 1)
        error = np.sqrt(variance / count)
    mean = np.where(count > 0, mean, np.nan)
    error = np.where(count > 1, error, np.nan)
    return mean, error


def write_lengths_csv(ds: xr.Dataset, path, estimator: str = "corr_half") -> Path:
    """Write the replica-averaged lengths of one estimator as CSV, atomically.

    The file opens with ``#`` comment lines (estimator, source, seed), then the header
    ``time,length,length_err,replicas``: the length-table format ``coarsen fit`` reads.
    Times where no replica has a finite length are left out.
    """
    table = lengths_table(ds, estimator)
    buffer = io.StringIO()
    buffer.write(f"# coarsen {ds.attrs.get('coarsen_version', '')}: replica-mean domain length\n")
    buffer.write(f"# estimator: {estimator}; length_err: standard error of the mean\n")
    for key in ("lattice", "rule", "seed", "source_file", "created"):
        if key in ds.attrs:
            buffer.write(f"# {key}: {ds.attrs[key]}\n")
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(["time", "length", "length_err", "replicas"])
    for t, value, error, n in zip(table["time"], table["length"], table["length_err"],
                                  table["replicas"]):
        if n == 0:
            continue
        writer.writerow([repr(float(t)), repr(float(value)),
                         "" if not np.isfinite(error) else repr(float(error)), int(n)])
    return write_text_atomically(buffer.getvalue(), path)
