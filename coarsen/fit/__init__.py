"""Fits with honest posteriors: growth laws L(t) and scaling collapses.

* :func:`fit_growth` (:mod:`coarsen.fit.growth`): power, offset and shifted growth laws on
  ln L, with the covariance between times from the replicas, emcee sampling with convergence
  checks, highest-density intervals, WAIC model comparison and n_eff(t).
* :func:`fit_collapse` (:mod:`coarsen.fit.collapse`): dynamic scaling of C(r, t) and
  S(k, t), the power form and families across a protocol parameter, with a Gaussian-process
  master curve (Harada 2011), emcee posteriors and the Houdayer-Hartmann quality.
* :mod:`coarsen.fit.sampling`: the sampler run, HDIs and WAIC, shared by the fits.
* :mod:`coarsen.fit.inputs`: datasets and CSV length tables, validated.
"""

from coarsen.fit.collapse import fit_collapse, tail_exponent
from coarsen.fit.collapse_inputs import CurveFamily, family_from_curves, read_curve_table
from coarsen.fit.collapse_result import CollapseFit
from coarsen.fit.growth import choose_window, fit_growth, fit_model
from coarsen.fit.inputs import GrowthData, load_growth_data, read_length_table
from coarsen.fit.result import GrowthFit
from coarsen.fit.sampling import ConvergenceWarning, hdi, summarize, waic

__all__ = [
    # functions
    "choose_window",
    "family_from_curves",
    "fit_collapse",
    "fit_growth",
    "fit_model",
    "hdi",
    "load_growth_data",
    "read_curve_table",
    "read_length_table",
    "summarize",
    "tail_exponent",
    "waic",
    # classes
    "CollapseFit",
    "CurveFamily",
    "GrowthData",
    "GrowthFit",
    # warnings
    "ConvergenceWarning",
]
