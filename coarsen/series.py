"""Measurements at a sequence of times, gathered into the arrays of the dataset schema.

A :class:`MeasurementSeries` is filled one measurement time at a time (from a run or from lab
snapshots grouped by time) and hands its arrays to :func:`coarsen.dataset.build_dataset`. It
is also what a checkpoint stores, so a resumed run continues with exactly the values measured
before the interruption.
"""

from __future__ import annotations

import numpy as np

from coarsen.dataset import ESTIMATORS, replica_mean_and_error

__all__ = ["SERIES_DIMS", "MeasurementSeries", "replica_mean_and_error"]

#: Dimensions of each array of a series (the dataset's names).
SERIES_DIMS: dict[str, tuple[str, ...]] = {
    "energy": ("replica", "time"),
    "magnetization": ("replica", "time"),
    "structure_factor": ("time", "k"),
    "structure_factor_sem": ("time", "k"),
    "correlation": ("time", "r"),
    "correlation_sem": ("time", "r"),
    "length": ("estimator", "replica", "time"),
    "domain_count": ("replica", "time"),
    "largest_domain": ("replica", "time"),
    "seed_area": ("replica", "time"),
    "interface_position": ("cut", "replica", "time"),
    "wall_energy": ("replica", "time"),
    "bulk_energy": ("replica", "time"),
}

_PER_REPLICA = ("energy", "magnetization", "largest_domain", "wall_energy", "bulk_energy")


class MeasurementSeries:
    """Arrays of measurements over ``replicas`` and ``n_times`` times.

    Parameters
    ----------
    replicas : int
        Replicas (or shots per time, the largest count for lab data).
    n_times : int
        Measurement times.
    n_k, n_r : int
        Number of |k| shells and distance bins.
    seeded : bool, default: False
        Keep ``seed_area``.
    cuts : int, default: 0
        Keep ``interface_position`` along this many cuts (none for 0).

    Notes
    -----
    Unmeasured entries hold NaN (``domain_count``, ``seed_area``: -1). ``store`` takes an
    :class:`coarsen.observables.Measurements` of up to ``replicas`` replicas; fewer (lab
    data with fewer shots at that time) leave the remaining rows unmeasured.
    """

    def __init__(self, replicas: int, n_times: int, n_k: int, n_r: int, *,
                 seeded: bool = False, cuts: int = 0):
        self.replicas, self.n_times, self.n_k, self.n_r = replicas, n_times, n_k, n_r
        nan = np.nan
        self.arrays = {
            "energy": np.full((replicas, n_times), nan),
            "magnetization": np.full((replicas, n_times), nan),
            "structure_factor": np.full((n_times, n_k), nan),
            "structure_factor_sem": np.full((n_times, n_k), nan),
            "correlation": np.full((n_times, n_r), nan),
            "correlation_sem": np.full((n_times, n_r), nan),
            "length": np.full((len(ESTIMATORS), replicas, n_times), nan),
            "domain_count": np.full((replicas, n_times), -1, dtype=np.int64),
            "largest_domain": np.full((replicas, n_times), nan),
            "wall_energy": np.full((replicas, n_times), nan),
            "bulk_energy": np.full((replicas, n_times), nan),
        }
        if seeded:
            self.arrays["seed_area"] = np.full((replicas, n_times), -1, dtype=np.int64)
        if cuts:
            self.arrays["interface_position"] = np.full((cuts, replicas, n_times), nan)

    def store(self, index: int, measured) -> None:
        """Put the measurements of time number ``index`` into the arrays."""
        a = self.arrays
        n = np.asarray(measured.energy).shape[0]
        if n > self.replicas:
            raise ValueError(f"measurements of {n} replicas do not fit a series of "
                             f"{self.replicas}")
        for name in _PER_REPLICA:
            a[name][:n, index] = getattr(measured, name)
        a["domain_count"][:n, index] = measured.domain_count
        a["length"][:, :n, index] = measured.length
        for name in ("structure_factor", "correlation"):
            mean, error = replica_mean_and_error(getattr(measured, name))
            a[name][index] = mean
            a[f"{name}_sem"][index] = error

    @classmethod
    def from_arrays(cls, arrays: dict[str, np.ndarray]) -> MeasurementSeries:
        """Rebuild a series from stored arrays (a checkpoint)."""
        replicas, n_times = arrays["energy"].shape
        series = cls(replicas, n_times, arrays["structure_factor"].shape[1],
                     arrays["correlation"].shape[1], seeded="seed_area" in arrays,
                     cuts=len(arrays.get("interface_position", ())))
        for name, value in arrays.items():
            if name in series.arrays:
                target = series.arrays[name]
                if target.shape != np.shape(value):
                    raise ValueError(f"stored {name!r} has shape {np.shape(value)}, "
                                     f"expected {target.shape}")
                target[...] = value
        return series
