"""Length data for growth fits: coarsen datasets and CSV length tables, read and validated.

Two sources give the same :class:`GrowthData`:

* a dataset written by ``coarsen run`` or ``coarsen measure`` (the ``length`` variable, one
  estimator chosen): every replica's length at every time is kept, so that the fit can take
  the mean of ``log L`` over replicas and the covariance between times from their scatter;
* a CSV length table: ``#`` comment lines, then a header row with the columns ``time`` and
  ``length`` and optionally ``length_err`` (one standard error of the length) and
  ``replicas``; other columns are ignored. This is the format :func:`coarsen.dataset.
  write_lengths_csv` writes, and what a lab's own table should look like.

Every problem is a ``ValueError`` with one line naming the file and the column or row.
"""

from __future__ import annotations

import csv
import math
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

__all__ = [
    "DEFAULT_ESTIMATOR",
    "GrowthData",
    "growth_data_from_dataset",
    "load_growth_data",
    "read_length_table",
    "table_text",
]

#: The estimator a fit uses unless told otherwise (the one ``coarsen run --lengths-csv`` writes).
DEFAULT_ESTIMATOR = "corr_half"


@dataclass(frozen=True)
class GrowthData:
    """Domain lengths against time, ready for a growth-law fit.

    Attributes
    ----------
    time : ndarray of shape (T,)
        Increasing times > 0.
    log_length : ndarray of shape (T,)
        ``log L`` per time: the mean of ``log L`` over replicas for a dataset, the log of the
        table's length for a table.
    log_length_err : ndarray of shape (T,) or None
        Its standard error (replica scatter / sqrt(replicas), or ``length_err / length``);
        None for a table without ``length_err``.
    replica_log_lengths : ndarray of shape (R, T) or None
        ``log L`` of every replica (NaN where missing), datasets only.
    kind : {"dataset", "table"}
    source : str
        The file (or "dataset" for an in-memory dataset).
    estimator : str or None
        The length estimator, when known.
    system_size : float or None
        Smallest side of the lattice in lattice spacings, when known.
    notes : tuple of str
        What was dropped on reading, and why.
    """

    time: np.ndarray
    log_length: np.ndarray
    log_length_err: np.ndarray | None
    replica_log_lengths: np.ndarray | None
    kind: str
    source: str
    estimator: str | None = None
    system_size: float | None = None
    notes: tuple = field(default=())

    @property
    def length(self) -> np.ndarray:
        """``exp(log_length)``: the geometric mean over replicas for a dataset."""
        return np.exp(self.log_length)

    def __len__(self) -> int:
        return int(self.time.size)

    def select(self, keep: np.ndarray) -> "GrowthData":
        """The same data at the times where the boolean mask ``keep`` is true."""
        keep = np.asarray(keep, dtype=bool)
        return GrowthData(
            time=self.time[keep], log_length=self.log_length[keep],
            log_length_err=None if self.log_length_err is None else self.log_length_err[keep],
            replica_log_lengths=(None if self.replica_log_lengths is None
                                 else self.replica_log_lengths[:, keep]),
            kind=self.kind, source=self.source, estimator=self.estimator,
            system_size=self.system_size, notes=self.notes)


# ------------------------------------------------------------------------------------------
# CSV length tables
# ------------------------------------------------------------------------------------------
_REQUIRED = ("time", "length")
_OPTIONAL = ("length_err", "replicas")


