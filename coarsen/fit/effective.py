"""The effective exponent n_eff(t) = d ln L / d ln t, with an uncertainty band.

Between measured times ``t_k`` and ``t_{k+s}`` (``s`` = ``span``) the slope of ``ln L``
against ``ln t`` is assigned to the geometric mean time ``sqrt(t_k t_{k+s})``. Its error
comes from the replicas for a dataset (the slope of each replica, then the standard error
of their mean: the correlation between neighbouring times is then accounted for), and from
a parametric bootstrap of the table's independent errors for a CSV table.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from coarsen.fit.inputs import GrowthData

__all__ = ["EffectiveExponent", "effective_exponent"]


@dataclass(frozen=True)
class EffectiveExponent:
    """``n_eff`` at the midpoints between measured times.

    Attributes
    ----------
    time : ndarray of shape (M,)
        Geometric-mean times.
    exponent : ndarray of shape (M,)
    error : ndarray of shape (M,)
        One standard error; NaN where none can be given (a table without errors).
    method : str
        ``"replicas"``, ``"bootstrap"`` or ``"none"``.
    span : int
    """

    time: np.ndarray
    exponent: np.ndarray
    error: np.ndarray
    method: str
    span: int


def effective_exponent(data: GrowthData, *, span: int = 1, bootstrap: int = 2000,
                       seed: int = 0) -> EffectiveExponent:
    """Local log-log slopes of L(t) with their standard errors.

    Parameters
    ----------
    data : GrowthData
    span : int, default: 1
        Slopes between points ``span`` apart (larger is smoother and coarser).
    bootstrap : int, default: 2000
        Resamples for a table with errors.
    seed : int, default: 0
        Seeds the bootstrap.

    Returns
    -------
    EffectiveExponent
    """
    if int(span) != span or span < 1:
        raise ValueError(f"span: {span!r} must be a whole number >= 1")
    span = int(span)
    if len(data) <= span:
        raise ValueError(f"span: {span} needs more than {span} points, the data have {len(data)}")
    log_t = np.log(data.time)
    step = log_t[span:] - log_t[:-span]
    mid = np.exp(0.5 * (log_t[span:] + log_t[:-span]))
    y = data.log_length
    slope = (y[span:] - y[:-span]) / step
    error = np.full(slope.shape, np.nan)
    method = "none"
    replicas = data.replica_log_lengths
    if replicas is not None and replicas.shape[0] > 1:
        per_replica = (replicas[:, span:] - replicas[:, :-span]) / step
        finite = np.isfinite(per_replica)
        count = finite.sum(axis=0)
        safe = np.maximum(count, 1)
        mean = np.where(finite, per_replica, 0.0).sum(axis=0) / safe
        squares = np.where(finite, per_replica - mean, 0.0) ** 2
        spread = np.sqrt(squares.sum(axis=0) / np.maximum(count - 1, 1))
        slope = np.where(count > 0, mean, slope)
        error = np.where(count > 1, spread / np.sqrt(safe), np.nan)
        method = "replicas"
    elif data.log_length_err is not None:
        rng = np.random.default_rng(seed)
        draws = y + data.log_length_err * rng.standard_normal((bootstrap, y.size))
        error = ((draws[:, span:] - draws[:, :-span]) / step).std(axis=0, ddof=1)
        method = "bootstrap"
    return EffectiveExponent(time=mid, exponent=slope, error=error, method=method, span=span)
