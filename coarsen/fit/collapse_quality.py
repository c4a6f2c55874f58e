"""The Houdayer-Hartmann quality of a collapse: a fast, deterministic measure.

For every rescaled point ``(X_ip, Y_ip, E_ip)`` of curve p, the master curve is estimated at
``X_ip`` from the other curves alone: each other curve q contributes the two of its points
that bracket ``X_ip`` (none if ``X_ip`` lies outside its range), and a straight line fitted by
weighted least squares (weights ``1 / E**2``) through all those points gives the estimate
``Y`` and its standard error ``dY``. The quality is

    S = (1 / N) sum_p sum_i (Y_ip - Y)**2 / (E_ip**2 + dY**2),

the sum over the N points that have an estimate (Houdayer & Hartmann, Phys. Rev. B 70,
014418 (2004); recalled from memory). S is about 1 for curves that collapse within their
errors and grows with the misfit; it is minimised over the exponents for starting points.
"""

from __future__ import annotations

import numpy as np

__all__ = ["collapse_quality", "quality_terms"]


def quality_terms(curves):
    """The terms of the quality measure, point by point.

    Parameters
    ----------
    curves : sequence of (x, y, error) tuples of 1-d arrays
        Rescaled curves; each is sorted by x here.

    Returns
    -------
    list of ndarray
        For each curve, ``(Y_ip - Y)**2 / (E_ip**2 + dY**2)`` per point (NaN where the other
        curves do not bracket the point).
    """
    ordered = []
    for x, y, e in curves:
        order = np.argsort(x, kind="stable")
        ordered.append((np.asarray(x)[order], np.asarray(y)[order], np.asarray(e)[order],
                        order))
    out = []
    for p, (xp, yp, ep, order_p) in enumerate(ordered):
        sums = np.zeros((5, xp.size))  # w, w x, w y, w x^2, w x y
        for q, (xq, yq, eq, _) in enumerate(ordered):
            if q == p or xq.size < 2:
                continue
            j = np.searchsorted(xq, xp, side="right")
            inside = (j > 0) & (j < xq.size) & (xp >= xq[0]) & (xp <= xq[-1])
            j = np.clip(j, 1, xq.size - 1)
            for index in (j - 1, j):
                w = np.where(inside, 1.0 / eq[index] ** 2, 0.0)
                xv, yv = xq[index], yq[index]
                sums[0] += w
                sums[1] += w * xv
                sums[2] += w * yv
                sums[3] += w * xv * xv
                sums[4] += w * xv * yv
        s, sx, sy, sxx, sxy = sums
        delta = s * sxx - sx * sx
        with np.errstate(invalid="ignore", divide="ignore"):
            estimate = (sxx * sy - sx * sxy + xp * (s * sxy - sx * sy)) / delta
            variance = (sxx - 2.0 * xp * sx + xp * xp * s) / delta
            terms = (yp - estimate) ** 2 / (ep ** 2 + variance)
        good = (s > 0) & (delta > 1e-12 * np.maximum(s * sxx, 1e-300)) & np.isfinite(terms)
        terms = np.where(good, terms, np.nan)
        restored = np.empty_like(terms)
        restored[order_p] = terms
        out.append(restored)
    return out


def collapse_quality(curves) -> float:
    """The Houdayer-Hartmann quality S of rescaled curves (about 1 for a good collapse).

    Parameters
    ----------
    curves : sequence of (x, y, error) tuples of 1-d arrays

    Returns
    -------
    float
        The mean of the terms over the points with an estimate; ``inf`` when no point of
        any curve lies inside the range of another (no overlap, nothing to compare).
    """
    terms = np.concatenate(quality_terms(curves))
    terms = terms[np.isfinite(terms)]
    if terms.size == 0:
        return float("inf")
    return float(np.mean(terms))
