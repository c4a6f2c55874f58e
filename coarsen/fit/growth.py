"""Growth-law fits: the fit window, least squares, posterior sampling, model comparison.

:func:`fit_growth` is the whole job: read the lengths (:mod:`coarsen.fit.inputs`), choose the
window, build the likelihood on ``ln L`` (:mod:`coarsen.fit.likelihood`), sample each model
(:mod:`coarsen.fit.models`, :mod:`coarsen.fit.sampling`), compare the models by WAIC, and
say whether the exponent is consistent with the classical laws: Allen-Cahn n = 1/2 for a
non-conserved order parameter (Allen & Cahn, Acta Metall. 27, 1085 (1979)) and
Lifshitz-Slyozov n = 1/3 for a conserved one (Lifshitz & Slyozov, J. Phys. Chem. Solids 19,
35 (1961)); references recalled from memory.
"""

from __future__ import annotations

import math

import numpy as np

from coarsen.fit.effective import effective_exponent
from coarsen.fit.inputs import GrowthData, load_growth_data
from coarsen.fit.likelihood import LogLengthLikelihood, replica_covariance
from coarsen.fit.models import MODELS, make_model
from coarsen.fit.result import FitWindow, GrowthFit, ModelFit
from coarsen.fit.sampling import DEFAULT_SEED, compare_waic, sample_posterior, summarize, waic

__all__ = ["LAWS", "LAW_TOLERANCE", "SATURATION_FRACTION", "TRANSIENT_GROWTH", "choose_window",
           "fit_growth", "fit_model", "law_probabilities"]

#: The classical laws: key -> (exponent, name, what it means).
LAWS = {
    "allen_cahn": (0.5, "Allen-Cahn", "non-conserved coarsening"),
    "lifshitz_slyozov": (1.0 / 3.0, "Lifshitz-Slyozov", "conserved coarsening"),
}
#: Half-width of the interval around a law's exponent for its posterior probability.
LAW_TOLERANCE = 0.02

#: Late-time cut of the automatic window: lengths above this fraction of the smallest side
#: of the system are dropped (finite-size saturation). The estimators differ by constant
#: factors in the scaling regime (corr_zero ~ 2.4 corr_half for conserved dynamics,
#: sk_moment ~ 7 corr_half), hence one fraction each; tables of unknown estimator use 0.1.
SATURATION_FRACTION = {"corr_half": 0.1, "wall": 0.1, "corr_zero": 0.25, "sk_moment": 0.25}
#: Early-time cut of the automatic window: points before L first reaches this multiple of
#: the first measured length are the transient from the initial state.
TRANSIENT_GROWTH = 3.0


