"""What a collapse returns: summaries, the ``--json`` dict, a printed table, a dataset.

The dataset (``coarsen collapse -o OUT.nc``) holds the posterior draws, the master curve and
its 68 % / 95 % band on a grid, the fitted points and the same points rescaled, and the
quality, each variable with ``units`` and ``long_name``; it is a new file, never the input.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field

import numpy as np

__all__ = ["CollapseFit", "MasterCurve"]

_X_UNITS = {"r": "lattice spacings", "k": "1/lattice spacing", "time": "sweeps", "x": "1"}
_FORM_TEXT = {
    ("dynamic", "correlation"): "C(r, t) = f(r / L), L = (t / t_ref)^n",
    ("dynamic", "structure_factor"): "S(k, t) = L^d g(k L), L = (t / t_ref)^n",
    ("measured", "correlation"): "C(r, t) = f(r / L(t)), L measured ({estimator})",
    ("measured", "structure_factor"): "S(k, t) = L^d g(k L), L measured ({estimator})",
}


@dataclass(frozen=True)
class MasterCurve:
    """The master curve on a grid of the rescaled abscissa (natural units), with its band."""

    x: np.ndarray
    median: np.ndarray
    low68: np.ndarray
    high68: np.ndarray
    low95: np.ndarray
    high95: np.ndarray


@dataclass(frozen=True)
class CollapseFit:
    """The result of :func:`coarsen.fit.collapse.fit_collapse`.

    Attributes
    ----------
    form : coarsen.fit.collapse_forms.ScalingForm
    family : coarsen.fit.collapse_inputs.CurveFamily
        The fitted curves (after windows and thinning; x is the lattice wave number for
        structure factors by default).
    summaries : dict of str to dict
        Median, hdi68 and hdi95 of each free exponent.
    hyperparameters : dict of str to dict
        The same for the Gaussian process (amplitude, length_scale, noise).
    posterior : coarsen.fit.sampling.PosteriorSample or None
        None for a quick fit.
    quality : float
        Houdayer-Hartmann S at the posterior median exponents (about 1 for a good collapse).
    quality_start : float
        Its minimum from the starting-point search.
    converged : bool
    quick : bool
    master : MasterCurve
    point_label, point_curve, point_raw_x, point_x, point_y, point_error : ndarray
        The fitted points: curve label, curve index, abscissa as read, abscissa as fitted,
        value, standard error.
    rescaled_x, rescaled_y, rescaled_error : ndarray
        The points rescaled at the median exponents.
    wave_number : str or None
    notes : tuple of str
    seed : int
    input_family : CurveFamily
        The curves as read, before windows.
    """

    form: object
    family: object
    summaries: dict
    hyperparameters: dict
    posterior: object
    quality: float
    quality_start: float
    converged: bool
    quick: bool
    master: MasterCurve
    point_label: np.ndarray
    point_curve: np.ndarray
    point_raw_x: np.ndarray
    point_x: np.ndarray
    point_y: np.ndarray
    point_error: np.ndarray
    rescaled_x: np.ndarray
    rescaled_y: np.ndarray
    rescaled_error: np.ndarray
    wave_number: str | None
    notes: tuple
    seed: int
    input_family: object = field(repr=False, default=None)

    def exponent(self, name: str) -> dict:
        """Summary of an exponent, or the fixed value with zero-width intervals."""
        if name in self.summaries:
            return dict(self.summaries[name])
        value = float(self.form.fixed[name])
        return {"median": value, "hdi68": [value, value], "hdi95": [value, value],
                "fixed": True}

    @property
    def exponents(self) -> dict:
        return {name: self.exponent(name) for name in self.form.exponents}

    @property
    def method(self) -> str:
        return "quick (Houdayer-Hartmann)" if self.quick else "gaussian-process (Harada)"

    def describe_form(self) -> str:
        key = (self.form.name, self.family.observable)
        if key in _FORM_TEXT:
            return _FORM_TEXT[key].format(estimator=self.family.estimator)
        shift = f" - {self.form.shift_name}" if self.form.shift_name else ""
        if self.form.name == "family":
            return f"y(t; p) = p^a F((t{shift}) / p^b)"
        return f"y(x; s) = s^a F((x{shift}) s^-b)"

    def to_json(self) -> dict:
        """The ``coarsen collapse --json`` object (contract keys first, then extras)."""
        out = {
            "exponents": self.exponents,
            "quality": self.quality,
            "converged": bool(self.converged),
            "form": self.form.name,
            "scaling_form": self.describe_form(),
            "observable": self.family.observable,
            "input": self.family.source,
            "method": self.method,
            "reference": self.form.reference,
            "reference_name": self.family.parameter_name,
            "log_x": bool(self.form.log_x),
            "log_y": bool(self.form.log_y),
            "n_curves": int(len(self.family)),
            "n_points": int(self.point_x.size),
            "curves": [float(p) for p in self.family.parameter],
            "hyperparameters": self.hyperparameters,
            "quality_minimum": self.quality_start,
            "seed": self.seed,
            "notes": list(self.notes),
        }
        if self.family.estimator:
            out["estimator"] = self.family.estimator
        if self.wave_number:
            out["wave_number"] = self.wave_number
        if self.posterior is not None:
            p = self.posterior
            out.update({"autocorr_time": float(np.max(p.autocorr_time)),
                        "effective_sample_size": float(np.min(p.effective_sample_size)),
                        "acceptance_fraction": p.acceptance_fraction, "steps": p.steps,
                        "walkers": p.walkers})
        tail = self.tail()
        if tail is not None:
            out["tail_exponent"] = tail
        return out

    def tail(self):
        """Porod tail slope of a structure-factor collapse (None otherwise or too few)."""
        from coarsen.fit.collapse import tail_exponent

        if self.family.observable != "structure_factor" or self.family.length is None:
            return None
        try:
            return tail_exponent(self)
        except ValueError:
            return None

    def format_table(self) -> str:
        """The summary ``coarsen collapse`` prints."""
        f = self.family
        lines = [f"input: {f.source} ({f.observable}"
                 + (f", estimator {f.estimator}" if f.estimator else "") + ")",
                 f"form {self.form.name}: {self.describe_form()}",
                 f"curves: {len(f)} ({f.parameter_name} {f.parameter[0]:g} to "
                 f"{f.parameter[-1]:g}), {self.point_x.size} points"
                 + (f"; reference {f.parameter_name} {self.form.reference:.4g}"
                    if self.form.name != "measured" else "")]
        lines += [f"note: {note}" for note in self.notes]
        lines.append(f"method: {self.method}")
        lines.append(f"  {'exponent':<12} {'median':>11} {'68% interval':>25} "
                     f"{'95% interval':>25}")
        for name in self.form.exponents:
            s = self.exponent(name)
            if s.get("fixed"):
                lines.append(f"  {name:<12} {s['median']:>11.5g} {'(fixed)':>25}")
                continue
            h68 = f"[{s['hdi68'][0]:.5g}, {s['hdi68'][1]:.5g}]"
            h95 = f"[{s['hdi95'][0]:.5g}, {s['hdi95'][1]:.5g}]"
            lines.append(f"  {name:<12} {s['median']:>11.5g} {h68:>25} {h95:>25}")
        if not self.form.exponents:
            lines.append("  (no free exponent: lengths measured)")
        for name, s in self.hyperparameters.items():
            lines.append(f"  {'gp ' + name:<12} {s['median']:>11.4g}")
        if self.posterior is not None:
            p = self.posterior
            lines.append(f"  sampler: {p.walkers} walkers x {p.steps} steps, acceptance "
                         f"{p.acceptance_fraction:.2f}, autocorrelation time "
                         f"{np.max(p.autocorr_time):.1f} steps, effective samples "
                         f"{np.min(p.effective_sample_size):.0f}, "
                         + ("converged" if p.converged else "NOT CONVERGED"))
        lines.append(f"quality (Houdayer-Hartmann S, about 1 for a collapse within errors): "
                     f"{self.quality:.3g}")
        tail = self.tail()
        if tail is not None:
            lines.append(f"S(k) tail slope (k L >= {tail['kl_min']:g}, k <= {tail['kmax']:g}): "
                         f"{tail['slope']:.3f} +- {tail['slope_err']:.3f} (Porod: "
                         f"{-(self.form.dimension + 1)})")
        return "\n".join(lines)

    def to_dataset(self):
        """The collapse as an xarray Dataset."""
        import xarray as xr

        import coarsen
        from coarsen.dataset import provenance

        f = self.family
        x_units = _X_UNITS.get(f.x_name, "1")
        label_units = "sweeps" if f.parameter_name in ("time", "ramp_time") else "1"

        def var(dims, values, units, long_name):
            return xr.Variable(dims, np.asarray(values), attrs={"units": units,
                                                                "long_name": long_name})

        m = self.master
        data_vars = {
            "master_curve": var(("grid",), m.median, "1", "master curve (median)"),
            "master_curve_low68": var(("grid",), m.low68, "1", "lower end of the 68% band"),
            "master_curve_high68": var(("grid",), m.high68, "1", "upper end of the 68% band"),
            "master_curve_low95": var(("grid",), m.low95, "1", "lower end of the 95% band"),
            "master_curve_high95": var(("grid",), m.high95, "1", "upper end of the 95% band"),
            "point_parameter": var(("point",), self.point_label, label_units,
                                   f"curve label ({f.parameter_name}) of the fitted point"),
            "point_curve": var(("point",), self.point_curve.astype(np.int64), "1",
                               "curve index of the fitted point"),
            "point_x": var(("point",), self.point_raw_x, x_units,
                           f"abscissa ({f.x_name}) of the fitted point"),
            "point_y": var(("point",), self.point_y, "1", f"{f.observable} at the point"),
            "point_error": var(("point",), self.point_error, "1", "its standard error"),
            "rescaled_x": var(("point",), self.rescaled_x, "1",
                              "rescaled abscissa at the median exponents"),
            "rescaled_y": var(("point",), self.rescaled_y, "1",
                              "rescaled value at the median exponents"),
            "rescaled_error": var(("point",), self.rescaled_error, "1",
                                  "rescaled standard error"),
            "quality": var((), self.quality, "1",
                           "Houdayer-Hartmann collapse quality S at the median exponents"),
        }
        coords = {"grid": ("grid", m.x)}
        if self.posterior is not None:
            names = list(self.form.free) + [f"gp_{n}" for n in self.hyperparameters]
            samples = self.posterior.samples.copy()
            k = len(self.form.free)
            samples[:, k:] = np.exp(samples[:, k:])
            coords["parameter"] = ("parameter", np.array(names))
            data_vars["posterior"] = var(("sample", "parameter"), samples, "1",
                                         "posterior draws (exponents, then the Gaussian "
                                         "process's hyperparameters)")
        if self.wave_number:
            data_vars["point_x_fitted"] = var(("point",), self.point_x, x_units,
                                              "abscissa as fitted (wave number)")
        ds = xr.Dataset(data_vars, coords=coords)
        ds["grid"].attrs.update(units="1", long_name="rescaled abscissa of the master curve")
        summary = self.to_json()
        ds.attrs.update({
            "coarsen_version": coarsen.__version__,
            "form": self.form.name,
            "scaling_form": self.describe_form(),
            "observable": f.observable,
            "input": str(f.source),
            "method": self.method,
            "reference": float(self.form.reference),
            "converged": int(self.converged),
            "quality": float(self.quality),
            "seed": int(self.seed),
            "summary": json.dumps(summary, sort_keys=True),
            "provenance": provenance(),
        })
        return ds
