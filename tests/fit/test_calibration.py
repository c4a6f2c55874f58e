"""Simulation-based calibration of the growth fit (Talts et al., arXiv:1804.06788 (2018)).

Parameters are drawn from the very prior the fit uses, data are drawn from the model with
known noise, and the fit's 68 % and 95 % highest-density intervals must cover the true
values at their nominal rates, within three binomial standard errors
``sqrt(p (1 - p) / N)``. Two noise kinds:

* independent: per-point Gaussian errors in ln L, given to the fit (a lab table);
* correlated: R replicas, each a random walk in ln L along the measurement times plus white
  noise (a replica that coarsens fast stays ahead), so that the replica means are correlated
  between times; the fit estimates the covariance from the replicas
  (:func:`coarsen.fit.likelihood.replica_covariance`), as for a simulation dataset.

The default tier uses short fixed-length chains (400 steps x 32 walkers, about 300
effective draws per fit; they are shorter than the 50-tau convergence target, so the
convergence warning is expected and silenced); the slow tier runs the default convergence
loop on more datasets and on the offset model with an extra-scatter parameter.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest

from coarsen.fit.growth import fit_model
from coarsen.fit.likelihood import replica_covariance
from coarsen.fit.models import Prior
from coarsen.fit.sampling import ConvergenceWarning

POWER_PRIORS = {"n": Prior("uniform", 0.2, 0.8), "A": Prior("log-uniform", 0.5, 5.0)}
OFFSET_PRIORS = dict(POWER_PRIORS, L0=Prior("uniform", -1.0, 1.0),
                     sigma_extra=Prior("uniform", 0.0, 0.1))
TIMES = np.geomspace(10.0, 1000.0, 8)


def _draw_truth(rng, priors):
    return {name: float(prior.draw(rng)) for name, prior in priors.items()}


def _log_curve(model, truth, time):
    if model == "power":
        return math.log(truth["A"]) + truth["n"] * np.log(time)
    return np.log(truth["L0"] + truth["A"] * time ** truth["n"])


def _dataset(rng, model, truth, noise, replicas):
    """(y, covariance, replicas or None) for one synthetic data set."""
    curve = _log_curve(model, truth, TIMES)
    if noise == "independent":
        sigma = rng.uniform(0.01, 0.05, TIMES.size)
        scatter = truth.get("sigma_extra", 0.0)
        total = np.sqrt(sigma ** 2 + scatter ** 2)
        y = curve + total * rng.standard_normal(TIMES.size)
        return y, np.diag(sigma ** 2), None
    walk = np.cumsum(0.03 * rng.standard_normal((replicas, TIMES.size)), axis=1)
    logs = curve + walk + 0.02 * rng.standard_normal((replicas, TIMES.size))
    estimate = replica_covariance(logs)
    return estimate.mean, estimate.covariance, estimate.replicas


def _coverage(model, priors, noise, datasets, seed, *, steps=None, replicas=16):
    """Fraction of data sets whose 68 % / 95 % HDIs hold the truth, per free parameter."""
    rng = np.random.default_rng(seed)
    hits = {name: np.zeros((datasets, 2), dtype=bool) for name in priors}
    extra = "sigma_extra" in priors
    settings = {} if steps is None else {"min_steps": steps, "max_steps": steps, "block": steps}
    for index in range(datasets):
        truth = _draw_truth(rng, priors)
        while model == "offset" and truth["L0"] + truth["A"] * TIMES[0] ** truth["n"] <= 0:
            truth = _draw_truth(rng, priors)
        y, covariance, count = _dataset(rng, model, truth, noise, replicas)
        with warnings.catch_warnings():
            if steps is not None:
                warnings.simplefilter("ignore", ConvergenceWarning)
            fit = fit_model(model, TIMES, y, covariance, replicas=count, priors=priors,
                            extra_scatter=extra, seed=1000 + index, **settings)
        for name in priors:
            summary = fit.summaries[name]
            for column, key in enumerate(("hdi68", "hdi95")):
                low, high = summary[key]
                hits[name][index, column] = low <= truth[name] <= high
    return {name: values.mean(axis=0) for name, values in hits.items()}


def _assert_nominal(coverage, datasets):
    for name, (c68, c95) in coverage.items():
        for observed, nominal in ((c68, 0.68), (c95, 0.95)):
            binomial = math.sqrt(nominal * (1 - nominal) / datasets)
            assert abs(observed - nominal) <= 3 * binomial, (name, nominal, observed, coverage)


@pytest.mark.parametrize("noise, seed", [("independent", 7), ("correlated", 8)])
def test_power_law_intervals_cover_at_nominal_rates(noise, seed):
    """100 data sets per noise kind (200 in all), power law, short chains: about 12 s each."""
    datasets = 100
    coverage = _coverage("power", POWER_PRIORS, noise, datasets, seed, steps=400)
    _assert_nominal(coverage, datasets)


@pytest.mark.slow
@pytest.mark.parametrize("model, priors, noise, seed", [
    ("power", POWER_PRIORS, "independent", 17),
    ("power", POWER_PRIORS, "correlated", 18),
    ("offset", OFFSET_PRIORS, "independent", 19),
])
def test_intervals_cover_at_nominal_rates_with_converged_chains(model, priors, noise, seed):
    """300 data sets per case with the default convergence loop (several minutes each)."""
    datasets = 300
    coverage = _coverage(model, priors, noise, datasets, seed)
    _assert_nominal(coverage, datasets)
