"""Lab snapshots in, the same measurements out: reading and validating snapshot stacks.

Accepted files
--------------
``.npy``
    One array of shape ``(shots, n_x[, n_y[, n_z]])``: one configuration per shot.
``.npz``
    The array under ``spins`` (or ``snapshots``), and optionally ``times`` (one time per shot,
    or one for all) and ``mask`` (shape ``(n_x[, n_y[, n_z]])``, true where a site was
    measured).
``.nc``
    A dataset written by ``coarsen run``: its ``snapshot`` variable, each kept time a group.

Site axes after the shot axis are ``(x, y, z)``, the order of the dataset's ``snapshot``
variable, so a run's snapshots can be measured again. Values are ``{0, 1}`` (0 means down) or
``{-1, +1}``; masked sites may hold anything. Shots are grouped by time (ascending), and the
shots of one time play the role of replicas. Files are read with ``allow_pickle=False``: an
object array is refused, never unpickled.
"""

from __future__ import annotations

import zipfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import xarray as xr

from coarsen.dataset import build_dataset, engine_layout
from coarsen.equilibrium import equilibrium_energy
from coarsen.lattice import LATTICE_KINDS, Lattice
from coarsen.observables import MeasurementGrid, measure
from coarsen.series import MeasurementSeries
from coarsen.spec import evenly_spread

__all__ = ["LabSnapshots", "load_snapshots", "measure_snapshots"]

_DEFAULT_KIND = {1: "chain", 2: "square", 3: "cubic"}
_SPIN_KEYS = ("spins", "snapshots")


@dataclass(frozen=True)
class LabSnapshots:
    """Validated snapshots of one file.

    Attributes
    ----------
    spins : ndarray of shape (shots, *lattice.shape), int8
        +1/-1 in the engine layout (masked sites set to +1; they are never read).
    times : ndarray of shape (shots,), float64
    mask : ndarray of shape lattice.shape, bool, or None
        True where a site was measured.
    lattice : Lattice
    source_file : str
    """

    spins: np.ndarray
    times: np.ndarray
    mask: np.ndarray | None
    lattice: Lattice
    source_file: str


def _fail(path: Path, message: str):
    raise ValueError(f"{str(path)!r}: {message}")


def _read_arrays(path: Path) -> tuple[np.ndarray, np.ndarray | None, np.ndarray | None]:
    suffix = path.suffix.lower()
    try:
        if suffix == ".npy":
            return np.load(path, allow_pickle=False), None, None
        if suffix == ".npz":
            if not zipfile.is_zipfile(path):  # np.load would leave the file open
                _fail(path, "not a readable NumPy file (an .npz is a zip archive; this is not)")
            with np.load(path, allow_pickle=False) as archive:
                names = set(archive.files)
                key = next((k for k in _SPIN_KEYS if k in names), None)
                if key is None:
                    _fail(path, f"holds {sorted(names)!r} but no array named 'spins' or "
                                "'snapshots'")
                unknown = names - {key, "times", "mask"}
                if unknown:
                    _fail(path, f"unexpected arrays {sorted(unknown)!r}; allowed: {key!r}, "
                                "'times', 'mask'")
                times = archive["times"] if "times" in names else None
                mask = archive["mask"] if "mask" in names else None
                return archive[key], times, mask
    except ValueError as error:
        if "pickle" in str(error).lower():
            _fail(path, "holds Python objects (pickled data), which are never loaded; save "
                        "plain numeric arrays")
        if str(error).startswith(repr(str(path))):
            raise
        _fail(path, f"not a readable NumPy file ({error})")
    except (OSError, EOFError, zipfile.BadZipFile) as error:  # empty, truncated, torn archive
        _fail(path, f"not a readable NumPy file ({type(error).__name__}: {error})")
    _fail(path, f"unsupported file type {suffix!r}; give .npy, .npz or .nc")


def _from_dataset(path: Path) -> tuple[np.ndarray, np.ndarray, str]:
    try:
        ds = xr.load_dataset(path, engine="h5netcdf")
    except (OSError, ValueError) as error:
        _fail(path, f"not a readable NetCDF dataset ({error})")
    if "snapshot" not in ds:
        _fail(path, "has no 'snapshot' variable (run the spec with measure.snapshots > 0)")
    snap = ds["snapshot"]
    shots = snap.values.reshape(-1, *snap.shape[2:])
    times = np.repeat(ds["snapshot_time"].values.astype(np.float64), snap.shape[1])
    kind = ds.attrs.get("lattice_kind")
    return shots, times, kind


