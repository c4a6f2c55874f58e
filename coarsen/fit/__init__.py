"""Fits with honest posteriors: growth laws L(t) now, scaling collapses later.

* :func:`fit_growth` (:mod:`coarsen.fit.growth`): power, offset and shifted growth laws on
  ln L, with the covariance between times from the replicas, emcee sampling with convergence
  checks, highest-density intervals, WAIC model comparison and n_eff(t).
* :mod:`coarsen.fit.sampling`: the sampler run, HDIs and WAIC, shared by the fits.
* :mod:`coarsen.fit.inputs`: datasets and CSV length tables, validated.
"""

from coarsen.fit.growth import choose_window, fit_growth, fit_model
from coarsen.fit.inputs import GrowthData, load_growth_data, read_length_table
from coarsen.fit.result import GrowthFit
from coarsen.fit.sampling import ConvergenceWarning, hdi, summarize, waic

__all__ = [
    # functions
    "choose_window",
    "fit_growth",
    "fit_model",
    "hdi",
    "load_growth_data",
    "read_length_table",
    "summarize",
    "waic",
    # classes
    "GrowthData",
    "GrowthFit",
    # warnings
    "ConvergenceWarning",
]
