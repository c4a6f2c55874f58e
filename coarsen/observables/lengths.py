"""Domain-length estimators from C(r), S(|k|) and the excess energy, one value per replica.

``corr_zero``
    First zero crossing of the radially averaged C(r), linearly interpolated between the
    bins around it. NaN where C has no zero (non-conserved coarsening: C > 0 at all r).
``corr_half``
    Where C(r) first falls to 1/2, interpolated the same way.
``sk_moment``
    ``2 pi sum S(k) / sum k S(k)`` over the shells with ``0 < k <= pi``, with k the shell
    centre and S the shell average. Averaging over shells first makes this the first moment
    of the one-dimensional distribution of |k|: the first moment over the full ``d^d k``
    measure diverges logarithmically with the cutoff, from the Porod tail
    ``S ~ k**-(d+1)`` (shared/REFERENCE.md Sect. 6).
``wall``
    ``1 / (e - e_eq)``, with e the energy per site and e_eq the equilibrium energy at the
    current temperature: the excess energy is carried by the domain walls, whose density
    falls as 1/L. NaN where ``e <= e_eq`` or e_eq is unknown.

The four are proportional to each other in the scaling regime but with different constants;
compare growth exponents, not values, across estimators.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = [
    "ESTIMATORS",
    "correlation_crossing",
    "estimate_lengths",
    "moment_length",
    "wall_length",
]

#: Length estimators, in the order of the ``estimator`` coordinate of the dataset.
ESTIMATORS = ("corr_zero", "corr_half", "sk_moment", "wall")


def _as_rows(values, name: str) -> np.ndarray:
    values = np.asarray(values, dtype=np.float64)
    if values.ndim == 1:
        values = values[np.newaxis]
    if values.ndim != 2:
        raise ValueError(f"{name}: expected an array of shape (replicas, bins), got {values.shape}")
    return values


def correlation_crossing(r, correlation, level: float) -> np.ndarray:
    """Where each C(r) first falls to ``level``, linearly interpolated; NaN if it never does.

    Parameters
    ----------
    r : ndarray of shape (n_r,)
        Increasing distances (bin centres).
    correlation : ndarray of shape (R, n_r) or (n_r,)
        Radially averaged C(r).
    level : float
        0 for ``corr_zero``, 1/2 for ``corr_half``.

    Returns
    -------
    ndarray of shape (R,), float64
        The first r with ``C(r) <= level``: ``r_(i-1) + (C_(i-1) - level) / (C_(i-1) - C_i)
        (r_i - r_(i-1))`` for the first bin i at or below the level (exactly ``r_i`` when
        ``C_i == level``); ``r_0`` if C already starts there.
    """
    r = np.asarray(r, dtype=np.float64)
    c = _as_rows(correlation, "correlation")
    if c.shape[1] != len(r):
        raise ValueError(f"correlation: {c.shape[1]} bins but {len(r)} distances r")
    below = c <= level
    found = below.any(axis=1)
    first = np.argmax(below, axis=1)
    out = np.full(c.shape[0], np.nan)
    rows = np.flatnonzero(found & (first == 0))
    out[rows] = r[0]
    rows = np.flatnonzero(found & (first > 0))
    i = first[rows]
    c_hi, c_lo = c[rows, i - 1], c[rows, i]
    fraction = (c_hi - level) / (c_hi - c_lo)
    out[rows] = r[i - 1] + fraction * (r[i] - r[i - 1])
    return out


def moment_length(k, structure_factor, k_max: float = math.pi) -> np.ndarray:
    """``2 pi sum S(k) / sum k S(k)`` over the shells with ``0 < k <= k_max``.

    Parameters
    ----------
    k : ndarray of shape (n_k,)
        Shell centres.
    structure_factor : ndarray of shape (R, n_k) or (n_k,)
        Shell-averaged S(|k|).
    k_max : float, default: pi
        Upper cutoff (shells with centre above it are left out).

    Returns
    -------
    ndarray of shape (R,), float64
        NaN where the shells carry no weight (a uniform configuration).
    """
    k = np.asarray(k, dtype=np.float64)
    s = _as_rows(structure_factor, "structure_factor")
    if s.shape[1] != len(k):
        raise ValueError(f"structure_factor: {s.shape[1]} shells but {len(k)} wavevectors k")
    use = (k > 0) & (k <= k_max + 1e-12)
    weight = s[:, use].sum(axis=1)
    # a row-wise NumPy sum, not a matrix product: BLAS rounds a product of R rows differently
    # from that of one row, which made a replica's value depend on the replicas beside it
    first = (s[:, use] * k[use]).sum(axis=1)
    out = np.full(s.shape[0], np.nan)
    ok = first > 0
    out[ok] = 2.0 * np.pi * weight[ok] / first[ok]
    return out


def wall_length(energy, equilibrium_energy: float | None) -> np.ndarray:
    """``1 / (e - e_eq)`` per replica; NaN where ``e <= e_eq`` or ``e_eq`` is None or NaN.

    Parameters
    ----------
    energy : ndarray of shape (R,)
        Energy per site.
    equilibrium_energy : float or None
        Equilibrium energy per site at the current temperature and field.
    """
    e = np.atleast_1d(np.asarray(energy, dtype=np.float64))
    out = np.full(e.shape, np.nan)
    if equilibrium_energy is None or not math.isfinite(float(equilibrium_energy)):
        return out
    excess = e - float(equilibrium_energy)
    ok = excess > 0
    out[ok] = 1.0 / excess[ok]
    return out


def estimate_lengths(r, correlation, k, structure_factor, energy,
                     equilibrium_energy: float | None) -> np.ndarray:
    """All four estimators, shape ``(4, R)`` in :data:`ESTIMATORS` order.

    Parameters
    ----------
    r, correlation : ndarray of shape (n_r,) and (R, n_r)
        Bin centres and radially averaged C(r).
    k, structure_factor : ndarray of shape (n_k,) and (R, n_k)
        Shell centres and shell-averaged S(|k|).
    energy : ndarray of shape (R,)
        Energy per site.
    equilibrium_energy : float or None
        For ``wall``.

    Returns
    -------
    ndarray of shape (4, R), float64
    """
    return np.stack([
        correlation_crossing(r, correlation, 0.0),
        correlation_crossing(r, correlation, 0.5),
        moment_length(k, structure_factor),
        wall_length(energy, equilibrium_energy),
    ])