def _spin_values(values: np.ndarray, mask, path: Path) -> np.ndarray:
    if values.dtype == bool:
        values = values.astype(np.int8)
    if not (np.issubdtype(values.dtype, np.integer) or np.issubdtype(values.dtype, np.floating)):
        _fail(path, f"spins have dtype {values.dtype}; expected real numbers 0/1 or -1/+1")
    present = np.broadcast_to(mask, values.shape) if mask is not None else None
    seen = values[present] if present is not None else values
    with np.errstate(invalid="ignore"):
        distinct = np.unique(seen)
    if np.isin(distinct, (0, 1)).all():
        spins = np.where(values == 1, 1, -1)
    elif np.isin(distinct, (-1, 1)).all():
        spins = np.where(values == -1, -1, 1)
    elif np.isin(distinct, (-1, 0, 1)).all():
        _fail(path, "spins mix the conventions {0, 1} and {-1, +1}; use one of them")
    else:
        bad = distinct[~np.isin(distinct, (-1, 0, 1))][:5]
        _fail(path, f"spins hold values {bad.tolist()!r}; expected {{0, 1}} or {{-1, +1}}")
    return spins.astype(np.int8)


def load_snapshots(path, *, boundary: str = "open", times=None, kind: str | None = None,
                   ) -> LabSnapshots:
    """Read and validate a stack of snapshots.

    Parameters
    ----------
    path : path-like
        A ``.npy``, ``.npz`` or ``.nc`` file (see the module notes).
    boundary : {"open", "periodic"}, default: "open"
        Lab snapshots have edges; ``"periodic"`` treats them as a torus.
    times : sequence of float, optional
        One time per shot, or one for all; replaces the file's ``times``. Without either,
        every shot has time 0.
    kind : str, optional
        Lattice kind (default: chain, square or cubic by the number of site axes; a
        dataset's own kind for ``.nc``).

    Raises
    ------
    ValueError
        Naming the file and what is wrong with it.
    """
    path = Path(path)
    if not path.is_file():
        raise ValueError(f"{str(path)!r}: no such file")
    mask = None
    if path.suffix.lower() == ".nc":
        values, file_times, file_kind = _from_dataset(path)
        kind = kind or file_kind
    else:
        values, file_times, mask = _read_arrays(path)
    values = np.asarray(values)
    if values.ndim < 2 or values.ndim > 4:
        _fail(path, f"spins have shape {values.shape}; expected (shots, n_x[, n_y[, n_z]])")
    shots, d = values.shape[0], values.ndim - 1
    if shots == 0:
        _fail(path, "holds no shots")
    kind = kind or _DEFAULT_KIND[d]
    if kind not in LATTICE_KINDS or LATTICE_KINDS[kind] != d:
        _fail(path, f"lattice kind {kind!r} does not fit {d}-dimensional snapshots")
    if mask is not None:
        mask = np.asarray(mask)
        if mask.shape != values.shape[1:]:
            _fail(path, f"mask has shape {mask.shape}, the snapshots' sites {values.shape[1:]}")
        if mask.dtype != bool:
            if not np.isin(mask, (0, 1)).all():
                _fail(path, "mask must be boolean (or 0/1)")
            mask = mask.astype(bool)
        if not mask.any():
            _fail(path, "mask excludes every site")
    spins = _spin_values(values, mask, path)
    if times is None:
        times = file_times
    if times is None:
        times = np.zeros(shots)
    times = np.asarray(times, dtype=np.float64).ravel()
    if times.size == 1:
        times = np.full(shots, times[0])
    if times.size != shots:
        _fail(path, f"{times.size} times given for {shots} shots; give one per shot or one "
                    "for all")
    if not np.isfinite(times).all() or (times < 0).any():
        _fail(path, "times must be finite and >= 0")
    try:
        lattice = Lattice(kind, tuple(values.shape[1:]), boundary)
    except ValueError as error:
        _fail(path, str(error))
    layout_mask = None if mask is None else engine_layout(mask, d)
    layout = engine_layout(spins, d)
    if layout_mask is not None and layout_mask.all():
        layout_mask = None
    return LabSnapshots(spins=layout, times=times, mask=layout_mask, lattice=lattice,
                        source_file=str(path))


