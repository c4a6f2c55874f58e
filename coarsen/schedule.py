"""Protocols in time: a temperature (or, later, a field) as a function of time in sweeps.

A :class:`Schedule` is piecewise linear through its points ``(t_0, v_0), (t_1, v_1), ...``
with ``t_0 = 0`` and non-decreasing times, and holds the last value after the last point. A
constant is a single point. Two points at the same time make an instantaneous jump; the
schedule is continuous from the right there, so the value *at* the jump time is the value
after the jump.

The dynamics use one temperature per sweep (:meth:`Schedule.sweep_values`): sweep ``s``, which
runs from time ``s`` to ``s + 1``, uses the value at its midpoint ``s + 1/2``. A linear ramp is
then followed symmetrically (the sweep values are the exact time averages of the ramp over
each sweep wherever the ramp is linear across the sweep), and a jump at a whole time ``t``
applies from the sweep that starts at ``t``.

Examples
--------
>>> quench = from_points([(0, 4.0), (0, 1.0)])       # a jump at t = 0
>>> ramp = from_points([(0, 3.0), (4, 1.0)])          # linear over four sweeps, then held
>>> ramp.sweep_values(0, 6).tolist()
[2.75, 2.25, 1.75, 1.25, 1.0, 1.0]
>>> quench.at([0, 10]).tolist()
[1.0, 1.0]
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from coarsen._validation import (
    ParameterError,
    ParameterTypeError,
    check_integer,
    check_number,
)

__all__ = ["Schedule", "constant", "crossing_time", "from_points", "quench", "ramp"]


def _normalise(points, name: str, signed: bool) -> tuple[tuple[float, float], ...]:
    """Validate ``points`` and return them as a tuple of ``(float, float)`` pairs."""
    if isinstance(points, (str, bytes)) or not hasattr(points, "__len__"):
        raise ParameterTypeError(
            f"{name}: {points!r} is not a list of [time, value] pairs; give e.g. "
            "[[0, 4.0], [200, 1.0]]", name=name, value=points)
    if len(points) == 0:
        raise ParameterError(f"{name}: [] has no points; give at least one [time, value] pair",
                             name=name, value=points)
    pairs = []
    for i, pair in enumerate(points):
        where = f"{name}[{i}]"
        if isinstance(pair, (str, bytes)) or not hasattr(pair, "__len__") or len(pair) != 2:
            raise ParameterTypeError(
                f"{where}: {pair!r} is not a [time, value] pair", name=name, value=points)
        try:
            t = check_number(pair[0], f"{where} time", minimum=0.0, what="time in sweeps")
            v = check_number(pair[1], f"{where} value", minimum=None if signed else 0.0)
        except ParameterError as error:
            raise type(error)(str(error), name=name, value=points) from None
        pairs.append((t, v))
    if pairs[0][0] != 0.0:
        raise ParameterError(
            f"{name}[0]: the first point is at time {pairs[0][0]!r}; a schedule starts at "
            "time 0", name=name, value=points)
    for i in range(1, len(pairs)):
        if pairs[i][0] < pairs[i - 1][0]:
            raise ParameterError(
                f"{name}[{i}]: time {pairs[i][0]!r} comes before the previous point's "
                f"{pairs[i - 1][0]!r}; times must not decrease", name=name, value=points)
        if i >= 2 and pairs[i][0] == pairs[i - 1][0] == pairs[i - 2][0]:
            raise ParameterError(
                f"{name}[{i}]: three points at time {pairs[i][0]!r}; a jump takes exactly two "
                "points at the same time (before and after)", name=name, value=points)
    return tuple(pairs)


@dataclass(frozen=True)
class Schedule:
    """A piecewise-linear function of time in sweeps, holding its last value.

    Parameters
    ----------
    points : sequence of (time, value) pairs
        Times in sweeps, the first 0, non-decreasing; at most two points share a time (a
        jump). Values finite, and >= 0 unless ``signed``.
    signed : bool, default: False
        Allow negative values (for a field h(t)); temperatures are never negative.

    Raises
    ------
    ValueError, TypeError
        For badly formed points (:class:`coarsen._validation.ParameterError` and
        :class:`~coarsen._validation.ParameterTypeError`, naming ``points``).

    Notes
    -----
    See the module docstring for the value at a jump (the value after it) and the
    per-sweep convention of :meth:`sweep_values` (the value at the sweep's midpoint).
    """

    points: tuple[tuple[float, float], ...]
    signed: bool = False

    def __post_init__(self):
        object.__setattr__(self, "points", _normalise(self.points, "points", self.signed))

    @property
    def times(self) -> np.ndarray:
        """Times of the points, float64 of shape (n_points,)."""
        return np.array([t for t, _ in self.points], dtype=np.float64)

    @property
    def values(self) -> np.ndarray:
        """Values at the points, float64 of shape (n_points,)."""
        return np.array([v for _, v in self.points], dtype=np.float64)

    @property
    def is_constant(self) -> bool:
        """True when every point has the same value."""
        return len({v for _, v in self.points}) == 1

    @property
    def last_change(self) -> float:
        """Time of the last point: from then on the value is held."""
        return self.points[-1][0]

    def at(self, times) -> np.ndarray:
        """Values at the given times.

        Parameters
        ----------
        times : float or array_like of float
            Times in sweeps, >= 0.

        Returns
        -------
        ndarray of dtype float64 and the shape of ``times``
            Linear interpolation between points, the value after a jump at the jump's time,
            and the last value after the last point.

        Raises
        ------
        ValueError
            For negative or non-finite times.
        """
        t = np.asarray(times, dtype=np.float64)
        if not np.all(np.isfinite(t) & (t >= 0)):
            bad = t[~(np.isfinite(t) & (t >= 0))].ravel()[0]
            raise ValueError(f"times: {float(bad)!r} is not a finite time >= 0")
        ts, vs = self.times, self.values
        flat = t.ravel()
        # the last point at or before each time; ts[0] = 0 <= t, so never -1
        index = np.searchsorted(ts, flat, side="right") - 1
        last = len(ts) - 1
        out = vs[np.minimum(index, last)]
        inner = index < last
        if np.any(inner):
            j = index[inner]
            t0, t1, v0, v1 = ts[j], ts[j + 1], vs[j], vs[j + 1]
            # t0 <= t < t1 here, so t1 > t0
            out[inner] = v0 + (v1 - v0) * ((flat[inner] - t0) / (t1 - t0))
        return out.reshape(t.shape)

    def sweep_values(self, start: int, stop: int) -> np.ndarray:
        """The value used during each sweep ``s`` in ``[start, stop)``.

        Parameters
        ----------
        start, stop : int
            Whole sweeps, ``0 <= start <= stop``.

        Returns
        -------
        ndarray of shape (stop - start,) and dtype float64
            ``at(s + 1/2)`` for every sweep ``s`` (the midpoint convention: a jump at a whole
            time ``t`` applies from sweep ``t`` on).

        Raises
        ------
        TypeError, ValueError
            For non-integer or out-of-order bounds.
        """
        start = check_integer(start, "start", minimum=0)
        stop = check_integer(stop, "stop", minimum=start)
        return self.at(np.arange(start, stop, dtype=np.float64) + 0.5)


def constant(value: float, *, signed: bool = False) -> Schedule:
    """A schedule that holds ``value`` at all times.

    Parameters
    ----------
    value : float
        Finite, and >= 0 unless ``signed``.
    signed : bool, default: False
        Allow a negative value.

    Raises
    ------
    TypeError, ValueError
        For a value that is not a finite number in range.
    """
    value = check_number(value, "value", minimum=None if signed else 0.0)
    return Schedule(((0.0, value),), signed=signed)


def from_points(points, *, signed: bool = False, name: str = "points") -> Schedule:
    """A piecewise-linear schedule through ``points``.

    Parameters
    ----------
    points : sequence of (time, value) pairs
        As for :class:`Schedule`.
    signed : bool, default: False
        Allow negative values.
    name : str, default: "points"
        Name used in error messages (the spec layer passes its dotted key).

    Raises
    ------
    TypeError, ValueError
        For badly formed points; the message names ``name`` and the offending point.
    """
    return Schedule(_normalise(points, name, signed), signed=signed)


def quench(before: float, after: float, at: float = 0.0) -> Schedule:
    """An instantaneous step from ``before`` to ``after`` at time ``at`` (sweeps)."""
    at = check_number(at, "at", minimum=0.0)
    if at == 0.0:
        return from_points([(0.0, before), (0.0, after)])
    return from_points([(0.0, before), (at, before), (at, after)])


def ramp(start: float, stop: float, duration: float) -> Schedule:
    """Linear from ``start`` at t = 0 to ``stop`` at ``duration`` (> 0 sweeps), then held.

    A ramp followed by a hold is this schedule run past ``duration``: the last value holds.
    """
    duration = check_number(duration, "duration", minimum=0.0, strict_minimum=True)
    return from_points([(0.0, start), (duration, stop)])


def crossing_time(schedule: Schedule, level: float) -> float | None:
    """The first time the schedule reaches ``level`` from a value on the other side of it.

    Returns None if it never crosses (a schedule that starts at ``level`` has not crossed).
    Linear segments are interpolated; a jump across ``level`` crosses at the jump time.
    """
    times, values = schedule.times, schedule.values
    for i in range(1, len(times)):
        a, b = values[i - 1] - level, values[i] - level
        if a == 0.0:
            continue
        if a * b <= 0.0 and b != a:
            if times[i] == times[i - 1]:
                return float(times[i])
            return float(times[i - 1] + (times[i] - times[i - 1]) * a / (a - b))
    return None