def choose_window(data: GrowthData, *, tmin=None, tmax=None, saturation_fraction=None,
                  system_size=None) -> FitWindow:
    """The times to fit: given bounds, or the automatic window.

    Parameters
    ----------
    data : GrowthData
    tmin, tmax : float, optional
        Given bounds (inclusive). A bound that is not given is chosen automatically:
    saturation_fraction : float, optional
        Without ``tmax``: drop times from the first one where L exceeds this fraction of the
        system's smallest side (default: :data:`SATURATION_FRACTION` of the estimator);
        skipped when the system size is unknown.
    system_size : float, optional
        Overrides the data's system size (lattice spacings).

    Returns
    -------
    FitWindow

    Notes
    -----
    Without ``tmin`` the early transient is dropped: the points before L first reaches
    :data:`TRANSIENT_GROWTH` times its first measured value, but never more than the first
    half of the points (lab series often start inside the scaling regime).
    """
    time, length = data.time, data.length
    keep = np.ones(time.size, dtype=bool)
    reasons = []
    for name, value in (("tmin", tmin), ("tmax", tmax)):
        if value is not None and not (isinstance(value, (int, float, np.number))
                                      and math.isfinite(value) and value >= 0):
            raise ValueError(f"{name}: {value!r} must be a finite time >= 0")
    if tmin is not None and tmax is not None and not tmin < tmax:
        raise ValueError(f"tmin: {tmin!r} must be less than tmax {tmax!r}")
    if tmin is not None:
        keep &= time >= tmin
        reasons.append(f"t >= {tmin:g} (given)")
    else:
        reached = np.nonzero(length >= TRANSIENT_GROWTH * length[0])[0]
        first = int(reached[0]) if reached.size else time.size
        first = min(first, time.size // 2)
        if first > 0:
            keep[:first] = False
            reasons.append(f"dropped {first} early point(s) before t = {time[first]:g}: "
                           f"transient until L reaches {TRANSIENT_GROWTH:g} x its first value "
                           f"(at most half the points)")
    if tmax is not None:
        keep &= time <= tmax
        reasons.append(f"t <= {tmax:g} (given)")
    else:
        size = system_size if system_size is not None else data.system_size
        fraction = saturation_fraction if saturation_fraction is not None else \
            SATURATION_FRACTION.get(data.estimator, 0.1)
        if size is not None:
            over = np.nonzero(length > fraction * size)[0]
            if over.size:
                cut = int(over[0])
                dropped = int(keep[cut:].sum())
                keep[cut:] = False
                reasons.append(f"dropped {dropped} late point(s) from t = {time[cut]:g}: L "
                               f"above {fraction:g} x system size {size:g} (finite-size "
                               f"saturation)")
        else:
            reasons.append("no late cut: system size unknown")
    if not keep.any():
        raise ValueError(f"fit window: no point of {data.source!r} lies in it "
                         f"(times {time[0]:g} to {time[-1]:g})")
    fitted = time[keep]
    return FitWindow(tmin=float(fitted[0]), tmax=float(fitted[-1]), keep=keep,
                     reasons=tuple(reasons), automatic=(tmin is None or tmax is None))


def _fitted_points(data: GrowthData, extra_scatter: bool):
    """``(time, y, covariance or None, extra_scatter, shrinkage, replicas, notes)``."""
    notes = []
    replicas = data.replica_log_lengths
    if replicas is not None and replicas.shape[0] >= 2:
        estimate = replica_covariance(replicas)
        notes.extend(estimate.notes)
        notes.append(f"covariance between times from {estimate.replicas} replicas, "
                     f"shrinkage {estimate.shrinkage:.2f} toward the diagonal")
        return (data.time[estimate.keep_times], estimate.mean, estimate.covariance,
                extra_scatter, estimate.shrinkage, estimate.replicas, notes)
    if data.log_length_err is not None and np.all(np.isfinite(data.log_length_err)):
        return (data.time, data.log_length, np.diag(data.log_length_err ** 2), extra_scatter,
                None, None, notes)
    if not extra_scatter:
        notes.append("no errors given: the scatter is fitted (sigma_extra)")
    return data.time, data.log_length, None, True, None, None, notes


def _start(model, likelihood, time) -> tuple[np.ndarray, np.ndarray]:
    """Least-squares start and a scale for the walkers' initial ball."""
    from scipy.optimize import least_squares

    y = likelihood.y
    covariance = likelihood.covariance
    if not np.any(covariance):
        covariance = np.eye(y.size) * max(float(np.var(y)) * 1e-2, 1e-6)
    whitener = np.linalg.cholesky(covariance + 1e-12 * np.eye(y.size))
    slope, intercept = np.polyfit(np.log(time), y, 1)
    guess = {"n": float(np.clip(slope, 0.02, 1.48)), "A": float(np.exp(intercept)),
             "L0": 0.0, "t0": 0.0, "sigma_extra": 0.1}
    guess.update(model.fixed)
    low, high = model.bounds
    margin = 1e-6 * (high - low)
    x0 = np.clip(model.to_sampling(guess), low + margin, high - margin)
    growth = [p for p in model.free if p != "sigma_extra"]
    columns = [model.free.index(p) for p in growth]

    def residual(x):
        theta = x0.copy()
        theta[columns] = x
        values = model.values(theta[np.newaxis])
        log_model = model.log_length(values, time)[0]
        r = np.linalg.solve(whitener, y - np.where(np.isfinite(log_model), log_model, y + 10))
        return r

    scale = np.maximum(1e-3 * np.abs(x0), 1e-4)
    if columns:
        try:
            fit = least_squares(residual, x0[columns], bounds=(low[columns] + margin[columns],
                                                               high[columns] - margin[columns]))
            x0[columns] = fit.x
            jac = fit.jac
            covariance_x = np.linalg.pinv(jac.T @ jac)
            spread = np.sqrt(np.clip(np.diag(covariance_x), 0, None))
            scale[columns] = np.clip(0.5 * spread, 1e-6, 0.01 * (high - low)[columns])
        except (ValueError, np.linalg.LinAlgError):
            pass
    if "sigma_extra" in model.free:
        index = model.free.index("sigma_extra")
        values = model.values(x0[np.newaxis])
        rms = float(np.sqrt(np.mean((y - model.log_length(values, time)[0]) ** 2)))
        x0[index] = np.clip(rms, low[index] + margin[index] + 1e-3, high[index] - margin[index])
        scale[index] = 0.01 * max(x0[index], 1e-3)
    return x0, scale


def fit_model(name: str, time, y, covariance, *, replicas: int | None = None, fixed=None,
              priors=None, extra_scatter=False, seed: int = DEFAULT_SEED, walkers: int = 32,
              max_steps: int = 40000, min_steps: int = 1000, block: int = 500) -> ModelFit:
    """Sample the posterior of one growth law fitted to ``y = ln L`` at ``time``.

    Parameters
    ----------
    name : {"power", "offset", "shifted"}
    time : ndarray of shape (T,)
    y : ndarray of shape (T,)
        Observed ``ln L``.
    covariance : ndarray of shape (T, T) or None
        Covariance of ``y``; None when unknown (then ``extra_scatter`` must be true).
    replicas : int, optional
        When ``covariance`` was estimated from this many replicas (see
        :class:`coarsen.fit.likelihood.LogLengthLikelihood`).
    fixed, priors, extra_scatter
        As for :func:`coarsen.fit.models.make_model`.
    seed, walkers, max_steps, min_steps, block
        As for :func:`coarsen.fit.sampling.sample_posterior`.

    Returns
    -------
    ModelFit
    """
    time = np.asarray(time, dtype=np.float64)
    y = np.asarray(y, dtype=np.float64)
    if covariance is None and not extra_scatter:
        raise ValueError("covariance: None needs extra_scatter=True (the scatter is fitted)")
    model = make_model(name, time, np.exp(y), fixed=fixed, priors=priors,
                       extra_scatter=extra_scatter)
    if len(model.free) > y.size:
        raise ValueError(f"fit window: {y.size} point(s) for the {len(model.free)} free "
                         f"parameters of model {name!r} ({', '.join(model.free)}); widen the "
                         f"window or fix parameters")
    if not model.free:
        raise ValueError(f"fixed: every parameter of model {name!r} is fixed; nothing to fit")
    likelihood = LogLengthLikelihood(y, covariance, replicas)

    def curves(theta):
        values = model.values(theta)
        scatter = values.get("sigma_extra") if model.extra_scatter else None
        return model.log_length(values, time), scatter

    def log_probability(theta):
        theta = np.atleast_2d(theta)
        out = np.full(theta.shape[0], -np.inf)
        inside = model.in_support(theta)
        if inside.any():
            log_model, scatter = curves(theta[inside])
            out[inside] = likelihood.joint(log_model, scatter)
        return out

    start, scale = _start(model, likelihood, time)
    posterior = sample_posterior(log_probability, start, scale=scale, seed=seed,
                                 walkers=walkers, max_steps=max_steps, min_steps=min_steps,
                                 block=block)
    log_model, scatter = curves(posterior.samples)
    pointwise = likelihood.pointwise(log_model, scatter)
    values = model.values(posterior.samples)
    summaries = {p: summarize(values[p]) for p in model.free}
    return ModelFit(model=model, posterior=posterior, values=values, summaries=summaries,
                    pointwise_log_likelihood=pointwise, waic=waic(pointwise))


def _seed_for(seed: int, index: int) -> int:
    if index == 0:
        return int(seed)
    return int(np.random.SeedSequence([int(seed), index]).generate_state(1)[0])


def law_probabilities(n_samples) -> dict[str, float]:
    """Posterior probability that n lies within :data:`LAW_TOLERANCE` of each law."""
    n_samples = np.asarray(n_samples)
    return {key: float(np.mean(np.abs(n_samples - exponent) < LAW_TOLERANCE))
            for key, (exponent, _, _) in LAWS.items()}


def fit_growth(source, *, estimator: str | None = None, model: str = "power",
               fixed: dict | None = None, priors: dict | None = None, tmin=None, tmax=None,
               extra_scatter: bool = False, compare: bool = True, seed: int = DEFAULT_SEED,
               walkers: int = 32, max_steps: int = 40000, system_size=None,
               saturation_fraction=None) -> GrowthFit:
    """Fit a growth law L(t) to domain lengths, with honest uncertainties.

    Parameters
    ----------
    source : path-like, xarray.Dataset or GrowthData
        A coarsen dataset (file or in memory) or a CSV length table.
    estimator : str, optional
        The dataset's length estimator (default: ``corr_half``).
    model : {"power", "offset", "shifted"}, default: "power"
        The reported model (see :mod:`coarsen.fit.models`).
    fixed : dict of str to float, optional
        Parameters held fixed, e.g. ``{"n": 1/3}``; applied to every compared model that has
        them.
    priors : dict, optional
        Replacement priors (see :func:`coarsen.fit.models.make_model`).
    tmin, tmax : float, optional
        Fit window; the automatic window fills in what is not given (:func:`choose_window`).
    extra_scatter : bool, default: False
        Fit an extra scatter in ``ln L`` (always on for data without errors).
    compare : bool, default: True
        Also fit the other two models on the same points and compare them by WAIC.
    seed : int, default: DEFAULT_SEED
        The result is reproducible for a given seed.
    walkers, max_steps
        Sampler settings (:func:`coarsen.fit.sampling.sample_posterior`).
    system_size, saturation_fraction
        For the automatic late-time cut.

    Returns
    -------
    GrowthFit

    Raises
    ------
    ValueError
        For bad input (naming the file, column, row or parameter), or fewer points in the
        window than free parameters.

    Warns
    -----
    coarsen.fit.sampling.ConvergenceWarning
        When a chain did not converge within ``max_steps`` (its ``converged`` is false).
    """
    if model not in MODELS:
        raise ValueError(f"model: {model!r} is not one of {', '.join(MODELS)}")
    data = load_growth_data(source, estimator)
    window = choose_window(data, tmin=tmin, tmax=tmax, system_size=system_size,
                           saturation_fraction=saturation_fraction)
    inside = data.select(window.keep)
    time, y, covariance, scatter, shrinkage, replicas, notes = _fitted_points(inside,
                                                                             extra_scatter)
    where = f"length table {data.source!r}" if data.kind == "table" else data.source
    names = [model] + ([m for m in MODELS if m != model] if compare else [])
    fits = {}
    for index, name in enumerate(names):
        fixed_here = {k: v for k, v in (fixed or {}).items()
                      if k in MODELS[name] + ("sigma_extra",)}
        if index == 0 and fixed:
            unknown = [k for k in fixed if k not in MODELS[name] + ("sigma_extra",)]
            if unknown:
                raise ValueError(f"fixed: {unknown[0]!r} is not a parameter of model {name!r}; "
                                 f"use one of {', '.join(MODELS[name] + ('sigma_extra',))}")
        try:
            fits[name] = fit_model(name, time, y, covariance, replicas=replicas,
                                   fixed=fixed_here, priors=priors,
                                   extra_scatter=scatter, seed=_seed_for(seed, index),
                                   walkers=walkers, max_steps=max_steps)
        except ValueError as error:
            if index == 0:
                raise ValueError(f"{where}: {error}") from None
            notes.append(f"model {name!r} not compared: {error}")
    comparison = compare_waic({name: fit.waic for name, fit in fits.items()}) \
        if len(fits) > 1 else {}
    main = fits[model]
    n_values = main.values["n"]
    probabilities = law_probabilities(n_values)
    return GrowthFit(model=model, fits=fits, data=data, window=window, time=time, log_length=y,
                     covariance=covariance, shrinkage=shrinkage, replicas=replicas,
                     notes=tuple(data.notes) + tuple(notes), comparison=comparison,
                     law_probabilities=probabilities,
                     effective=effective_exponent(data, seed=int(seed) % 2**32), seed=int(seed),
                     extra_scatter=scatter)