def _kept_configurations(snapshots: LabSnapshots, inverse, counts, keep):
    """(configurations, indices of the kept times) for the dataset's ``snapshot``.

    Shots of one time are the replicas; a replica missing at a time and a site outside the
    mask are stored as 0 (neither phase).
    """
    n_times = len(counts)
    chosen = np.array(evenly_spread(n_times, n_times if keep is None else keep), dtype=int)
    out = np.zeros((len(chosen), int(counts.max()), *snapshots.spins.shape[1:]), dtype=np.int8)
    for slot, index in enumerate(chosen):
        shots = snapshots.spins[inverse == index]
        out[slot, : len(shots)] = shots
    if snapshots.mask is not None:
        out[..., ~snapshots.mask] = 0
    return out, chosen


def measure_snapshots(snapshots: LabSnapshots, *, order: str = "ferro",
                      J: float | None = None, keep_snapshots: int | None = None,
                      ) -> xr.Dataset:
    """Measure lab snapshots with the observables of a run, one group per time.

    The shots of each time are the replicas; where times have different numbers of shots,
    the missing replicas are NaN. Energies use the coupling ``J`` and no field; by default
    J = 1 for ``order="ferro"`` and J = -1 for ``order="neel"`` (checkerboard order is the
    ground state of the antiferromagnet), so the energy measures broken bonds of the order
    being studied. The ``wall`` length uses that ground-state energy as the reference (lab
    data has no temperature), and ``temperature`` and ``field`` are NaN.

    The configurations are kept as the run datasets keep them (``snapshot``, dims
    ``snapshot_time, replica, x[, y[, z]]``, int8), with 0 at sites outside the mask and for
    shots missing at a time, so ``coarsen plot --kind snapshots`` draws lab data too.
    ``keep_snapshots`` limits them to that many times, evenly chosen (0 keeps none;
    default: every time).

    Returns
    -------
    xarray.Dataset
        The variables of a run's dataset, with ``source_file`` in the attrs.
    """
    lattice = snapshots.lattice
    if J is None:
        J = -1.0 if order == "neel" else 1.0
    grid = MeasurementGrid(lattice, mask=snapshots.mask)
    group_times, inverse, counts = np.unique(snapshots.times, return_inverse=True,
                                             return_counts=True)
    series = MeasurementSeries(int(counts.max()), len(group_times), len(grid.k), len(grid.r))
    reference = equilibrium_energy(lattice.kind, 0.0, J, 0.0)
    for index in range(len(group_times)):
        shots = np.ascontiguousarray(snapshots.spins[inverse == index])
        measured = measure(shots, lattice, grid, temperature=0.0, J=J, h=0.0, order=order,
                           equilibrium_energy=reference)
        series.store(index, measured)
    arrays = dict(series.arrays)
    arrays["temperature"] = np.full(len(group_times), np.nan)
    arrays["field"] = np.full(len(group_times), np.nan)
    attrs = {
        "source_file": snapshots.source_file,
        "lattice": lattice.describe(),
        "lattice_kind": lattice.kind,
        "boundary": lattice.boundary,
        "size": np.asarray(lattice.size, dtype=np.int64),
        "rule": "lab",
        "order": order,
        "J": float(J),
        "tc": float(lattice.tc),
        "replicas": int(counts.max()),
        "masked_sites": int(0 if snapshots.mask is None else (~snapshots.mask).sum()),
    }
    extra = {"shots": (("time",), counts.astype(np.int64), "1", "shots measured at each time")}
    if keep_snapshots is not None and (isinstance(keep_snapshots, bool) or
                                       not isinstance(keep_snapshots, (int, np.integer)) or
                                       keep_snapshots < 0):
        raise ValueError(f"keep_snapshots: {keep_snapshots!r} must be a whole number >= 0")
    kept, kept_times = None, None
    if keep_snapshots != 0:
        kept, chosen = _kept_configurations(snapshots, inverse, counts, keep_snapshots)
        kept_times = group_times[chosen]
    ds = build_dataset(arrays, times=group_times, k=grid.k, r=grid.r, attrs=attrs,
                       snapshots=kept, snapshot_times=kept_times, extra_variables=extra)
    if "snapshot" in ds:
        ds["snapshot"].attrs["long_name"] = ("measured spin configurations (+1/-1; 0 where "
                                             "not measured)")
    return ds
