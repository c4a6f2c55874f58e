"""Measurements on stacks of configurations: S(k), C(r), domain lengths and domains.

Every function takes a stack ``spins`` of shape ``(R, *lattice.shape)`` (R replicas or lab
shots) and returns one value, or one row, per configuration. :func:`measure` is the one call
the simulation driver and the lab-data reader make; it needs a :class:`MeasurementGrid`,
built once per lattice and mask, which holds the |k| shells and distance bins.

Modules: :mod:`~coarsen.observables.geometry` (|k| and |d| of the grids),
:mod:`~coarsen.observables.grid` (:class:`MeasurementGrid`: shells and bins),
:mod:`~coarsen.observables.structure` (S(k), C(r), radial averages),
:mod:`~coarsen.observables.lengths` (the four length estimators),
:mod:`~coarsen.observables.domains` (cluster labelling, the wall/bulk energy split),
:mod:`~coarsen.observables.interfaces` (interface positions along cuts) and
:mod:`~coarsen.observables._measurement` (:func:`measure`, :class:`Measurements`). Every
function that measures a stack takes ``threads`` (default ``numba.get_num_threads()``) and
gives bitwise the same results for any value.
"""

from coarsen.observables.domains import (
    MIN_DOMAIN_AREA,
    domain_count,
    domain_labels,
    seed_area,
    domain_statistics,
    energy_split,
    largest_domain,
)
from coarsen.observables.interfaces import Cut, default_cuts, interface_positions
from coarsen.observables.lengths import (
    ESTIMATORS,
    correlation_crossing,
    estimate_lengths,
    moment_length,
    wall_length,
)
from coarsen.observables._checks import PRECISIONS
from coarsen.observables._measurement import ORDERS, Measurements, bond_sums, measure
from coarsen.observables.geometry import displacement_length, wavevector_magnitude
from coarsen.observables.grid import MeasurementGrid
from coarsen.observables.structure import (
    correlation,
    radial_correlation,
    radial_structure_factor,
    structure_and_correlation,
    structure_factor,
)

__all__ = [
    # the entry point
    "measure",
    "Measurements",
    "MeasurementGrid",
    # structure factor and correlation
    "correlation",
    "displacement_length",
    "radial_correlation",
    "radial_structure_factor",
    "structure_and_correlation",
    "structure_factor",
    "wavevector_magnitude",
    # lengths
    "correlation_crossing",
    "estimate_lengths",
    "moment_length",
    "wall_length",
    # domains and energy
    "bond_sums",
    "domain_count",
    "domain_labels",
    "seed_area",
    "domain_statistics",
    "energy_split",
    "largest_domain",
    # interfaces
    "Cut",
    "default_cuts",
    "interface_positions",
    # constants
    "ESTIMATORS",
    "MIN_DOMAIN_AREA",
    "ORDERS",
    "PRECISIONS",
]
