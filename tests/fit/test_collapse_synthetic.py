"""fit_collapse on synthetic families with known exponents: recovery and interval coverage.

Families ``y(x; s) = s^a F(x s^-b)`` with ``F(u) = 1 / (1 + u^2)``, s = 1, 2, 4, 8, twelve
points per curve and Gaussian noise of known size (2 % of y, given to the fit). The 68 % and
95 % intervals must hold the true a and b at their nominal rates over repeated data sets,
within three binomial standard errors ``sqrt(p (1 - p) / N)`` (frequentist coverage of the
posterior intervals; not an external fact, but the check that makes the physics checks
meaningful). The default tier runs 16 data sets with short fixed-length chains (400 steps x
32 walkers, about 300 effective draws; shorter than the 50-tau target, so the convergence
warning is expected and silenced); the slow tier runs 60 with the convergence loop.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest

from coarsen.fit import fit_collapse
from coarsen.fit.collapse_quality import collapse_quality
from coarsen.fit.sampling import ConvergenceWarning

TRUE_A, TRUE_B = 0.5, 0.8
LABELS = (1.0, 2.0, 4.0, 8.0)


def _family(rng, *, a=TRUE_A, b=TRUE_B, labels=LABELS, points=12, relative=0.02, shift=0.0):
    curves = []
    for s in labels:
        u = np.linspace(0.2, 4.0, points) * (1 + 0.05 * rng.uniform(-1, 1, points))
        x = u * s ** b + shift
        y = s ** a / (1 + u ** 2)
        error = relative * y
        curves.append((s, x, y + error * rng.standard_normal(points), error))
    return curves


def _coverage(datasets, seed, steps=None):
    rng = np.random.default_rng(seed)
    hits = {name: np.zeros((datasets, 2), dtype=bool) for name in ("a", "b")}
    settings = {} if steps is None else {"min_steps": steps, "max_steps": steps,
                                         "block": steps}
    for index in range(datasets):
        with warnings.catch_warnings():
            if steps is not None:
                warnings.simplefilter("ignore", ConvergenceWarning)
            fit = fit_collapse(_family(rng), seed=500 + index, **settings)
        for name, truth in (("a", TRUE_A), ("b", TRUE_B)):
            s = fit.exponents[name]
            hits[name][index] = [s["hdi68"][0] <= truth <= s["hdi68"][1],
                                 s["hdi95"][0] <= truth <= s["hdi95"][1]]
    return {name: h.mean(axis=0) for name, h in hits.items()}


def _assert_nominal(coverage, datasets):
    for name, (c68, c95) in coverage.items():
        for observed, nominal in ((c68, 0.68), (c95, 0.95)):
            se = math.sqrt(nominal * (1 - nominal) / datasets)
            assert abs(observed - nominal) <= 3 * se + 1e-12, (name, nominal, observed, coverage)


def test_intervals_cover_the_true_exponents():
    """16 data sets, about 30 s."""
    datasets = 16
    coverage = _coverage(datasets, seed=11, steps=400)
    _assert_nominal(coverage, datasets)


@pytest.mark.slow
def test_intervals_cover_the_true_exponents_converged_chains():
    """60 data sets with the default convergence loop, about 5 minutes."""
    datasets = 60
    coverage = _coverage(datasets, seed=12)
    _assert_nominal(coverage, datasets)


def test_converged_fit_recovers_exponents_and_master_curve():
    rng = np.random.default_rng(3)
    fit = fit_collapse(_family(rng))
    assert fit.converged
    for name, truth in (("a", TRUE_A), ("b", TRUE_B)):
        s = fit.exponents[name]
        assert s["hdi95"][0] <= truth <= s["hdi95"][1], (name, s)
        assert s["hdi95"][0] <= s["hdi68"][0] <= s["median"] <= s["hdi68"][1] <= s["hdi95"][1]
    # rescaled with s_ref (geometric mean of the labels): X = x (s/s_ref)^-b and
    # Y = y (s/s_ref)^-a, so the true master curve is s_ref^a F(X s_ref^-b)
    m = fit.master
    assert np.all(m.low95 <= m.low68) and np.all(m.low68 <= m.median)
    assert np.all(m.median <= m.high68) and np.all(m.high68 <= m.high95)
    reference = fit.form.reference
    u = m.x * reference ** -TRUE_B
    truth = reference ** TRUE_A / (1 + u ** 2)
    inside = (u > 0.3) & (u < 3.5)
    # the true curve lies inside the 95 % band over most of the range (pointwise band)
    assert np.mean((truth[inside] >= m.low95[inside]) & (truth[inside] <= m.high95[inside])) > 0.8
    # Houdayer-Hartmann S is about 1 for curves that collapse within their errors
    assert 0.5 < fit.quality < 2.0


def test_quality_is_about_one_at_the_truth_and_grows_away_from_it():
    """Houdayer & Hartmann (2004): S ~ 1 for a collapse consistent within errors."""
    rng = np.random.default_rng(5)
    curves = _family(rng, points=30)

    def rescaled(a, b):
        return [(x * s ** -b, y * s ** -a, e * s ** -a) for s, x, y, e in curves]

    at_truth = collapse_quality(rescaled(TRUE_A, TRUE_B))
    assert 0.6 < at_truth < 1.6
    assert collapse_quality(rescaled(TRUE_A + 0.1, TRUE_B)) > 3 * at_truth
    assert collapse_quality(rescaled(TRUE_A, TRUE_B + 0.1)) > 3 * at_truth


def test_quick_mode_finds_the_exponents():
    rng = np.random.default_rng(7)
    fit = fit_collapse(_family(rng), quick=True)
    assert fit.quick and fit.posterior is None
    for name, truth in (("a", TRUE_A), ("b", TRUE_B)):
        s = fit.exponents[name]
        assert abs(s["median"] - truth) < 0.05, (name, s)
        assert s["hdi95"][0] < s["hdi68"][0] < s["median"] < s["hdi68"][1] < s["hdi95"][1]


def test_family_with_a_shift_and_a_fixed_exponent():
    """y(t; p) = p^a F((t - t_c) / p^b) with t_c = 5 and a fixed at its true value."""
    rng = np.random.default_rng(9)
    curves = _family(rng, shift=5.0, labels=(1.0, 2.0, 4.0, 8.0))
    fit = fit_collapse(curves, form="family", shift=True, fixed={"a": TRUE_A},
                       bounds={"b": (0.0, 2.0)}, max_steps=10000)
    assert set(fit.exponents) == {"a", "b", "t_c"}
    assert fit.exponents["a"]["fixed"]
    b = fit.exponents["b"]
    t_c = fit.exponents["t_c"]
    assert b["hdi95"][0] <= TRUE_B <= b["hdi95"][1], b
    assert t_c["hdi95"][0] <= 5.0 <= t_c["hdi95"][1], t_c


def test_same_seed_same_result():
    curves = _family(np.random.default_rng(2))
    settings = dict(min_steps=300, max_steps=300, block=300)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        first = fit_collapse(curves, seed=4, **settings)
        second = fit_collapse(curves, seed=4, **settings)
    assert first.exponents == second.exponents
    np.testing.assert_array_equal(first.posterior.samples, second.posterior.samples)
