"""What a growth fit returns: summaries, the ``--json`` dict, a printed table, a dataset.

The dataset (``coarsen fit -o FIT.nc``) holds the posterior draws of every fitted model, the
fitted points with their covariance, the pointwise log-likelihoods, n_eff(t) and the model
comparison, each variable with ``units`` and ``long_name``; it is a new file, never the input.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field

import numpy as np

__all__ = ["FitWindow", "GrowthFit", "ModelFit"]


@dataclass(frozen=True)
class FitWindow:
    """The fitted times: first and last fitted time, the mask over the input, and why."""

    tmin: float
    tmax: float
    keep: np.ndarray
    reasons: tuple
    automatic: bool


@dataclass(frozen=True)
class ModelFit:
    """One model's posterior.

    Attributes
    ----------
    model : coarsen.fit.models.GrowthModel
    posterior : coarsen.fit.sampling.PosteriorSample
    values : dict of str to ndarray
        Draws of every parameter in natural units (fixed ones constant).
    summaries : dict of str to dict
        Median, hdi68, hdi95 of each free parameter.
    pointwise_log_likelihood : ndarray of shape (n_samples, n_points)
    waic : dict
        From :func:`coarsen.fit.sampling.waic`.
    """

    model: object
    posterior: object
    values: dict
    summaries: dict
    pointwise_log_likelihood: np.ndarray
    waic: dict

    def parameter_summary(self, name: str) -> dict:
        """Summary of a free parameter, or the fixed value with zero-width intervals."""
        if name in self.summaries:
            return dict(self.summaries[name])
        value = float(self.model.fixed[name])
        return {"median": value, "hdi68": [value, value], "hdi95": [value, value],
                "fixed": True}


def _law_words(summary: dict, probabilities: dict, fixed: bool) -> list[str]:
    from coarsen.fit.growth import LAW_TOLERANCE, LAWS

    low, high = summary["hdi95"]
    words = []
    for key, (exponent, name, meaning) in LAWS.items():
        p = probabilities[key]
        inside = low <= exponent <= high
        if fixed:
            words.append(f"n is fixed at {summary['median']:.4g}: the fit does not test "
                         f"{meaning} ({name}, n = {exponent:.4g})")
            continue
        verdict = "consistent with" if inside else "not consistent with"
        words.append(f"{verdict} {meaning} ({name}, n = {exponent:.4g}): "
                     f"P(|n - {exponent:.4g}| < {LAW_TOLERANCE:g}) = {p:.2f}")
    return words


@dataclass(frozen=True)
class GrowthFit:
    """The result of :func:`coarsen.fit.growth.fit_growth`.

    Attributes
    ----------
    model : str
        The reported model; ``fits[model]`` is its posterior.
    fits : dict of str to ModelFit
        Every fitted model (the others when compared).
    data : coarsen.fit.inputs.GrowthData
        The whole input.
    window : FitWindow
    time, log_length : ndarray of shape (T,)
        The fitted points.
    covariance : ndarray of shape (T, T) or None
        Covariance of ``log_length`` (None: errors unknown, scatter fitted).
    shrinkage : float or None
        Shrinkage of the replica correlations (datasets).
    replicas : int or None
    notes : tuple of str
    comparison : dict
        From :func:`coarsen.fit.sampling.compare_waic` (empty when only one model).
    law_probabilities : dict of str to float
        P(|n - law| < 0.02) for ``allen_cahn`` and ``lifshitz_slyozov``.
    effective : coarsen.fit.effective.EffectiveExponent
    seed : int
    extra_scatter : bool
    """

    model: str
    fits: dict
    data: object
    window: FitWindow
    time: np.ndarray
    log_length: np.ndarray
    covariance: np.ndarray | None
    shrinkage: float | None
    replicas: int | None
    notes: tuple
    comparison: dict
    law_probabilities: dict
    effective: object
    seed: int
    extra_scatter: bool
    _cache: dict = field(default_factory=dict, repr=False, compare=False)

    @property
    def main(self) -> ModelFit:
        return self.fits[self.model]

    @property
    def exponent(self) -> dict:
        """Median and HDIs of the growth exponent n."""
        return self.main.parameter_summary("n")

    @property
    def converged(self) -> bool:
        return bool(self.main.posterior.converged)

    @property
    def statements(self) -> list[str]:
        """Plain-words verdicts on the classical laws (law inside the 95 % HDI of n)."""
        return _law_words(self.exponent, self.law_probabilities, "n" in self.main.model.fixed)

    def to_json(self) -> dict:
        """The ``coarsen fit --json`` object (contract keys first, then extras)."""
        main = self.main
        posterior = main.posterior
        parameters = {name: main.parameter_summary(name) for name in main.model.parameters}
        out = {
            "model": self.model,
            "exponent": self.exponent,
            "parameters": parameters,
            "converged": bool(posterior.converged),
            "autocorr_time": float(np.max(posterior.autocorr_time)),
            "n_points": int(self.time.size),
            "estimator": self.data.estimator,
            "input": self.data.source,
            "window": {"tmin": self.window.tmin, "tmax": self.window.tmax,
                       "reasons": list(self.window.reasons)},
            "acceptance_fraction": posterior.acceptance_fraction,
            "effective_sample_size": float(np.min(posterior.effective_sample_size)),
            "steps": posterior.steps,
            "walkers": posterior.walkers,
            "seed": self.seed,
            "laws": {key: {"probability_within_0.02": p}
                     for key, p in self.law_probabilities.items()},
            "statements": self.statements,
            "comparison": {name: {k: v for k, v in entry.items()}
                           for name, entry in self.comparison.items()},
            "notes": list(self.notes),
        }
        return out

    def format_table(self) -> str:
        """The summary ``coarsen fit`` prints."""
        main = self.main
        posterior = main.posterior
        lines = [f"input: {self.data.source} ({self.data.kind}"
                 + (f", estimator {self.data.estimator}" if self.data.estimator else "") + ")",
                 f"window: t = {self.window.tmin:g} to {self.window.tmax:g}, "
                 f"{self.time.size} points"]
        lines += [f"  {reason}" for reason in self.window.reasons]
        lines += [f"note: {note}" for note in self.notes]
        lines.append("")
        lines.append(f"model {self.model}: " + {"power": "L = A t^n",
                                                 "offset": "L = L0 + A t^n",
                                                 "shifted": "L = A (t + t0)^n"}[self.model])
        lines.append(f"  {'parameter':<12} {'median':>11} {'68% HDI':>25} {'95% HDI':>25}")
        for name in main.model.parameters:
            s = main.parameter_summary(name)
            if s.get("fixed"):
                lines.append(f"  {name:<12} {s['median']:>11.5g} {'(fixed)':>25}")
                continue
            h68 = f"[{s['hdi68'][0]:.5g}, {s['hdi68'][1]:.5g}]"
            h95 = f"[{s['hdi95'][0]:.5g}, {s['hdi95'][1]:.5g}]"
            lines.append(f"  {name:<12} {s['median']:>11.5g} {h68:>25} {h95:>25}")
        lines.append(f"  sampler: {posterior.walkers} walkers x {posterior.steps} steps, "
                     f"acceptance {posterior.acceptance_fraction:.2f}, autocorrelation time "
                     f"{np.max(posterior.autocorr_time):.1f} steps, effective samples "
                     f"{np.min(posterior.effective_sample_size):.0f}, "
                     + ("converged" if posterior.converged else "NOT CONVERGED"))
        if self.comparison:
            lines.append("")
            lines.append("model comparison (WAIC, Watanabe 2010; higher elpd is better):")
            lines.append(f"  {'model':<8} {'elpd':>9} {'se':>7} {'d_elpd':>8} {'d_se':>7} "
                         f"{'p_waic':>7} {'weight':>7}  n (median [95% HDI])")
            for name, entry in self.comparison.items():
                s = self.fits[name].parameter_summary("n")
                lines.append(f"  {name:<8} {entry['elpd']:>9.2f} {entry['se']:>7.2f} "
                             f"{entry['delta_elpd']:>8.2f} {entry['delta_se']:>7.2f} "
                             f"{entry['p_waic']:>7.2f} {entry['weight']:>7.2f}  "
                             f"{s['median']:.4f} [{s['hdi95'][0]:.4f}, {s['hdi95'][1]:.4f}]")
        lines.append("")
        s = self.exponent
        lines.append(f"growth exponent n = {s['median']:.4f}, 95% HDI "
                     f"[{s['hdi95'][0]:.4f}, {s['hdi95'][1]:.4f}]:")
        lines += [f"  {text}" for text in self.statements]
        return "\n".join(lines)

    def format_effective_exponent(self) -> str:
        """n_eff(t) as a small table."""
        e = self.effective
        lines = [f"effective exponent n_eff = d ln L / d ln t (error: {e.method})",
                 f"  {'t':>10} {'n_eff':>8} {'error':>8}"]
        for t, value, error in zip(e.time, e.exponent, e.error):
            lines.append(f"  {t:>10.4g} {value:>8.4f} {error:>8.4f}")
        return "\n".join(lines)

    def to_dataset(self):
        """The fit as an xarray Dataset (posterior draws, fitted points, n_eff, comparison)."""
        import xarray as xr

        import coarsen
        from coarsen.dataset import created_now, provenance

        def var(dims, values, units, long_name):
            return xr.Variable(dims, np.asarray(values), attrs={"units": units,
                                                                "long_name": long_name})

        data_vars = {
            "fit_log_length": var(("point",), self.log_length, "ln(lattice spacings)",
                                  "fitted ln L (replica mean of ln L, or ln of the table's L)"),
            "effective_exponent": var(("effective_time",), self.effective.exponent, "1",
                                      "n_eff = d ln L / d ln t between measured times"),
            "effective_exponent_err": var(("effective_time",), self.effective.error, "1",
                                          f"standard error of n_eff ({self.effective.method})"),
            "input_time": var(("input_point",), self.data.time, "sweeps",
                              "every time of the input"),
            "input_log_length": var(("input_point",), self.data.log_length,
                                    "ln(lattice spacings)", "ln L at every time of the input"),
            "in_window": var(("input_point",), self.window.keep.astype(np.int8), "1",
                             "1 where the input time lies in the fit window"),
        }
        if self.covariance is not None:
            data_vars["fit_covariance"] = var(("point", "point_other"), self.covariance, "1",
                                              "covariance of the fitted ln L between times")
        coords = {"point": ("point", self.time), "effective_time": ("effective_time",
                                                                    self.effective.time)}
        for name, fit in self.fits.items():
            parameters = np.array(fit.model.free)
            samples = np.column_stack([fit.values[p] for p in fit.model.free])
            coords[f"parameter_{name}"] = (f"parameter_{name}", parameters)
            data_vars[f"posterior_{name}"] = var(
                (f"sample_{name}", f"parameter_{name}"), samples, "1",
                f"posterior draws of model {name} (A in lattice spacings / sweeps^n)")
            data_vars[f"log_likelihood_{name}"] = var(
                (f"sample_{name}", "point"), fit.pointwise_log_likelihood, "1",
                f"pointwise (conditional) log-likelihood of model {name}")
        if self.comparison:
            names = list(self.comparison)
            coords["model"] = ("model", np.array(names))
            for key, long_name in (("elpd", "WAIC expected log pointwise predictive density"),
                                   ("se", "standard error of elpd"),
                                   ("delta_elpd", "elpd minus the best model's"),
                                   ("delta_se", "standard error of delta_elpd"),
                                   ("weight", "normalised exp(elpd) weight")):
                data_vars[f"waic_{key}"] = var(("model",), [self.comparison[m][key]
                                                            for m in names], "1", long_name)
        ds = xr.Dataset(data_vars, coords=coords)
        ds["point"].attrs.update(units="sweeps", long_name="fitted time")
        ds["effective_time"].attrs.update(units="sweeps", long_name="geometric-mean time")
        summary = self.to_json()
        ds.attrs.update({
            "coarsen_version": coarsen.__version__,
            "model": self.model,
            "input": str(self.data.source),
            "estimator": str(self.data.estimator or ""),
            "converged": int(self.converged),
            "tmin": self.window.tmin,
            "tmax": self.window.tmax,
            "seed": int(self.seed),
            "statement": "; ".join(self.statements),
            "summary": json.dumps(summary, sort_keys=True),
            "provenance": provenance(),
            "created": created_now(),
        })
        return ds