def _number(text: str, *, where: str, column: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise ValueError(f"{where}, column {column!r}: {text!r} is not a number") from None
    if not math.isfinite(value):
        raise ValueError(f"{where}, column {column!r}: {text!r} is not a finite number")
    return value


def _size_from_comments(comments: list[str]) -> float | None:
    for line in comments:
        match = re.search(r"lattice:\s*\S+\s+(\d+(?:x\d+)*)", line)
        if match:
            return float(min(int(side) for side in match.group(1).split("x")))
    return None


def _estimator_from_comments(comments: list[str]) -> str | None:
    for line in comments:
        match = re.search(r"estimator:\s*([A-Za-z_]+)", line)
        if match:
            return match.group(1)
    return None


def table_text(path: Path, what: str) -> tuple[str, str]:
    """``(name, text)`` of a CSV table file; ``name`` ("<what> '<path>'") starts every error.

    Raises
    ------
    ValueError
        When the file is missing or not UTF-8 text.
    """
    name = f"{what} {str(path)!r}"
    if not path.is_file():
        raise ValueError(f"{name}: no such file")
    try:
        return name, path.read_text(encoding="utf-8-sig")
    except UnicodeDecodeError:
        raise ValueError(f"{name}: not a text file (UTF-8)") from None


def read_length_table(path) -> GrowthData:
    """Read and validate a CSV length table.

    Parameters
    ----------
    path : path-like
        Lines starting with ``#`` (and blank lines) are comments; the first other line is
        the header: ``time`` and ``length`` are required, ``length_err`` and ``replicas``
        optional, other columns ignored. A comment ``# lattice: square 256x256 ...`` (as
        ``coarsen run --lengths-csv`` writes) gives the system size for the automatic window,
        and ``# estimator: NAME`` the estimator.

    Returns
    -------
    GrowthData

    Raises
    ------
    ValueError
        Naming the column or the row (``row i`` counts data rows from 1; the file's line
        number is given too): a missing or repeated column; a row with too few fields; a
        value that is not a finite number; a time <= 0 or not greater than the one before;
        a length <= 0; a ``length_err`` <= 0, or given in some rows and empty in others;
        fewer than two rows.
    """
    path = Path(path)
    name, text = table_text(path, "length table")
    comments, lines = [], []
    for number, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        if not stripped:
            continue
        if stripped.startswith("#"):
            comments.append(stripped)
        else:
            lines.append((number, line))
    if not lines:
        raise ValueError(f"{name}: no header row (need the columns time and length)")
    rows = list(csv.reader([line for _, line in lines]))
    header = [cell.strip().lower() for cell in rows[0]]
    for column in header:
        if column and header.count(column) > 1:
            raise ValueError(f"{name}: column {column!r} appears more than once in the header")
    for column in _REQUIRED:
        if column not in header:
            raise ValueError(f"{name}: no {column!r} column (header: {', '.join(header)}); "
                             f"need time and length, optionally length_err")
    index = {column: header.index(column) for column in _REQUIRED + _OPTIONAL if column in header}
    data = {column: [] for column in index}
    for row_number, ((line_number, _), cells) in enumerate(zip(lines[1:], rows[1:]), start=1):
        where = f"{name}: row {row_number} (line {line_number})"
        if len(cells) < max(index.values()) + 1:
            missing = [c for c, i in index.items() if i >= len(cells)]
            raise ValueError(f"{where}, column {missing[0]!r}: missing value "
                             f"({len(cells)} fields for {len(header)} columns)")
        for column, position in index.items():
            cell = cells[position].strip()
            if column in ("length_err", "replicas") and cell == "":
                data[column].append(None)
                continue
            data[column].append(_number(cell, where=where, column=column))
    if len(data["time"]) < 2:
        raise ValueError(f"{name}: {len(data['time'])} data rows; need at least 2")
    time = np.array(data["time"])
    length = np.array(data["length"])
    for row, (t, value) in enumerate(zip(data["time"], data["length"]), start=1):
        line = lines[row][0]
        where = f"{name}: row {row} (line {line})"
        if t <= 0:
            raise ValueError(f"{where}, column 'time': {t!r} must be > 0 (the fit uses log t)")
        if row > 1 and not t > data["time"][row - 2]:
            raise ValueError(f"{where}, column 'time': {t!r} is not greater than the previous "
                             f"time {data['time'][row - 2]!r}; times must increase")
        if value <= 0:
            raise ValueError(f"{where}, column 'length': {value!r} must be > 0")
    log_err = None
    errors = data.get("length_err")
    if errors is not None and any(e is not None for e in errors):
        for row, error in enumerate(errors, start=1):
            where = f"{name}: row {row} (line {lines[row][0]})"
            if error is None:
                raise ValueError(f"{where}, column 'length_err': empty, but other rows give an "
                                 f"error; give length_err in every row or in none")
            if error <= 0:
                raise ValueError(f"{where}, column 'length_err': {error!r} must be > 0")
        log_err = np.array(errors, dtype=np.float64) / length
    notes = () if log_err is not None else (
        "the table has no length_err: the scatter is fitted (extra-scatter parameter)",)
    return GrowthData(time=time, log_length=np.log(length), log_length_err=log_err,
                      replica_log_lengths=None, kind="table", source=str(path),
                      estimator=_estimator_from_comments(comments),
                      system_size=_size_from_comments(comments), notes=notes)


# ------------------------------------------------------------------------------------------
# datasets
# ------------------------------------------------------------------------------------------
def growth_data_from_dataset(ds, estimator: str = DEFAULT_ESTIMATOR, *,
                             source: str = "dataset") -> GrowthData:
    """Lengths of one estimator from a coarsen dataset, every replica kept.

    Parameters
    ----------
    ds : xarray.Dataset
        From ``coarsen run``, ``coarsen measure`` or :func:`coarsen.simulate`.
    estimator : {"corr_zero", "corr_half", "sk_moment", "wall"}, default: "corr_half"
    source : str
        Named in messages.

    Returns
    -------
    GrowthData
        ``log_length`` is the mean of ``log L`` over the replicas with a finite length > 0
        at that time, ``log_length_err`` its standard error. Lengths that are NaN or <= 0
        are missing values; times <= 0 and times with no replica left are dropped (noted).

    Raises
    ------
    ValueError
        If the dataset has no ``length`` variable, the estimator is unknown, or no time has
        a usable length.
    """
    if "length" not in getattr(ds, "data_vars", {}):
        raise ValueError(f"{source}: no 'length' variable; is this a coarsen dataset?")
    estimators = [str(e) for e in ds["estimator"].values]
    if estimator not in estimators:
        raise ValueError(f"estimator: {estimator!r} is not one of {', '.join(estimators)}")
    values = ds["length"].sel(estimator=estimator).transpose("replica", "time").values
    values = np.asarray(values, dtype=np.float64)
    time = np.asarray(ds["time"].values, dtype=np.float64)
    with np.errstate(invalid="ignore", divide="ignore"):
        logs = np.where(np.isfinite(values) & (values > 0), np.log(values), np.nan)
    notes = []
    positive = time > 0
    if not positive.all():
        notes.append(f"dropped {int((~positive).sum())} time(s) <= 0 (the fit uses log t)")
    count = np.isfinite(logs).sum(axis=0)
    usable = positive & (count > 0)
    if not usable.any():
        raise ValueError(f"{source}, estimator {estimator!r}: no finite length > 0 at any "
                         f"time (corr_zero is NaN for non-conserved dynamics: try corr_half)")
    empty = positive & (count == 0)
    if empty.any():
        notes.append(f"dropped {int(empty.sum())} time(s) where no replica has a {estimator} "
                     f"length")
    order = np.argsort(time[usable], kind="stable")
    time = time[usable][order]
    if np.any(np.diff(time) <= 0):
        raise ValueError(f"{source}: the time coordinate has repeated values")
    logs = logs[:, usable][:, order]
    count = count[usable][order]
    finite = np.isfinite(logs)
    mean = np.where(finite, logs, 0.0).sum(axis=0) / count
    squares = (np.where(finite, logs - mean, 0.0) ** 2).sum(axis=0)
    err = np.where(count > 1, np.sqrt(squares / np.maximum(count - 1, 1) / count), np.nan)
    size = ds.attrs.get("size")
    system_size = float(np.min(np.atleast_1d(size))) if size is not None else None
    return GrowthData(time=time, log_length=mean,
                      log_length_err=err if np.any(np.isfinite(err)) else None,
                      replica_log_lengths=logs, kind="dataset", source=source,
                      estimator=estimator, system_size=system_size, notes=tuple(notes))


def _is_netcdf(path: Path) -> bool:
    with open(path, "rb") as handle:
        magic = handle.read(8)
    return magic.startswith(b"\x89HDF") or magic.startswith(b"CDF")


def load_growth_data(source, estimator: str | None = None) -> GrowthData:
    """Lengths from a dataset file, a CSV length table, an xarray Dataset or a GrowthData.

    Parameters
    ----------
    source : path-like, xarray.Dataset or GrowthData
        A NetCDF file is read as a coarsen dataset, anything else as a CSV length table.
    estimator : str, optional
        The dataset's length estimator (default: ``corr_half``). A table has one length
        column; naming an estimator that its comments contradict is an error.

    Returns
    -------
    GrowthData
    """
    if isinstance(source, GrowthData):
        return source
    if hasattr(source, "data_vars"):
        return growth_data_from_dataset(source, estimator or DEFAULT_ESTIMATOR)
    path = Path(source)
    if not path.is_file():
        raise ValueError(f"input {str(path)!r}: no such file")
    if _is_netcdf(path):
        from coarsen.dataset import open_dataset

        return growth_data_from_dataset(open_dataset(path), estimator or DEFAULT_ESTIMATOR,
                                        source=str(path))
    data = read_length_table(path)
    if estimator is not None and data.estimator is not None and estimator != data.estimator:
        raise ValueError(f"estimator: {estimator!r}, but the length table {str(path)!r} holds "
                         f"{data.estimator!r} lengths")
    return data
