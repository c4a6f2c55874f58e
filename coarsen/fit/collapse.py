"""Scaling collapse with posteriors: exponents, a master curve and its band, the quality.

:func:`fit_collapse` is the whole job. It reads the curves (:mod:`coarsen.fit.
collapse_inputs`), applies the windows and thins them, rescales them with a scaling form
(:mod:`coarsen.fit.collapse_forms`) and samples the exponents together with the
hyperparameters of a Gaussian-process master curve (Harada, Phys. Rev. E 84, 056704 (2011);
:mod:`coarsen.fit.gaussian_process`) with emcee and the convergence rules of the growth fit
(:func:`coarsen.fit.sampling.sample_posterior`). The Houdayer-Hartmann quality
(:mod:`coarsen.fit.collapse_quality`) is minimised first for the starting point; with
``quick=True`` that minimum, with profile intervals, is the whole result.

Sampled parameters: the free exponents (uniform priors), then ``ln theta0``, ``ln theta1``
and (with ``extra_scatter``) ``ln theta2`` of the kernel, log-uniform on
``theta0 in [1e-3, 1e2] sY``, ``theta1 in [X span / 100, 10 X span]``, ``theta2 in
[1e-4, 1] sY``, where sY and the X span are the spread of the rescaled data at the starting
point (the priors scale with the data, so that one set of bounds serves C(r), ln S and
lengths alike). The constant-mean width is ``c = 3 sY`` around the mean of the rescaled Y at
the start.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import replace

import numpy as np

from coarsen.fit.collapse_forms import FORMS, ScalingForm, make_form
from coarsen.fit.collapse_inputs import DEFAULT_POINTS, CurveFamily, load_family, select_points
from coarsen.fit.collapse_quality import quality_terms
from coarsen.fit.collapse_result import CollapseFit, MasterCurve
from coarsen.fit.gaussian_process import log_marginal_likelihood, predict
from coarsen.fit.sampling import DEFAULT_SEED, sample_posterior, summarize

__all__ = ["BAND_DRAWS", "GRID_POINTS", "MIN_OVERLAP", "WAVE_NUMBERS", "fit_collapse",
           "tail_exponent"]

#: Points of the master curve's grid.
GRID_POINTS = 120
#: The starting-point search accepts exponents for which at least this fraction of the points
#: have an estimate from the other curves (common practice, no source: otherwise the quality
#: is minimised by pushing the curves apart until few points overlap).
MIN_OVERLAP = 1.0 / 3.0
#: Wave numbers of a structure-factor collapse: ``lattice`` uses ``2 sin(k / 2)`` of the
#: radial shell centre k (the lattice Fourier factor of a step; on a lattice plain k bends
#: the Porod tail), ``plain`` the shell centre itself.
WAVE_NUMBERS = ("lattice", "plain")
#: Posterior draws used for the master curve's band.
BAND_DRAWS = 200


class _Problem:
    """The fitted points, the form and the hyperparameter priors, with the log posterior."""

    def __init__(self, form: ScalingForm, family: CurveFamily, extra_scatter: bool):
        self.form = form
        self.family = family
        self.extra_scatter = extra_scatter
        label, x, y, e, curve = family.flat()
        if form.name == "measured":
            label = family.length[curve]
        self.label, self.x, self.y, self.error, self.curve = label, x, y, e, curve
        self.n_exponents = len(form.free)
        self.hyper_names = ("amplitude", "length_scale") + (("noise",) if extra_scatter else ())
        self.offset = 0.0
        self.constant = 1.0
        self.hyper_bounds = None

    # rescaling ---------------------------------------------------------------------------
    def rescaled(self, exponent_columns: np.ndarray):
        columns = np.atleast_2d(exponent_columns)
        values = self.form.values(columns)
        return self.form.rescale(values, self.label, self.x, self.y, self.error,
                                 count=columns.shape[0])

    def curves_at(self, exponent_columns) -> list:
        big_x, big_y, big_e, _ = self.rescaled(np.atleast_2d(exponent_columns))
        return [(big_x[0, self.curve == i], big_y[0, self.curve == i],
                 big_e[0, self.curve == i]) for i in range(len(self.family))]

    def quality(self, exponent_columns, *, require_overlap: bool = False) -> float:
        curves = self.curves_at(exponent_columns)
        if any(not np.all(np.isfinite(c[0])) for c in curves):
            return float("inf")
        terms = np.concatenate(quality_terms(curves))
        finite = np.isfinite(terms)
        if require_overlap and finite.mean() < MIN_OVERLAP:
            return float("inf")
        return float(np.mean(terms[finite])) if finite.any() else float("inf")

    def set_hyper_priors(self, exponent_columns):
        big_x, big_y, _, _ = self.rescaled(np.atleast_2d(exponent_columns))
        spread = float(np.std(big_y[0]))
        if not spread > 0:
            spread = float(np.mean(np.abs(big_y[0]))) or 1.0
        span = float(np.ptp(big_x[0])) or 1.0
        self.offset = float(np.mean(big_y[0]))
        self.constant = 3.0 * spread
        bounds = [(math.log(1e-3 * spread), math.log(1e2 * spread)),
                  (math.log(span / 100.0), math.log(10.0 * span))]
        if self.extra_scatter:
            bounds.append((math.log(1e-4 * spread), math.log(spread)))
        self.hyper_bounds = np.array(bounds)
        self.spread, self.span = spread, span

    def split(self, theta):
        theta = np.atleast_2d(theta)
        exponents = theta[:, :self.n_exponents]
        hyper = np.exp(theta[:, self.n_exponents:])
        amplitude, length_scale = hyper[:, 0], hyper[:, 1]
        noise = hyper[:, 2] if self.extra_scatter else np.zeros(theta.shape[0])
        return exponents, amplitude, length_scale, noise

    def in_support(self, theta) -> np.ndarray:
        theta = np.atleast_2d(theta)
        inside = self.form.in_bounds(theta[:, :self.n_exponents])
        low, high = self.hyper_bounds[:, 0], self.hyper_bounds[:, 1]
        hyper = theta[:, self.n_exponents:]
        inside &= np.all((hyper > low) & (hyper < high), axis=1)
        return inside

    def log_probability(self, theta) -> np.ndarray:
        theta = np.atleast_2d(theta)
        out = np.full(theta.shape[0], -np.inf)
        inside = self.in_support(theta)
        if not inside.any():
            return out
        exponents, amplitude, length_scale, noise = self.split(theta[inside])
        big_x, big_y, big_e, jacobian = self.rescaled(exponents)
        valid = np.all(np.isfinite(big_x), axis=1)
        values = np.full(valid.size, -np.inf)
        if valid.any():
            values[valid] = log_marginal_likelihood(
                big_x[valid], big_y[valid] - self.offset, big_e[valid], amplitude[valid],
                length_scale[valid], noise[valid], self.constant) + jacobian[valid]
        out[inside] = values
        return out


# ------------------------------------------------------------------------------------------
# starting point
# ------------------------------------------------------------------------------------------
def _grid_search(problem: _Problem) -> np.ndarray:
    from scipy.optimize import minimize

    names = problem.form.free
    if not names:
        return np.zeros(0)
    per_axis = {1: 61, 2: 25, 3: 11}.get(len(names), 7)
    axes = []
    for name in names:
        low, high = problem.form.bounds[name]
        axes.append(np.linspace(low, high, per_axis + 2)[1:-1])
    mesh = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, len(names))
    scores = np.array([problem.quality(point, require_overlap=True) for point in mesh])
    if not np.any(np.isfinite(scores)):
        raise ValueError(f"{problem.family.source}: no exponents in the prior bounds make the "
                         f"curves overlap; check the form, the windows or the bounds")
    best = mesh[int(np.nanargmin(np.where(np.isfinite(scores), scores, np.nan)))]

    def objective(point):
        if not problem.form.in_bounds(point[np.newaxis])[0]:
            return 1e300
        value = problem.quality(point, require_overlap=True)
        return value if np.isfinite(value) else 1e300

    steps = np.array([(problem.form.bounds[n][1] - problem.form.bounds[n][0]) / per_axis
                      for n in names])
    simplex = np.vstack([best] + [best + np.eye(len(names))[i] * steps[i] / 2
                                  for i in range(len(names))])
    result = minimize(objective, best, method="Nelder-Mead",
                      options={"initial_simplex": simplex, "xatol": 1e-5, "fatol": 1e-7,
                               "maxiter": 400 * len(names)})
    return result.x if result.fun < objective(best) else best


def _maximise(problem: _Problem, start: np.ndarray) -> np.ndarray:
    """Maximum of the posterior from ``start``: hyperparameters first, then all together."""
    from scipy.optimize import minimize

    k = problem.n_exponents

    def negative(theta):
        value = problem.log_probability(theta[np.newaxis])[0]
        return -value if np.isfinite(value) else 1e300

    hyper0 = start[k:]

    def negative_hyper(h):
        return negative(np.concatenate([start[:k], h]))

    result = minimize(negative_hyper, hyper0, method="Nelder-Mead",
                      options={"xatol": 1e-4, "fatol": 1e-6, "maxiter": 2000})
    theta = np.concatenate([start[:k], result.x])
    result = minimize(negative, theta, method="Nelder-Mead",
                      options={"xatol": 1e-5, "fatol": 1e-6, "maxiter": 3000 * len(theta)})
    if result.fun < negative(theta):
        theta = result.x
    return theta


def _initial_hyper(problem: _Problem) -> np.ndarray:
    h = [math.log(problem.spread), math.log(problem.span / 4.0)]
    if problem.extra_scatter:
        h.append(math.log(0.01 * problem.spread))
    low, high = problem.hyper_bounds[:, 0], problem.hyper_bounds[:, 1]
    return np.clip(np.array(h), low + 1e-6 * (high - low), high - 1e-6 * (high - low))


# ------------------------------------------------------------------------------------------
# quick intervals and the master curve
# ------------------------------------------------------------------------------------------
def _profile_interval(problem: _Problem, best: np.ndarray, column: int, threshold: float,
                      minimum: float, count: int):
    """Where ``count (S - S_min) / S_min`` reaches ``threshold`` on each side of the minimum,
    the other exponents held at the minimum."""
    low_bound, high_bound = problem.form.bounds[problem.form.free[column]]

    def excess(value):
        point = best.copy()
        point[column] = value
        quality = problem.quality(point)
        return count * (quality - minimum) / minimum if np.isfinite(quality) else np.inf

    ends = []
    for direction, bound in ((-1, low_bound), (1, high_bound)):
        step = 1e-4 * max(abs(best[column]), 1.0)
        inner = best[column]
        outer = inner + direction * step
        while excess(outer) < threshold:
            inner = outer
            step *= 2
            outer = inner + direction * step
            if (outer - bound) * direction >= 0:
                outer = bound
                break
        for _ in range(40):
            middle = 0.5 * (inner + outer)
            if excess(middle) < threshold:
                inner = middle
            else:
                outer = middle
        ends.append(0.5 * (inner + outer))
    return ends[0], ends[1]


def _grid_for(problem: _Problem, exponent_columns) -> np.ndarray:
    big_x, _, _, _ = problem.rescaled(np.atleast_2d(exponent_columns))
    return np.linspace(np.min(big_x[0]), np.max(big_x[0]), GRID_POINTS)


def _master_curve(problem: _Problem, draws: np.ndarray, grid: np.ndarray,
                  seed: int) -> MasterCurve:
    """Median and bands: pointwise percentiles of GP draws (4 per posterior draw), or for
    one parameter set the GP mean with +- 1 and 1.96 standard deviations."""
    rng = np.random.default_rng(seed)
    curves = []
    for theta in draws:
        exponents, amplitude, length_scale, noise = problem.split(theta)
        big_x, big_y, big_e, _ = problem.rescaled(exponents)
        mean, variance = predict(big_x[0], big_y[0] - problem.offset, big_e[0], grid,
                                 float(amplitude[0]), float(length_scale[0]), float(noise[0]),
                                 problem.constant)
        if len(draws) > 1:
            curves.append(mean + np.sqrt(variance) * rng.standard_normal((4, grid.size)))
        else:
            curves = [mean, np.sqrt(variance)]
    if len(draws) > 1:
        values = np.concatenate(curves, axis=0) + problem.offset
        q = np.percentile(values, [50, 16, 84, 2.5, 97.5], axis=0)
    else:
        mean, sd = curves
        mean = mean + problem.offset
        q = np.array([mean, mean - sd, mean + sd, mean - 1.96 * sd, mean + 1.96 * sd])
    form = problem.form
    x = np.exp(grid) if form.log_x else grid
    if form.log_y:
        q = np.exp(q)
    return MasterCurve(x=x, median=q[0], low68=q[1], high68=q[2], low95=q[3], high95=q[4])


# ------------------------------------------------------------------------------------------
# the fit
# ------------------------------------------------------------------------------------------
def _default_form(observable: str) -> str:
    if observable in ("correlation", "structure_factor"):
        return "dynamic"
    if observable == "length":
        return "family"
    return "power"


def fit_collapse(source, *, observable: str | None = None, form: str | None = None,
                 estimator: str = "corr_half", fixed: dict | None = None,
                 bounds: dict | None = None, shift: bool = False, tmin=None, tmax=None,
                 xmin=None, xmax=None, kmax=None, points: int | None = DEFAULT_POINTS,
                 log_x: bool | None = None, log_y: bool | None = None,
                 wave_number: str = "lattice", extra_scatter: bool = True,
                 quick: bool = False, seed: int = DEFAULT_SEED, walkers: int = 32,
                 max_steps: int = 20000, min_steps: int = 1000, block: int = 500
                 ) -> CollapseFit:
    """Collapse curves onto one master curve and sample the exponents that do it.

    Parameters
    ----------
    source : path-like, xarray.Dataset, CurveFamily or sequence of curve tuples
        A coarsen dataset (file or in memory), a CSV curve table (columns ``parameter, x, y,
        y_err``) or ``(parameter, x, y, y_err)`` tuples.
    observable : {"correlation", "structure_factor", "length"}, optional
        What to collapse from a dataset (default ``correlation``; ``length`` for a ramp
        scan, along ``ramp_time``).
    form : {"dynamic", "measured", "power", "family"}, optional
        The scaling form (:mod:`coarsen.fit.collapse_forms`). Default: ``dynamic`` (L =
        (t / t_ref)^n, n free) for C and S, ``family`` for lengths along ramp times,
        ``power`` for tables and arrays.
    estimator : str, default: "corr_half"
        The length estimator for the windows and for the ``measured`` form.
    fixed : dict, optional
        Exponents held fixed, e.g. ``{"a": 0.0}``.
    bounds : dict, optional
        Uniform prior bounds ``{name: (low, high)}`` replacing the defaults
        (:data:`coarsen.fit.collapse_forms.DEFAULT_BOUNDS`).
    shift : bool, default: False
        ``power``/``family``: fit a shift of x too (``x_c`` or ``t_c``).
    tmin, tmax, xmin, xmax, kmax, points
        Windows and thinning (:func:`coarsen.fit.collapse_inputs.select_points`; defaults:
        r in [1, 3 L], times with L >= 2 and below finite-size saturation, k <= 2, 160
        points in all).
    log_x, log_y : bool, optional
        Rescale on log scales (default: log-log for S(k) and lengths, linear for C(r) and
        tables).
    wave_number : {"lattice", "plain"}, default: "lattice"
        Structure factors: collapse against ``2 sin(k / 2)`` or the shell centre k.
    extra_scatter : bool, default: True
        Sample the extra scatter ``theta2`` of the master curve (Harada's optional noise
        term); without it the given errors must account for all the scatter.
    quick : bool, default: False
        Only minimise the Houdayer-Hartmann quality: exponents at the minimum, intervals
        where ``N (S - S_min) / S_min`` reaches 1 and 3.84 along each exponent (the others
        held at the minimum; a chi-square rule, common practice, no source), master curve
        from the Gaussian process at its best hyperparameters.
    seed, walkers, max_steps, min_steps, block
        Sampler settings (:func:`coarsen.fit.sampling.sample_posterior`).

    Returns
    -------
    CollapseFit

    Raises
    ------
    ValueError
        Bad input (naming the file, curve, option or exponent): fewer than two curves, NaN
        values, mismatched shapes, an unknown form, observable, estimator or exponent.

    Warns
    -----
    coarsen.fit.sampling.ConvergenceWarning
        When the chain did not converge within ``max_steps``.
    """
    from coarsen._validation import check_choice

    if form is not None:
        check_choice(form, FORMS, "form")
    check_choice(wave_number, WAVE_NUMBERS, "wave_number")
    family = load_family(source, observable, estimator=estimator)
    form_name = form or _default_form(family.observable)
    if form_name == "measured" and family.length is None:
        raise ValueError(f"form: 'measured' needs the lengths of a dataset of one run; "
                         f"{family.source} has none")
    is_log_x = (family.observable in ("structure_factor", "length")) if log_x is None \
        else bool(log_x)
    lattice_k = family.observable == "structure_factor" and wave_number == "lattice"
    if lattice_k and kmax is not None and kmax > math.pi:
        raise ValueError(f"kmax: {kmax!r} is above pi, where the lattice wave number "
                         f"2 sin(k/2) turns back; lower kmax or use wave_number='plain'")
    chosen = select_points(family, tmin=tmin, tmax=tmax, xmin=xmin, xmax=xmax, kmax=kmax,
                           points=points, log_x=is_log_x)
    raw_x = chosen.x
    notes = list(chosen.notes)
    if lattice_k:
        chosen = replace(chosen, x=tuple(2.0 * np.sin(x / 2.0) for x in chosen.x))
        notes.append("structure factor collapsed against the lattice wave number 2 sin(k/2) "
                     "of the shell centre k")
    all_x = np.concatenate(chosen.x)
    labels = chosen.length if form_name == "measured" else chosen.parameter
    scaling = make_form(form_name, family.observable, labels, dimension=family.dimension,
                        fixed=fixed, bounds=bounds, shift=shift, log_x=is_log_x, log_y=log_y,
                        x_range=(float(all_x.min()), float(all_x.max())))
    problem = _Problem(scaling, chosen, extra_scatter and not quick)
    start_exponents = _grid_search(problem)
    problem.set_hyper_priors(start_exponents)
    theta0 = _maximise(problem, np.concatenate([start_exponents, _initial_hyper(problem)])) \
        if not quick else np.concatenate([start_exponents, _initial_hyper(problem)])
    minimum = problem.quality(start_exponents)
    summaries, posterior, draws_all = {}, None, None
    if quick:
        count = int(np.sum(np.isfinite(np.concatenate(quality_terms(
            problem.curves_at(start_exponents))))))
        for column, name in enumerate(scaling.free):
            i68 = _profile_interval(problem, start_exponents, column, 1.0, minimum, count)
            i95 = _profile_interval(problem, start_exponents, column, 3.84, minimum, count)
            summaries[name] = {"median": float(start_exponents[column]),
                               "hdi68": [float(v) for v in i68],
                               "hdi95": [float(v) for v in i95]}
        theta_best = _maximise(problem, theta0)
        theta_best[:problem.n_exponents] = start_exponents
        median_exponents = start_exponents
        grid = _grid_for(problem, median_exponents)
        master = _master_curve(problem, theta_best[np.newaxis], grid, seed)
        converged = True
        hyper_summary = {name: {"median": float(v), "hdi68": [float(v)] * 2,
                                "hdi95": [float(v)] * 2}
                         for name, v in zip(problem.hyper_names,
                                            np.exp(theta_best[problem.n_exponents:]))}
    else:
        scale = np.concatenate([
            [1e-3 * (scaling.bounds[n][1] - scaling.bounds[n][0]) for n in scaling.free],
            np.full(len(problem.hyper_names), 1e-2)])
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            posterior = sample_posterior(problem.log_probability, theta0, scale=scale,
                                         seed=seed, walkers=walkers, max_steps=max_steps,
                                         min_steps=min_steps, block=block)
        draws_all = posterior.samples
        k = problem.n_exponents
        for column, name in enumerate(scaling.free):
            summaries[name] = summarize(draws_all[:, column])
        hyper_summary = {name: summarize(np.exp(draws_all[:, k + i]))
                         for i, name in enumerate(problem.hyper_names)}
        median_exponents = np.median(draws_all[:, :k], axis=0)
        grid = _grid_for(problem, median_exponents)
        pick = np.unique(np.linspace(0, len(draws_all) - 1,
                                     min(BAND_DRAWS, len(draws_all))).astype(int))
        master = _master_curve(problem, draws_all[pick], grid, seed)
        converged = bool(posterior.converged)
    quality = problem.quality(median_exponents)
    big_x, big_y, big_e, _ = problem.rescaled(np.atleast_2d(median_exponents))
    if scaling.log_x:
        big_x = np.exp(big_x)
    if scaling.log_y:
        big_y = np.exp(big_y)
        big_e = big_e * big_y
    _, x_fit, y_fit, e_fit, curve = chosen.flat()
    return CollapseFit(
        form=scaling, family=chosen, summaries=summaries, hyperparameters=hyper_summary,
        posterior=posterior, quality=float(quality), quality_start=float(minimum),
        converged=converged, quick=bool(quick), master=master,
        point_label=chosen.parameter[curve], point_curve=curve,
        point_raw_x=np.concatenate(raw_x), point_x=x_fit, point_y=y_fit, point_error=e_fit,
        rescaled_x=big_x[0], rescaled_y=big_y[0], rescaled_error=big_e[0],
        wave_number=wave_number if family.observable == "structure_factor" else None,
        notes=tuple(notes), seed=int(seed), input_family=family)


def tail_exponent(fit: CollapseFit, *, kl_min: float = 3.0, kmax: float = 2.0) -> dict:
    """Slope of the collapsed S(k) tail, ln Y against ln X, for Porod's law.

    Porod's law S ~ k^-(d+1) for kL >> 1 (Porod, Kolloid-Z. 124, 83 (1951); Bray, Adv. Phys.
    43, 357 (1994), recalled from memory) makes the slope -(d+1). The tail is the points
    with ``k L >= kl_min`` (L the estimator's length of the curve's time, k the shell
    centre) and ``k <= kmax``; the abscissa is the one of the collapse (``2 sin(k / 2)``
    with the default lattice wave number).

    Parameters
    ----------
    fit : CollapseFit
        A structure-factor collapse of a dataset of one run.
    kl_min : float, default: 3
    kmax : float, default: 2

    Returns
    -------
    dict
        ``slope``, ``slope_err`` (least-squares standard error from the scatter about the
        line), ``n_points``.

    Raises
    ------
    ValueError
        Not a structure-factor collapse, no lengths, or fewer than three tail points.
    """
    if fit.family.observable != "structure_factor" or fit.family.length is None:
        raise ValueError("fit: the tail exponent needs a structure-factor collapse of a "
                         "dataset with lengths")
    lengths = fit.family.length[fit.point_curve]
    tail = (fit.point_raw_x * lengths >= kl_min) & (fit.point_raw_x <= kmax)
    if tail.sum() < 3:
        raise ValueError(f"kl_min: {tail.sum()} point(s) with k L >= {kl_min:g} and "
                         f"k <= {kmax:g}; need at least 3")
    x = np.log(fit.rescaled_x[tail])
    y = np.log(fit.rescaled_y[tail])
    coefficients, covariance = np.polyfit(x, y, 1, cov=True)
    return {"slope": float(coefficients[0]), "slope_err": float(math.sqrt(covariance[0, 0])),
            "n_points": int(tail.sum()), "kl_min": float(kl_min), "kmax": float(kmax)}
