"""Figures, one function per kind; :mod:`coarsen.plot` chooses and saves them."""

from coarsen.plots.configurations import plot_seeded, plot_snapshots, staggered
from coarsen.plots.curves import plot_collapse, plot_posterior, plot_structure
from coarsen.plots.growth import fit_band, plot_exponent, plot_growth
from coarsen.plots.protocol import plot_protocol
from coarsen.plots.style import save_figure

__all__ = ["fit_band", "plot_collapse", "plot_exponent", "plot_growth", "plot_posterior",
           "plot_protocol", "plot_seeded", "plot_snapshots", "plot_structure", "save_figure",
           "staggered"]
