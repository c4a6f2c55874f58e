"""Gaussian-process master curve of a scaling collapse (Harada 2011).

The rescaled points ``(X_i, Y_i)`` with standard errors ``E_i`` are modelled as draws of one
unknown smooth function plus noise, the function having a Gaussian-process prior with zero
mean (after a fixed offset) and the kernel

    k(X, X') = theta0**2 exp(-(X - X')**2 / (2 theta1**2)) + c**2,

so that ``Y ~ N(0, K + diag(E**2 + theta2**2))`` (Harada, Phys. Rev. E 84, 056704 (2011);
kernel and likelihood recalled from memory). ``theta0`` is the amplitude of the master curve,
``theta1`` its length scale along X, ``theta2`` an extra scatter that absorbs what the given
errors and the scaling form do not describe (corrections to scaling), and ``c`` a fixed,
broad constant term: the marginal of a constant mean with a Gaussian prior of width c.

:func:`log_marginal_likelihood` evaluates the likelihood for many parameter sets at once
(one per walker); :func:`predict` gives the
master curve and its pointwise variance on a grid (SciPy's ``cho_factor``).
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["JITTER", "kernel_matrix", "log_marginal_likelihood", "predict"]

#: Relative jitter added to the diagonal (times the kernel's scale) to keep the factorisation
#: numerically positive definite.
JITTER = 1e-10


def kernel_matrix(x1, x2, amplitude, length_scale, constant):
    """The covariance ``theta0**2 exp(-(x1 - x2)**2 / (2 theta1**2)) + c**2``.

    Parameters
    ----------
    x1 : ndarray of shape (W, N)
    x2 : ndarray of shape (W, M)
    amplitude, length_scale : ndarray of shape (W,)
    constant : float

    Returns
    -------
    ndarray of shape (W, N, M)
    """
    d = (x1[:, :, np.newaxis] - x2[:, np.newaxis, :]) / length_scale[:, np.newaxis, np.newaxis]
    out = np.exp(-0.5 * d * d)
    out *= (amplitude ** 2)[:, np.newaxis, np.newaxis]
    out += constant ** 2
    return out


def log_marginal_likelihood(x, y, error, amplitude, length_scale, noise, constant):
    """``log N(y | 0, K + diag(error**2 + noise**2))`` for W parameter sets at once.

    Parameters
    ----------
    x, y, error : ndarray of shape (W, N)
        Rescaled abscissae, ordinates and their standard errors, one row per parameter set.
    amplitude, length_scale, noise : ndarray of shape (W,)
        ``theta0``, ``theta1``, ``theta2``.
    constant : float
        ``c``, the fixed width of the constant-mean term.

    Returns
    -------
    ndarray of shape (W,)
        ``-inf`` for a set whose covariance could not be factorised.

    Notes
    -----
    The kernel matrices are built for all sets at once; each is then factorised by SciPy's
    ``cho_factor`` in a loop. NumPy's stacked ``linalg.cholesky`` was measured 5 to 200
    times slower on the 2-core machine under load (its BLAS threads contend for the cores),
    while the loop over single factorisations (about 0.07 ms for 150 points) stayed steady.
    """
    from scipy.linalg import LinAlgError, cho_factor, solve_triangular

    x = np.asarray(x, dtype=np.float64)
    y = np.asarray(y, dtype=np.float64)
    w, n = x.shape
    k = kernel_matrix(x, x, amplitude, length_scale, constant)
    variance = error ** 2 + (noise ** 2)[:, np.newaxis]
    variance = variance + JITTER * (amplitude ** 2 + constant ** 2)[:, np.newaxis]
    diagonal = np.arange(n)
    k[:, diagonal, diagonal] += variance
    out = np.full(w, -np.inf)
    constant_term = 0.5 * n * math.log(2 * math.pi)
    for i in range(w):
        try:
            factor, _ = cho_factor(k[i], lower=True, overwrite_a=True, check_finite=False)
        except (LinAlgError, ValueError):
            continue
        d = np.diag(factor)
        if not np.all(d > 0):
            continue
        z = solve_triangular(factor, y[i], lower=True, check_finite=False)
        out[i] = -0.5 * float(z @ z) - float(np.sum(np.log(d))) - constant_term
    return out


def predict(x, y, error, grid, amplitude, length_scale, noise, constant):
    """Posterior mean and variance of the master curve (without the noise) on a grid.

    Parameters
    ----------
    x, y, error : ndarray of shape (N,)
    grid : ndarray of shape (G,)
    amplitude, length_scale, noise, constant : float

    Returns
    -------
    mean, variance : ndarray of shape (G,)
    """
    from scipy.linalg import cho_factor, cho_solve

    a, s = np.array([amplitude]), np.array([length_scale])
    k = kernel_matrix(x[np.newaxis], x[np.newaxis], a, s, constant)[0]
    k[np.diag_indices_from(k)] += error ** 2 + noise ** 2 + JITTER * (amplitude ** 2
                                                                      + constant ** 2)
    factor = cho_factor(k, lower=True, check_finite=False)
    cross = kernel_matrix(grid[np.newaxis], x[np.newaxis], a, s, constant)[0]
    mean = cross @ cho_solve(factor, y, check_finite=False)
    solved = cho_solve(factor, cross.T, check_finite=False)
    variance = amplitude ** 2 + constant ** 2 - np.sum(cross * solved.T, axis=1)
    return mean, np.clip(variance, 0.0, None)
