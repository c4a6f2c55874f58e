"""The sampler run, HDIs, WAIC, the likelihood and the replica covariance."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from coarsen.fit.likelihood import LogLengthLikelihood, replica_covariance
from coarsen.fit.sampling import (
    ConvergenceWarning,
    compare_waic,
    hdi,
    sample_posterior,
    summarize,
    waic,
)


def _quantile_error(distribution, q, size):
    """Standard error of a sample quantile: sqrt(q (1 - q) / N) / pdf(x_q)."""
    return math.sqrt(q * (1 - q) / size) / distribution.pdf(distribution.ppf(q))


def test_hdi_of_a_normal_is_the_central_interval():
    """Standard normal: the 68 % / 95 % HDIs are +-Phi^-1(0.84) and +-Phi^-1(0.975)
    (symmetric unimodal density), within 5 standard errors of the sample quantile."""
    size = 200_000
    draws = np.random.default_rng(1).standard_normal(size)
    for probability in (0.68, 0.95):
        q = 0.5 + probability / 2
        expected = stats.norm.ppf(q)
        low, high = hdi(draws, probability)
        tolerance = 5 * _quantile_error(stats.norm, q, size)
        assert low == pytest.approx(-expected, abs=tolerance)
        assert high == pytest.approx(expected, abs=tolerance)


def test_hdi_of_an_exponential_starts_at_zero():
    """Exponential(1): the shortest interval of mass p is [0, -ln(1 - p)], not the central
    one (density decreasing from 0)."""
    size = 200_000
    draws = np.random.default_rng(2).exponential(size=size)
    low, high = hdi(draws, 0.68)
    assert low < 1e-3
    assert high == pytest.approx(-math.log(0.32),
                                 abs=5 * _quantile_error(stats.expon, 0.68, size))
    equal_tailed = np.quantile(draws, [0.16, 0.84])
    assert high - low < equal_tailed[1] - equal_tailed[0]


def test_hdi_and_summary_reject_bad_input():
    with pytest.raises(ValueError, match="probability"):
        hdi([1.0, 2.0], 1.2)
    with pytest.raises(ValueError, match="samples"):
        hdi([1.0, np.nan], 0.5)
    summary = summarize(np.arange(101.0))
    assert summary["median"] == 50.0
    assert summary["hdi95"][1] - summary["hdi95"][0] == pytest.approx(95, abs=1)


def _gaussian_log_probability(mean, sd):
    def log_probability(theta):
        return -0.5 * (((theta - mean) / sd) ** 2).sum(axis=1)
    return log_probability


def test_sampler_recovers_a_gaussian():
    """A 2-d Gaussian: the mean within 5 standard errors (ESS from the autocorrelation
    time) and the run converged, at least 50 autocorrelation times long."""
    mean, sd = np.array([0.3, -2.0]), np.array([0.05, 1.5])
    result = sample_posterior(_gaussian_log_probability(mean, sd), mean + 0.1 * sd, seed=5)
    assert result.converged
    assert result.steps >= 50 * result.autocorr_time.max()
    error = sd / np.sqrt(result.effective_sample_size)
    assert np.all(np.abs(result.samples.mean(axis=0) - mean) < 5 * error)
    assert 0.2 < result.acceptance_fraction < 0.9


@pytest.mark.filterwarnings("ignore::coarsen.fit.sampling.ConvergenceWarning")
def test_sampler_is_reproducible_for_a_seed():
    log_probability = _gaussian_log_probability(np.zeros(2), np.ones(2))
    short = {"min_steps": 100, "max_steps": 100, "block": 100}
    state = np.random.get_state()[1].copy()
    first = sample_posterior(log_probability, np.full(2, 0.1), seed=5, **short)
    again = sample_posterior(log_probability, np.full(2, 0.1), seed=5, **short)
    other = sample_posterior(log_probability, np.full(2, 0.1), seed=6, **short)
    assert np.array_equal(first.samples, again.samples)
    assert not np.array_equal(first.samples, other.samples)
    assert np.array_equal(np.random.get_state()[1], state)


def test_short_run_warns_and_reports_not_converged():
    log_probability = _gaussian_log_probability(np.zeros(2), np.ones(2))
    with pytest.warns(ConvergenceWarning, match="not converged") as record:
        result = sample_posterior(log_probability, np.full(2, 0.1), seed=3, min_steps=100,
                                  max_steps=200, block=100)
    assert not result.converged
    assert record[0].message.steps == 200
    assert record[0].message.tau.shape == (2,)


def test_start_outside_support_is_an_error():
    def log_probability(theta):
        return np.where(theta[:, 0] > 0, 0.0, -np.inf)
    with pytest.raises(ValueError, match="start"):
        sample_posterior(log_probability, np.array([-1.0]))


def test_waic_of_a_point_posterior_is_the_log_likelihood():
    """With every draw equal, lppd = sum log p and the penalty is zero (Watanabe 2010)."""
    pointwise = np.tile(np.array([-1.0, -2.0, -0.5]), (50, 1))
    result = waic(pointwise)
    assert result["elpd"] == pytest.approx(-3.5)
    assert result["p_waic"] == pytest.approx(0.0)
    assert result["waic"] == pytest.approx(7.0)


def test_waic_penalty_is_the_posterior_variance_of_the_log_likelihood():
    rng = np.random.default_rng(4)
    pointwise = rng.normal(-1.0, 0.3, size=(4000, 5))
    result = waic(pointwise)
    assert result["p_waic"] == pytest.approx(pointwise.var(axis=0, ddof=1).sum())
    table = compare_waic({"a": result, "b": waic(pointwise - 1.0)})
    assert list(table) == ["a", "b"]
    assert table["b"]["delta_elpd"] == pytest.approx(-5.0)
    assert table["a"]["weight"] + table["b"]["weight"] == pytest.approx(1.0)


def test_gaussian_likelihood_matches_scipy_and_the_conditional_densities():
    """The joint density equals scipy's multivariate normal; each pointwise term equals the
    conditional normal density of y_i given the others (Schur complement)."""
    rng = np.random.default_rng(5)
    size = 6
    root = rng.normal(size=(size, size))
    covariance = root @ root.T / size + 0.1 * np.eye(size)
    y = rng.normal(size=size)
    model = rng.normal(size=(3, size))
    likelihood = LogLengthLikelihood(y, covariance)
    expected = [stats.multivariate_normal(m, covariance).logpdf(y) for m in model]
    assert np.allclose(likelihood.joint(model), expected, rtol=1e-10)
    pointwise = likelihood.pointwise(model)
    for i in range(size):
        rest = [j for j in range(size) if j != i]
        gain = covariance[i, rest] @ np.linalg.inv(covariance[np.ix_(rest, rest)])
        variance = covariance[i, i] - gain @ covariance[rest, i]
        for w in range(3):
            mean = model[w, i] + gain @ (y[rest] - model[w, rest])
            assert pointwise[w, i] == pytest.approx(
                stats.norm(mean, math.sqrt(variance)).logpdf(y[i]), rel=1e-9)
    scatter = np.array([0.0, 0.2, 0.5])
    with_scatter = likelihood.joint(model, scatter)
    for w in range(3):
        inflated = covariance + scatter[w] ** 2 * np.eye(size)
        assert with_scatter[w] == pytest.approx(
            stats.multivariate_normal(model[w], inflated).logpdf(y), rel=1e-10)


def test_estimated_covariance_likelihood_is_the_t_form():
    """With R replicas: -R/2 ln(1 + chi2/(R - 1)) - 1/2 ln det C (Sellentin & Heavens 2016)."""
    covariance = np.diag([0.04, 0.09])
    y = np.array([0.1, -0.2])
    model = np.zeros((1, 2))
    chi2 = 0.1 ** 2 / 0.04 + 0.2 ** 2 / 0.09
    expected = -8 * math.log1p(chi2 / 15) - 0.5 * math.log(0.04 * 0.09 * (2 * math.pi) ** 2)
    assert LogLengthLikelihood(y, covariance, replicas=16).joint(model)[0] == \
        pytest.approx(expected)


def test_replica_covariance_converges_and_shrinks():
    """Many replicas: the estimate approaches the true covariance / R and the shrinkage
    vanishes; fewer replicas than times: shrinkage keeps the matrix positive definite."""
    rng = np.random.default_rng(6)
    times = 8
    index = np.arange(times)
    true = 0.01 * (np.minimum.outer(index, index) + 1)
    chol = np.linalg.cholesky(true)
    many = (chol @ rng.standard_normal((times, 20000))).T
    estimate = replica_covariance(many)
    assert estimate.shrinkage < 0.02
    assert np.allclose(estimate.covariance * 20000, true, atol=5 * 0.01 * np.sqrt(2 / 20000) * 8)
    few = (chol @ rng.standard_normal((times, 4))).T
    small = replica_covariance(few)
    assert 0 < small.shrinkage <= 1
    assert np.linalg.eigvalsh(small.covariance).min() > 0


def test_replica_covariance_missing_values():
    rng = np.random.default_rng(7)
    values = rng.normal(size=(6, 5))
    values[0, 2] = np.nan
    estimate = replica_covariance(values)
    assert estimate.replicas == 5 and estimate.keep_times.all()
    assert any("replica" in note for note in estimate.notes)
    values[1:4, 3] = np.nan
    estimate = replica_covariance(values)
    assert estimate.replicas == 6 and not estimate.keep_times[[2, 3]].any()
    values[:, 4] = np.nan
    values[0, 4] = 1.0
    assert not replica_covariance(values).keep_times[4]


def test_t_form_pointwise_terms_are_the_conditionals_of_a_multivariate_t():
    """R replicas, d times: the t form is a multivariate t with nu = R - d and scale
    C (R - 1) / nu, so each pointwise term is the log of the conditional density of y_i,
    checked here by numerically normalising the joint density along y_i."""
    from scipy.integrate import quad

    rng = np.random.default_rng(8)
    size, replicas = 4, 10
    root = rng.normal(size=(size, size))
    covariance = root @ root.T / size + 0.2 * np.eye(size)
    y = rng.normal(size=size)
    model = np.zeros((1, size))
    likelihood = LogLengthLikelihood(y, covariance, replicas=replicas)
    pointwise = likelihood.pointwise(model)[0]
    for i in range(size):
        def joint_at(value):
            moved = y.copy()
            moved[i] = value
            return math.exp(LogLengthLikelihood(moved, covariance, replicas).joint(model)[0])
        norm = quad(joint_at, -np.inf, np.inf, epsabs=0, epsrel=1e-10)[0]
        assert pointwise[i] == pytest.approx(math.log(joint_at(y[i]) / norm), abs=1e-7)
