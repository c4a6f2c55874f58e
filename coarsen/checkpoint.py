"""Checkpoints of a run: spins, stream states, the clock and every measurement so far.

A checkpoint is one NetCDF file rewritten whole and atomically (temporary file, fsync,
rename), so a run killed at any moment leaves either the previous checkpoint or the new one,
never a torn file. Resuming from it gives the same bits as an uninterrupted run: the dynamics
depends only on spins, streams and clock, and the measurements made before the interruption
are restored exactly.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import xarray as xr

from coarsen.dataset import write_dataset
from coarsen.series import SERIES_DIMS, MeasurementSeries

__all__ = ["CHECKPOINT_KIND", "RunState", "read_checkpoint", "remove_stale_temporaries",
           "write_checkpoint"]

#: The ``kind`` attr that marks a checkpoint file.
CHECKPOINT_KIND = "coarsen-checkpoint"


@dataclass
class RunState:
    """Everything a run needs to continue.

    Attributes
    ----------
    clock : int
        Sweeps done.
    next_index : int
        Index of the next measurement time.
    spins : ndarray of shape (R, *lattice.shape), int8
    streams : ndarray of shape (R, S, 64), uint64
    series : MeasurementSeries
        Measurements so far.
    snapshots : ndarray of shape (n_snapshots, R, *lattice.shape), int8
        Kept configurations so far (later entries unset).
    moves : ndarray of shape (R,), int64
        Accepted moves so far.
    """

    clock: int
    next_index: int
    spins: np.ndarray
    streams: np.ndarray
    series: MeasurementSeries
    snapshots: np.ndarray
    moves: np.ndarray


def _site_dims(d: int) -> tuple[str, ...]:
    return tuple(f"site_axis_{i}" for i in range(d))


def write_checkpoint(state: RunState, path, spec_text: str) -> Path:
    """Write ``state`` to ``path`` atomically; ``spec_text`` identifies the run."""
    import coarsen

    d = state.spins.ndim - 1
    sites = _site_dims(d)
    variables = {
        "spins": (("replica", *sites), state.spins),
        "streams": (("replica", "substream", "word"), state.streams),
        "snapshots": (("snapshot_index", "replica", *sites), state.snapshots),
        "moves": (("replica",), state.moves),
    }
    for name, values in state.series.arrays.items():
        variables[f"series_{name}"] = (SERIES_DIMS[name], values)
    ds = xr.Dataset({name: xr.Variable(dims, values) for name, (dims, values) in variables.items()})
    ds.attrs.update(kind=CHECKPOINT_KIND, clock=int(state.clock),
                    next_index=int(state.next_index), spec=spec_text,
                    coarsen_version=coarsen.__version__)
    return write_dataset(ds, path)


def read_checkpoint(path, spec_text: str) -> RunState:
    """Read a checkpoint written by :func:`write_checkpoint` for the spec ``spec_text``.

    Raises
    ------
    ValueError
        If the file is not a coarsen checkpoint, or belongs to a different spec.
    """
    path = Path(path)
    try:
        ds = xr.load_dataset(path, engine="h5netcdf")
    except (OSError, ValueError) as error:
        raise ValueError(f"checkpoint {str(path)!r}: not readable ({error})") from None
    if ds.attrs.get("kind") != CHECKPOINT_KIND:
        raise ValueError(f"checkpoint {str(path)!r}: not a coarsen checkpoint")
    if ds.attrs.get("spec") != spec_text:
        raise ValueError(
            f"checkpoint {str(path)!r} was written for a different spec; run with the spec "
            "that made it, or delete it to start afresh"
        )
    series = MeasurementSeries.from_arrays({
        name[len("series_"):]: ds[name].values for name in ds.data_vars
        if name.startswith("series_")
    })
    return RunState(
        clock=int(ds.attrs["clock"]),
        next_index=int(ds.attrs["next_index"]),
        spins=np.ascontiguousarray(ds["spins"].values, dtype=np.int8),
        streams=np.ascontiguousarray(ds["streams"].values, dtype=np.uint64),
        series=series,
        snapshots=np.ascontiguousarray(ds["snapshots"].values, dtype=np.int8),
        moves=np.ascontiguousarray(ds["moves"].values, dtype=np.int64),
    )


def remove_stale_temporaries(path) -> None:
    """Delete temporary files a killed atomic write may have left beside ``path``."""
    path = Path(path)
    if not path.parent.is_dir():
        return
    for stale in path.parent.glob(f".{path.name}.*.tmp"):
        stale.unlink(missing_ok=True)
