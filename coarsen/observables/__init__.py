"""Measurements on stacks of configurations: S(k), C(r), domain lengths and domains.

Every function takes a stack ``spins`` of shape ``(R, *lattice.shape)`` (R replicas or lab
shots) and returns one value, or one row, per configuration. :func:`measure` is the one call
the simulation driver and the lab-data reader make; it needs a :class:`MeasurementGrid`,
built once per lattice and mask, which holds the |k| shells and distance bins.

Modules: :mod:`~coarsen.observables.structure` (S(k), C(r), radial averages),
:mod:`~coarsen.observables.lengths` (the four length estimators),
:mod:`~coarsen.observables.domains` (cluster labelling), :mod:`~coarsen.observables.measure`.
"""

from coarsen.observables.domains import (
    domain_count,
    domain_labels,
    domain_statistics,
    largest_domain,
)
from coarsen.observables.lengths import (
    ESTIMATORS,
    correlation_crossing,
    estimate_lengths,
    moment_length,
    wall_length,
)
from coarsen.observables.measure import ORDERS, Measurements, bond_sums, measure
from coarsen.observables.structure import (
    PRECISIONS,
    MeasurementGrid,
    correlation,
    displacement_length,
    radial_correlation,
    radial_structure_factor,
    structure_and_correlation,
    structure_factor,
    wavevector_magnitude,
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
    "domain_statistics",
    "largest_domain",
    # constants
    "ESTIMATORS",
    "ORDERS",
    "PRECISIONS",
]
