"""Posterior sampling with emcee, convergence checks and posterior summaries.

Shared by the growth-law fit and, later, the scaling-collapse fit. The sampler is emcee's
affine-invariant ensemble (Goodman & Weare 2010; Foreman-Mackey et al. 2013). A run grows in
blocks until the chain is at least ``tau_factor`` (default 50) integrated autocorrelation
times long and the autocorrelation estimate has settled, or until a step cap is reached; an
unconverged run warns (:class:`ConvergenceWarning`) and says so in its result instead of
raising. Summaries are the median and the highest-density intervals (HDI), and models are
compared with WAIC from pointwise log-likelihoods (Watanabe 2010).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from typing import Callable

import numpy as np

__all__ = [
    "DEFAULT_SEED",
    "ConvergenceWarning",
    "PosteriorSample",
    "compare_waic",
    "hdi",
    "sample_posterior",
    "summarize",
    "waic",
]

#: Seed of the sampler when none is given: results are reproducible by default.
DEFAULT_SEED = 20261204


class ConvergenceWarning(UserWarning):
    """The chain reached its step cap before it was long enough for its autocorrelation.

    Attributes
    ----------
    tau : ndarray
        The last integrated autocorrelation time estimate, per parameter (steps).
    steps : int
        Steps taken.
    """

    def __init__(self, message: str, *, tau=None, steps: int = 0):
        super().__init__(message)
        self.tau = None if tau is None else np.asarray(tau)
        self.steps = steps


@dataclass(frozen=True)
class PosteriorSample:
    """The outcome of one sampler run.

    Attributes
    ----------
    samples : ndarray of shape (n_samples, n_parameters)
        Posterior draws after burn-in, thinned, walkers flattened.
    log_probability : ndarray of shape (n_samples,)
        Log posterior (up to a constant) of each draw.
    acceptance_fraction : float
        Mean acceptance fraction over the walkers.
    autocorr_time : ndarray of shape (n_parameters,)
        Integrated autocorrelation time per parameter, in steps.
    steps : int
        Steps per walker, in total.
    walkers : int
    burn_in, thin : int
        Steps dropped at the start; thinning applied to what is left.
    converged : bool
        Whether ``steps >= tau_factor * max(autocorr_time)`` and the estimate had settled.
    effective_sample_size : ndarray of shape (n_parameters,)
        ``(steps - burn_in) * walkers / autocorr_time``.
    seed : int
    """

    samples: np.ndarray
    log_probability: np.ndarray
    acceptance_fraction: float
    autocorr_time: np.ndarray
    steps: int
    walkers: int
    burn_in: int
    thin: int
    converged: bool
    effective_sample_size: np.ndarray
    seed: int


def _autocorr_time(chain: np.ndarray) -> np.ndarray:
    """emcee's estimate (Sokal's automatic window, c = 5) without its length check (tol=0)."""
    from emcee.autocorr import integrated_time

    return np.atleast_1d(integrated_time(chain, c=5, tol=0, quiet=True))


def sample_posterior(log_probability: Callable[[np.ndarray], np.ndarray], start: np.ndarray, *,
                     scale: np.ndarray | None = None, seed: int = DEFAULT_SEED,
                     walkers: int = 32, block: int = 500, min_steps: int = 1000,
                     max_steps: int = 40000, tau_factor: float = 50.0,
                     settle: float = 0.05, max_samples: int = 8000) -> PosteriorSample:
    """Sample a posterior with emcee until the chain is long enough for its autocorrelation.

    Parameters
    ----------
    log_probability : callable
        Vectorised log posterior: takes an array of shape (W, n_parameters) and returns an
        array of shape (W,), ``-inf`` outside the prior's support.
    start : ndarray of shape (n_parameters,)
        Where to start the walkers (for example a least-squares solution); must have a
        finite log posterior.
    scale : ndarray of shape (n_parameters,), optional
        Spread of the initial ball around ``start`` (default: 1e-3 of ``|start|``, at least
        1e-4). Draws outside the support are redrawn, shrinking the ball.
    seed : int, default: DEFAULT_SEED
        Seeds the initial ball and emcee's own ``RandomState``: equal seeds give equal chains.
    walkers : int, default: 32
    block : int, default: 500
        Steps between convergence checks.
    min_steps, max_steps : int, default: 1000, 40000
        The run takes at least ``min_steps`` and at most ``max_steps`` steps per walker.
    tau_factor : float, default: 50
        Converged when the chain is at least this many autocorrelation times long ...
    settle : float, default: 0.05
        ... and the largest autocorrelation time changed by less than this fraction since
        the previous check.
    max_samples : int, default: 8000
        Thin further (beyond ``tau / 2``) so that at most this many draws are kept.

    Returns
    -------
    PosteriorSample

    Warns
    -----
    ConvergenceWarning
        When ``max_steps`` was reached first; the result then has ``converged = False``.

    Notes
    -----
    The burn-in is ``2 * max(tau)`` steps and the thinning ``max(1, tau_min / 2)``. The
    autocorrelation time is emcee's estimator with the automatic window (c = 5) and its
    length check disabled (``tol=0``), because this function makes that check itself.
    emcee copies NumPy's global random state when a sampler is built; its state is replaced
    at once by a ``RandomState`` seeded from ``seed``, and the global state is left alone.
    """
    import emcee

    start = np.asarray(start, dtype=np.float64)
    ndim = start.size
    walkers = max(int(walkers), 2 * ndim + 2)
    rng = np.random.default_rng(seed)
    if scale is None:
        scale = np.maximum(1e-3 * np.abs(start), 1e-4)
    scale = np.asarray(scale, dtype=np.float64)
    if not np.isfinite(log_probability(start[np.newaxis])[0]):
        raise ValueError(f"start: {start.tolist()!r} is outside the prior's support")
    positions = start + scale * rng.standard_normal((walkers, ndim))
    for _ in range(60):
        bad = ~np.isfinite(log_probability(positions))
        if not bad.any():
            break
        scale = scale / 2
        positions[bad] = start + scale * rng.standard_normal((bad.sum(), ndim))
    else:
        positions[~np.isfinite(log_probability(positions))] = start

    sampler = emcee.EnsembleSampler(walkers, ndim, log_probability, vectorize=True)
    sampler.random_state = np.random.RandomState(int(rng.integers(2**32))).get_state()
    state = positions
    previous = None
    converged = False
    tau = np.full(ndim, np.nan)
    while sampler.iteration < max_steps:
        steps = min(block, max_steps - sampler.iteration)
        state = sampler.run_mcmc(state, steps, progress=False)
        if sampler.iteration < min_steps:
            continue
        tau = _autocorr_time(sampler.get_chain())
        largest = float(np.max(tau))
        settled = previous is not None and abs(largest - previous) <= settle * largest
        if np.all(np.isfinite(tau)) and sampler.iteration >= tau_factor * largest and settled:
            converged = True
            break
        previous = largest
    total = sampler.iteration
    largest = float(np.max(tau)) if np.all(np.isfinite(tau)) else float(total)
    burn_in = min(int(math.ceil(2 * largest)), total // 2)
    thin = max(1, int(np.min(tau) / 2)) if np.all(np.isfinite(tau)) else 1
    kept = (total - burn_in) // thin * walkers
    if kept > max_samples:
        thin = int(math.ceil(thin * kept / max_samples))
    samples = sampler.get_chain(discard=burn_in, thin=thin, flat=True)
    log_prob = sampler.get_log_prob(discard=burn_in, thin=thin, flat=True)
    ess = (total - burn_in) * walkers / tau
    if not converged:
        message = (f"the chain is not converged after {total} steps: it should be at least "
                   f"{tau_factor:g} autocorrelation times long (tau = {largest:.1f} steps) "
                   f"and tau should have settled; raise max_steps or fix parameters")
        warnings.warn(ConvergenceWarning(message, tau=tau, steps=total), stacklevel=3)
    return PosteriorSample(samples=samples, log_probability=log_prob,
                           acceptance_fraction=float(np.mean(sampler.acceptance_fraction)),
                           autocorr_time=tau, steps=int(total), walkers=walkers,
                           burn_in=burn_in, thin=thin, converged=converged,
                           effective_sample_size=ess, seed=int(seed))


def hdi(samples, probability: float) -> tuple[float, float]:
    """Shortest interval holding ``probability`` of the draws (highest-density interval).

    Hand-written on the sorted draws: ArviZ, which has one, is not a dependency (on Python
    3.11 pip resolves it to a legacy release). For a unimodal posterior the shortest interval
    is the highest-density interval.

    Parameters
    ----------
    samples : array_like of shape (n,)
    probability : float
        In (0, 1), for example 0.68 or 0.95.

    Returns
    -------
    (low, high) : tuple of float
    """
    values = np.sort(np.asarray(samples, dtype=np.float64).ravel())
    if not 0 < probability < 1:
        raise ValueError(f"probability: {probability!r} must lie in (0, 1)")
    if values.size == 0 or not np.all(np.isfinite(values)):
        raise ValueError("samples: need at least one draw, all finite")
    inside = int(math.ceil(probability * values.size))
    if inside >= values.size:
        return float(values[0]), float(values[-1])
    widths = values[inside - 1:] - values[:values.size - inside + 1]
    low = int(np.argmin(widths))
    return float(values[low]), float(values[low + inside - 1])


def summarize(samples) -> dict:
    """Median and 68 % / 95 % highest-density intervals of one parameter's draws.

    Returns
    -------
    dict
        ``{"median": x, "hdi68": [lo, hi], "hdi95": [lo, hi]}`` with plain floats.
    """
    values = np.asarray(samples, dtype=np.float64).ravel()
    return {"median": float(np.median(values)), "hdi68": list(hdi(values, 0.68)),
            "hdi95": list(hdi(values, 0.95))}


def waic(pointwise_log_likelihood) -> dict:
    """Widely applicable information criterion from pointwise log-likelihoods.

    Parameters
    ----------
    pointwise_log_likelihood : ndarray of shape (n_samples, n_points)
        ``log p(y_i | theta_s)`` for each posterior draw s and data point i.

    Returns
    -------
    dict
        ``elpd`` (expected log pointwise predictive density, higher is better), ``p_waic``
        (effective number of parameters), ``waic`` (``-2 elpd``), ``se`` (standard error of
        ``elpd``) and ``pointwise`` (the per-point elpd, ndarray of shape (n_points,)).

    Notes
    -----
    ``elpd_i = log mean_s p(y_i | theta_s) - var_s log p(y_i | theta_s)`` (Watanabe 2010,
    J. Mach. Learn. Res. 11, 3571); the standard error is ``sqrt(n var_i elpd_i)`` as in
    Vehtari, Gelman & Gabry, Stat. Comput. 27, 1413 (2017) (recalled from memory).
    """
    from scipy.special import logsumexp

    values = np.asarray(pointwise_log_likelihood, dtype=np.float64)
    if values.ndim != 2 or values.shape[0] < 2:
        raise ValueError(f"pointwise_log_likelihood: expected shape (n_samples >= 2, n_points), "
                         f"got {values.shape}")
    lppd = logsumexp(values, axis=0) - math.log(values.shape[0])
    penalty = values.var(axis=0, ddof=1)
    pointwise = lppd - penalty
    n = pointwise.size
    se = float(math.sqrt(n * pointwise.var(ddof=1))) if n > 1 else float("nan")
    elpd = float(pointwise.sum())
    return {"elpd": elpd, "p_waic": float(penalty.sum()), "waic": -2.0 * elpd, "se": se,
            "pointwise": pointwise}


def compare_waic(results: dict[str, dict]) -> dict[str, dict]:
    """Rank models fitted to the same points by WAIC.

    Parameters
    ----------
    results : dict of str to dict
        Model name to the output of :func:`waic` (same data points for every model).

    Returns
    -------
    dict of str to dict
        Per model, best first: ``elpd``, ``se``, ``p_waic``, ``waic``, ``delta_elpd``
        (``elpd - elpd_best``, <= 0), ``delta_se`` (standard error of that difference, from
        the pointwise differences) and ``weight`` (``exp(elpd)`` normalised over the models,
        the Akaike-type weight on the elpd scale).
    """
    if not results:
        raise ValueError("results: need at least one model")
    order = sorted(results, key=lambda name: -results[name]["elpd"])
    best = results[order[0]]
    elpds = np.array([results[name]["elpd"] for name in order])
    weights = np.exp(elpds - elpds.max())
    weights /= weights.sum()
    table = {}
    for name, weight in zip(order, weights):
        entry = results[name]
        difference = entry["pointwise"] - best["pointwise"]
        n = difference.size
        delta_se = float(math.sqrt(n * difference.var(ddof=1))) if n > 1 else float("nan")
        table[name] = {"elpd": entry["elpd"], "se": entry["se"], "p_waic": entry["p_waic"],
                       "waic": entry["waic"], "delta_elpd": float(entry["elpd"] - best["elpd"]),
                       "delta_se": delta_se, "weight": float(weight)}
    return table
