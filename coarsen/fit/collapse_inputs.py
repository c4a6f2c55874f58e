"""Curve families for scaling collapses: from datasets, CSV tables or plain arrays, validated.

A :class:`CurveFamily` is a set of curves ``y(x)``, each labelled by a positive parameter
``s`` (the measurement time for dynamic scaling, the ramp time or another protocol parameter
for a family), with one standard error per point. Three sources give one:

* a coarsen dataset: ``correlation`` (x = r) or ``structure_factor`` (x = |k|) at each
  ``time``, with their ``*_sem`` errors and the replica-mean length of one estimator per
  time (used for the windows and for collapses on measured lengths); or ``length`` against
  time along a ``ramp_time`` dimension (a ramp scan), one curve per ramp time;
* a CSV table: ``#`` comment lines, then the header ``parameter,x,y,y_err`` (other columns
  ignored), one row per point;
* a list of ``(parameter, x, y, y_err)`` tuples of arrays (:func:`family_from_curves`).

Windows and thinning (:func:`select_points`) pick the fitted points once, before any
rescaling, so that the likelihood always sees the same data. Every problem is a
``ValueError`` of one line naming the file, curve, column or option.
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from coarsen.fit.inputs import table_text

__all__ = [
    "CURVE_COLUMNS",
    "DEFAULT_KMAX",
    "DEFAULT_POINTS",
    "DEFAULT_XMAX_CORRELATION",
    "MIN_LENGTH",
    "OBSERVABLES",
    "CurveFamily",
    "family_from_curves",
    "family_from_dataset",
    "load_family",
    "read_curve_table",
    "select_points",
]

OBSERVABLES = ("correlation", "structure_factor", "length")
#: Columns of a CSV curve table.
CURVE_COLUMNS = ("parameter", "x", "y", "y_err")
#: Default x window of a correlation collapse: r up to this many lengths (the scaling region;
#: past it C is small and dominated by noise).
DEFAULT_XMAX_CORRELATION = 3.0
#: Default largest |k| of a structure-factor collapse (1/lattice spacing): past it the
#: lattice scale dominates even after the lattice wave number is used.
DEFAULT_KMAX = 2.0
#: Default early-time cut of a dataset collapse: times whose length (the estimator's replica
#: mean) is below this many lattice spacings are dropped (no scaling at the lattice scale).
MIN_LENGTH = 2.0
#: Default number of fitted points in all: each curve is thinned to about
#: ``DEFAULT_POINTS / curves`` points (at least 6), so that one likelihood evaluation (a
#: Cholesky factorisation of that size per walker) takes a few milliseconds.
DEFAULT_POINTS = 160


@dataclass(frozen=True)
class CurveFamily:
    """Curves ``y(x)`` labelled by a positive parameter, with standard errors.

    Attributes
    ----------
    parameter : ndarray of shape (P,)
        Curve labels (time, ramp time, ...), increasing, > 0.
    x, y, error : tuple of P ndarrays
        Points of each curve, x increasing, errors > 0 and finite.
    observable : str
        ``correlation``, ``structure_factor``, ``length`` or ``y`` (tables and arrays).
    parameter_name, x_name : str
        What the label and the abscissa are (``time``/``ramp_time``/``parameter``,
        ``r``/``k``/``time``/``x``).
    length : ndarray of shape (P,) or None
        Replica-mean length of :attr:`estimator` per curve (datasets of one run).
    estimator : str or None
    dimension : int or None
        Spatial dimension (datasets).
    system_size : float or None
        Smallest side of the lattice (datasets).
    source : str
    notes : tuple of str
    """

    parameter: np.ndarray
    x: tuple
    y: tuple
    error: tuple
    observable: str
    parameter_name: str
    x_name: str
    source: str
    length: np.ndarray | None = None
    estimator: str | None = None
    dimension: int | None = None
    system_size: float | None = None
    notes: tuple = field(default=())

    def __len__(self) -> int:
        return int(self.parameter.size)

    @property
    def n_points(self) -> int:
        return int(sum(x.size for x in self.x))

    def flat(self):
        """``(label, x, y, error, curve index)`` of every point, as 1-d arrays."""
        index = np.concatenate([np.full(x.size, i) for i, x in enumerate(self.x)])
        return (self.parameter[index], np.concatenate(self.x), np.concatenate(self.y),
                np.concatenate(self.error), index)


def _check_curve(where: str, x, y, e) -> tuple:
    arrays = []
    for name, values in (("x", x), ("y", y), ("y_err", e)):
        try:
            values = np.asarray(values, dtype=np.float64)
        except (TypeError, ValueError):
            raise ValueError(f"{where}: {name} is not an array of numbers") from None
        if values.ndim != 1:
            raise ValueError(f"{where}: {name} must be 1-d, got shape {values.shape}")
        arrays.append(values)
    x, y, e = arrays
    if not x.size == y.size == e.size:
        raise ValueError(f"{where}: mismatched shapes: x has {x.size} values, y {y.size}, "
                         f"y_err {e.size}")
    for name, values in (("x", x), ("y", y), ("y_err", e)):
        bad = np.flatnonzero(~np.isfinite(values))
        if bad.size:
            raise ValueError(f"{where}: {name}[{bad[0]}] is {float(values[bad[0]])!r}; every value "
                             f"must be a finite number")
    bad = np.flatnonzero(e <= 0)
    if bad.size:
        raise ValueError(f"{where}: y_err[{bad[0]}] = {e[bad[0]]!r} must be > 0")
    order = np.argsort(x, kind="stable")
    x, y, e = x[order], y[order], e[order]
    if np.any(np.diff(x) == 0):
        raise ValueError(f"{where}: repeated x values")
    return x, y, e


def _finish(parameter, curves, **kw) -> CurveFamily:
    parameter = np.asarray(parameter, dtype=np.float64)
    where = kw.get("source", "curves")
    if parameter.size < 2:
        raise ValueError(f"{where}: {parameter.size} curve(s); a collapse needs at least two "
                         f"(two times, or two values of the parameter)")
    if np.any(~np.isfinite(parameter)) or np.any(parameter <= 0):
        bad = parameter[~(np.isfinite(parameter) & (parameter > 0))][0]
        raise ValueError(f"{where}: curve parameter {bad!r} must be a finite number > 0")
    order = np.argsort(parameter, kind="stable")
    if np.any(np.diff(parameter[order]) == 0):
        raise ValueError(f"{where}: two curves have the same parameter "
                         f"{parameter[order][np.flatnonzero(np.diff(parameter[order]) == 0)[0]]!r}")
    curves = [curves[i] for i in order]
    length = kw.pop("length", None)
    if length is not None:
        length = np.asarray(length, dtype=np.float64)[order]
    return CurveFamily(parameter=parameter[order], x=tuple(c[0] for c in curves),
                       y=tuple(c[1] for c in curves), error=tuple(c[2] for c in curves),
                       length=length, **kw)


def family_from_curves(curves, *, parameter_name: str = "parameter", x_name: str = "x",
                       source: str = "curves") -> CurveFamily:
    """A family from ``(parameter, x, y, y_err)`` tuples.

    Parameters
    ----------
    curves : sequence of (float, array_like, array_like, array_like)
        One tuple per curve: its label (> 0), abscissae, values and standard errors (> 0).
    parameter_name, x_name : str
        Names used in the output (for example ``"ramp_time"`` and ``"time"``).
    source : str
        Named in messages.

    Returns
    -------
    CurveFamily

    Raises
    ------
    ValueError
        Fewer than two curves, a tuple that is not four items, mismatched lengths, a NaN or
        infinite value, an error <= 0, repeated x within a curve or repeated labels.
    """
    labels, checked = [], []
    for i, item in enumerate(curves):
        if not isinstance(item, (tuple, list)) or len(item) != 4:
            raise ValueError(f"{source}: curve {i} must be a tuple (parameter, x, y, y_err)")
        p, x, y, e = item
        try:
            p = float(p)
        except (TypeError, ValueError):
            raise ValueError(f"{source}: curve {i}: parameter {p!r} is not a number") from None
        labels.append(p)
        checked.append(_check_curve(f"{source}: curve {i} (parameter {p:g})", x, y, e))
    return _finish(labels, checked, observable="y", parameter_name=parameter_name,
                   x_name=x_name, source=source)


def read_curve_table(path) -> CurveFamily:
    """Read a CSV curve table: columns ``parameter``, ``x``, ``y``, ``y_err``.

    Lines starting with ``#`` and blank lines are skipped; the first other line is the
    header; other columns are ignored. Rows with the same ``parameter`` form one curve.

    Raises
    ------
    ValueError
        Naming the file and the row or column: a missing column, a value that is not a
        finite number, an error <= 0, fewer than two curves.
    """
    path = Path(path)
    name, text = table_text(path, "curve table")
    lines = [line for line in text.splitlines() if line.strip() and
             not line.strip().startswith("#")]
    if not lines:
        raise ValueError(f"{name}: no header row (need the columns {', '.join(CURVE_COLUMNS)})")
    rows = list(csv.reader(lines))
    header = [cell.strip().lower() for cell in rows[0]]
    for column in CURVE_COLUMNS:
        if column not in header:
            raise ValueError(f"{name}: no {column!r} column (header: {', '.join(header)}); "
                             f"need {', '.join(CURVE_COLUMNS)}")
    index = [header.index(column) for column in CURVE_COLUMNS]
    values = []
    for number, cells in enumerate(rows[1:], start=1):
        row = []
        for column, position in zip(CURVE_COLUMNS, index):
            if position >= len(cells):
                raise ValueError(f"{name}: row {number}, column {column!r}: missing value")
            try:
                value = float(cells[position])
            except ValueError:
                raise ValueError(f"{name}: row {number}, column {column!r}: "
                                 f"{cells[position].strip()!r} is not a number") from None
            if not math.isfinite(value):
                raise ValueError(f"{name}: row {number}, column {column!r}: "
                                 f"{cells[position].strip()!r} is not a finite number")
            row.append(value)
        values.append(row)
    if not values:
        raise ValueError(f"{name}: no data rows")
    table = np.array(values)
    curves = []
    for p in np.unique(table[:, 0]):
        rows_p = table[table[:, 0] == p]
        curves.append((p, rows_p[:, 1], rows_p[:, 2], rows_p[:, 3]))
    return family_from_curves(curves, source=name)


# ------------------------------------------------------------------------------------------
# datasets
# ------------------------------------------------------------------------------------------
def _dataset_lengths(ds, estimator: str, where: str) -> np.ndarray:
    from coarsen.dataset import replica_mean_and_error

    estimators = [str(e) for e in ds["estimator"].values]
    if estimator not in estimators:
        raise ValueError(f"estimator: {estimator!r} is not one of {', '.join(estimators)}")
    values = ds["length"].sel(estimator=estimator).transpose("replica", "time").values
    mean, _ = replica_mean_and_error(values)
    return mean


def family_from_dataset(ds, observable: str = "correlation", *, estimator: str = "corr_half",
                        source: str = "dataset") -> CurveFamily:
    """A family from a coarsen dataset.

    Parameters
    ----------
    ds : xarray.Dataset
    observable : {"correlation", "structure_factor", "length"}
        ``correlation``/``structure_factor``: one curve per measurement time (x = r or |k|),
        errors from the ``*_sem`` variable; the k = 0 shell and r = 0 bin are left out
        (S(0) = M^2/N is not part of the scaling form, C(0) = 1 identically). ``length``:
        one curve per ramp time of a ramp scan (x = time), the replica mean of the
        estimator's length and its standard error.
    estimator : str, default: "corr_half"
        The length estimator: for the windows and measured-length collapses (one run), or
        the collapsed length (``length``).
    source : str
        Named in messages.

    Returns
    -------
    CurveFamily

    Raises
    ------
    ValueError
        A missing variable, a single time (or ramp time), a NaN value or error (for
        example a standard error from a single replica), or an unknown estimator.
    """
    from coarsen._validation import check_choice

    check_choice(observable, OBSERVABLES, "observable")
    variables = getattr(ds, "data_vars", {})
    size = ds.attrs.get("size")
    system_size = float(np.min(np.atleast_1d(size))) if size is not None else None
    dimension = int(np.atleast_1d(size).size) if size is not None else None
    if observable == "length":
        if "ramp_time" not in ds.dims:
            raise ValueError(f"{source}: observable 'length' collapses a family of runs along "
                             f"a 'ramp_time' dimension, which this dataset does not have; "
                             f"for one run collapse 'correlation' or 'structure_factor'")
        if "length" not in variables:
            raise ValueError(f"{source}: no 'length' variable; is this a coarsen dataset?")
        from coarsen.dataset import replica_mean_and_error

        estimators = [str(e) for e in ds["estimator"].values]
        if estimator not in estimators:
            raise ValueError(f"estimator: {estimator!r} is not one of {', '.join(estimators)}")
        values = ds["length"].sel(estimator=estimator).transpose("replica", "ramp_time",
                                                                  "time").values
        mean, error = replica_mean_and_error(values)
        time = np.asarray(ds["time"].values, dtype=np.float64)
        curves, labels = [], []
        for i, p in enumerate(np.asarray(ds["ramp_time"].values, dtype=np.float64)):
            where = f"{source}: length ({estimator}) at ramp_time {p:g}"
            keep = time > 0
            curves.append(_check_curve(where, time[keep], mean[i][keep], error[i][keep]))
            labels.append(p)
        return _finish(labels, curves, observable="length", parameter_name="ramp_time",
                       x_name="time", source=source, estimator=estimator,
                       dimension=dimension, system_size=system_size)
    error_name = f"{observable}_sem"
    for name in (observable, error_name):
        if name not in variables:
            raise ValueError(f"{source}: no {name!r} variable; is this a coarsen dataset?")
    if "ramp_time" in ds[observable].dims:
        raise ValueError(f"{source}: {observable} has a 'ramp_time' dimension; select one ramp "
                         f"time first (ds.sel(ramp_time=...)) or collapse 'length'")
    axis = "r" if observable == "correlation" else "k"
    values = np.asarray(ds[observable].transpose("time", axis).values, dtype=np.float64)
    errors = np.asarray(ds[error_name].transpose("time", axis).values, dtype=np.float64)
    x = np.asarray(ds[axis].values, dtype=np.float64)
    time = np.asarray(ds["time"].values, dtype=np.float64)
    lengths = _dataset_lengths(ds, estimator, source) if "length" in variables else None
    notes = []
    keep_x = x > 0
    curves, labels, kept_lengths = [], [], []
    for i, t in enumerate(time):
        if t <= 0:
            notes.append(f"dropped time {t:g} (<= 0)")
            continue
        where = f"{source}: {observable} at time {t:g}"
        bad = np.flatnonzero(~np.isfinite(values[i][keep_x]))
        if bad.size:
            raise ValueError(f"{where}, {axis} = {x[keep_x][bad[0]]:g}: value is NaN")
        bad = np.flatnonzero(~np.isfinite(errors[i][keep_x]))
        if bad.size:
            raise ValueError(f"{where}, {axis} = {x[keep_x][bad[0]]:g}: {error_name} is NaN "
                             f"(a standard error needs at least two replicas)")
        positive = keep_x & (errors[i] > 0)
        curves.append(_check_curve(where, x[positive], values[i][positive],
                                   errors[i][positive]))
        labels.append(t)
        kept_lengths.append(np.nan if lengths is None else lengths[i])
    return _finish(labels, curves, observable=observable, parameter_name="time", x_name=axis,
                   source=source, length=np.array(kept_lengths) if lengths is not None
                   else None, estimator=estimator if lengths is not None else None,
                   dimension=dimension, system_size=system_size, notes=tuple(notes))


def _is_netcdf(path: Path) -> bool:
    with open(path, "rb") as handle:
        magic = handle.read(8)
    return magic.startswith(b"\x89HDF") or magic.startswith(b"CDF")


def load_family(source, observable: str | None = None, *,
                estimator: str = "corr_half") -> CurveFamily:
    """A family from a dataset (file or in memory), a CSV curve table, curves or a family.

    Parameters
    ----------
    source : path-like, xarray.Dataset, CurveFamily or sequence of curve tuples
    observable : {"correlation", "structure_factor", "length"}, optional
        For datasets (default: ``correlation``, or ``length`` for a ramp scan); tables and
        curves hold one observable and refuse another name.
    estimator : str, default: "corr_half"

    Returns
    -------
    CurveFamily
    """
    if isinstance(source, CurveFamily):
        return source
    if hasattr(source, "data_vars"):
        if observable is None:
            observable = "length" if "ramp_time" in source.dims else "correlation"
        return family_from_dataset(source, observable, estimator=estimator)
    if isinstance(source, (list, tuple)):
        if observable is not None:
            raise ValueError(f"observable: {observable!r} applies to datasets; curves given "
                             f"as arrays are collapsed as they are")
        return family_from_curves(source)
    path = Path(source)
    if not path.is_file():
        raise ValueError(f"input {str(path)!r}: no such file")
    if _is_netcdf(path):
        from coarsen.dataset import open_dataset

        ds = open_dataset(path)
        if observable is None:
            observable = "length" if "ramp_time" in ds.dims else "correlation"
        return family_from_dataset(ds, observable, estimator=estimator, source=str(path))
    if observable is not None:
        raise ValueError(f"observable: {observable!r} applies to datasets; the curve table "
                         f"{str(path)!r} holds one observable (columns parameter, x, y, y_err)")
    return read_curve_table(path)


# ------------------------------------------------------------------------------------------
# windows and thinning
# ------------------------------------------------------------------------------------------
def _thin(x: np.ndarray, count: int, log: bool) -> np.ndarray:
    """Indices of about ``count`` points spread evenly along x (or log x)."""
    if x.size <= count:
        return np.arange(x.size)
    position = np.log(x) if log else x
    targets = np.linspace(position[0], position[-1], count)
    index = np.unique(np.abs(position[np.newaxis, :] - targets[:, np.newaxis]).argmin(axis=1))
    return index


def _check_bound(value, name):
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float, np.number)) or \
            not math.isfinite(value):
        raise ValueError(f"{name}: {value!r} must be a finite number")
    return float(value)


def select_points(family: CurveFamily, *, tmin=None, tmax=None, xmin=None, xmax=None,
                  kmax=None, points: int | None = DEFAULT_POINTS, log_x: bool = False,
                  min_length: float | None = MIN_LENGTH,
                  saturation_fraction: float | None = None) -> CurveFamily:
    """Apply the windows and thin the curves; the notes say what was dropped.

    Parameters
    ----------
    family : CurveFamily
    tmin, tmax : float, optional
        Times kept (inclusive): the curve labels of a dataset of one run, the abscissa of a
        ramp-scan family (``x`` is time there). Tables: the curve parameter.
    xmin, xmax : float, optional
        Abscissa window. For ``correlation`` in units of the curve's length (r / L), default
        ``r >= 1`` and ``r / L <= 3`` (:data:`DEFAULT_XMAX_CORRELATION`); for
        ``structure_factor`` in units of 1 / L (k L), no default; otherwise in x's units.
    kmax : float, optional
        ``structure_factor`` only: largest |k| (default :data:`DEFAULT_KMAX`).
    points : int or None, default: DEFAULT_POINTS
        Thin each curve to about ``points / curves`` points (at least 6), evenly along x
        (along log x with ``log_x``); None keeps every point.
    min_length : float or None, default: MIN_LENGTH
        Datasets of one run without ``tmin``: drop times whose length is below this.
    saturation_fraction : float, optional
        Datasets of one run without ``tmax``: drop times whose length exceeds this fraction
        of the system's smallest side (default: the growth fit's fraction for the
        estimator, :data:`coarsen.fit.growth.SATURATION_FRACTION`).

    Returns
    -------
    CurveFamily
        With the kept curves and points.

    Raises
    ------
    ValueError
        A bad bound, or fewer than two curves (or a curve with fewer than two points) left.
    """
    from coarsen.fit.growth import SATURATION_FRACTION

    tmin, tmax = _check_bound(tmin, "tmin"), _check_bound(tmax, "tmax")
    xmin, xmax = _check_bound(xmin, "xmin"), _check_bound(xmax, "xmax")
    kmax = _check_bound(kmax, "kmax")
    if tmin is not None and tmax is not None and not tmin < tmax:
        raise ValueError(f"tmin: {tmin!r} must be less than tmax {tmax!r}")
    if xmin is not None and xmax is not None and not xmin < xmax:
        raise ValueError(f"xmin: {xmin!r} must be less than xmax {xmax!r}")
    if points is not None and (isinstance(points, bool) or int(points) != points or points < 4):
        raise ValueError(f"points: {points!r} must be a whole number >= 4")
    notes = list(family.notes)
    one_run = family.observable in ("correlation", "structure_factor")
    label = family.parameter
    keep_curve = np.ones(label.size, dtype=bool)
    time_on_x = family.x_name == "time"
    if not time_on_x:
        if tmin is not None:
            keep_curve &= label >= tmin
        if tmax is not None:
            keep_curve &= label <= tmax
    lengths = family.length
    if one_run and lengths is not None and np.any(np.isfinite(lengths)):
        missing = keep_curve & ~np.isfinite(lengths)
        if missing.any():
            keep_curve &= ~missing
            notes.append(f"dropped {int(missing.sum())} time(s) where no replica has a "
                         f"{family.estimator} length")
        if tmin is None and min_length is not None:
            short = keep_curve & ~(lengths >= min_length)
            if short.any():
                keep_curve &= ~short
                notes.append(f"dropped {int(short.sum())} early time(s) with {family.estimator}"
                             f" length below {min_length:g} lattice spacings")
        if tmax is None and family.system_size is not None:
            fraction = saturation_fraction if saturation_fraction is not None else \
                SATURATION_FRACTION.get(family.estimator, 0.1)
            long = keep_curve & (lengths > fraction * family.system_size)
            if long.any():
                keep_curve &= ~long
                notes.append(f"dropped {int(long.sum())} late time(s) with {family.estimator} "
                             f"length above {fraction:g} x system size {family.system_size:g}"
                             f" (finite-size saturation)")
    elif one_run:
        if xmin is not None or xmax is not None:
            raise ValueError(f"xmin/xmax: {family.source} has no finite "
                             f"{family.estimator or 'length'} values to scale the window by")
        lengths = None
    if family.observable == "correlation" and xmax is None:
        xmax = DEFAULT_XMAX_CORRELATION if lengths is not None else None
    if family.observable == "structure_factor" and kmax is None:
        kmax = DEFAULT_KMAX
    kept = np.flatnonzero(keep_curve)
    per_curve = None if points is None else max(6, int(points) // max(kept.size, 1))
    curves, labels, kept_lengths = [], [], []
    dropped_points = 0
    for i in kept:
        x, y, e = family.x[i], family.y[i], family.error[i]
        inside = np.ones(x.size, dtype=bool)
        scale = 1.0
        if one_run and lengths is not None:
            scale = lengths[i] if family.observable == "correlation" else 1.0 / lengths[i]
        if family.observable == "correlation":
            inside &= x >= 1.0
        if xmin is not None:
            inside &= x / scale >= xmin
        if xmax is not None:
            inside &= x / scale <= xmax
        if kmax is not None and family.observable == "structure_factor":
            inside &= x <= kmax
        if time_on_x:
            if tmin is not None:
                inside &= x >= tmin
            if tmax is not None:
                inside &= x <= tmax
        if log_x:
            inside &= x > 0
        if log_x or family.observable in ("structure_factor", "length"):
            inside &= y > 0
        if inside.sum() < 2:
            notes.append(f"dropped curve {family.parameter_name} = {label[i]:g}: fewer than two "
                         f"points in the window")
            continue
        x, y, e = x[inside], y[inside], e[inside]
        if per_curve is not None:
            index = _thin(x, per_curve, log_x)
            dropped_points += x.size - index.size
            x, y, e = x[index], y[index], e[index]
        curves.append((x, y, e))
        labels.append(label[i])
        kept_lengths.append(np.nan if lengths is None else lengths[i])
    if dropped_points:
        notes.append(f"thinned to at most {per_curve} points per curve (evenly along "
                     f"{'log ' if log_x else ''}{family.x_name}); {dropped_points} points "
                     f"not fitted")
    if len(curves) < 2:
        raise ValueError(f"{family.source}: {len(curves)} curve(s) left in the window; a "
                         f"collapse needs at least two (widen tmin/tmax or xmin/xmax)")
    return replace(family, parameter=np.array(labels), x=tuple(c[0] for c in curves),
                   y=tuple(c[1] for c in curves), error=tuple(c[2] for c in curves),
                   length=None if lengths is None else np.array(kept_lengths),
                   notes=tuple(notes))
