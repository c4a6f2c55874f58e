"""coarsen: kinetic Ising coarsening (Glauber and Kawasaki dynamics) with Numba kernels.

The public API is written out below; everything else lives in its module (for example
:mod:`coarsen.engine` for the acceptance tables and :mod:`coarsen.rng` for stream checks).
Names that need xarray (runs, datasets, lab data, measurements) are imported on first use,
so ``import coarsen`` and ``coarsen --help`` stay quick.
"""

import importlib
from importlib.metadata import PackageNotFoundError, version

from coarsen.engine import (
    advance,
    energy_per_site,
    magnetization_per_site,
    make_streams,
    substreams_needed,
)
from coarsen.lattice import CRITICAL_TEMPERATURE, Lattice
from coarsen.rng import spawn_streams
from coarsen.spec import Spec, SpecError, load_spec, parse_spec

try:
    __version__ = version("coarsen")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0+unknown"

#: Public names imported on first use: name -> module.
_LAZY = {
    "simulate": "coarsen.simulate",
    "run_spec": "coarsen.simulate",
    "RunInterrupted": "coarsen.simulate",
    "open_dataset": "coarsen.dataset",
    "write_dataset": "coarsen.dataset",
    "write_lengths_csv": "coarsen.dataset",
    "load_snapshots": "coarsen.labdata",
    "measure_snapshots": "coarsen.labdata",
    "measure": "coarsen.observables",
    "MeasurementGrid": "coarsen.observables",
    "equilibrium_energy": "coarsen.equilibrium",
    "fit_growth": "coarsen.fit",
    "fit_collapse": "coarsen.fit",
    "open_sweep": "coarsen.sweep",
    "run_sweep": "coarsen.sweep",
    "load_sweep": "coarsen.sweep_file",
}

__all__ = [
    # functions
    "advance",
    "energy_per_site",
    "equilibrium_energy",
    "fit_collapse",
    "fit_growth",
    "load_snapshots",
    "load_spec",
    "load_sweep",
    "magnetization_per_site",
    "make_streams",
    "measure",
    "measure_snapshots",
    "open_dataset",
    "open_sweep",
    "parse_spec",
    "run_spec",
    "run_sweep",
    "simulate",
    "spawn_streams",
    "substreams_needed",
    "write_dataset",
    "write_lengths_csv",
    # classes
    "Lattice",
    "MeasurementGrid",
    "Spec",
    # exceptions
    "RunInterrupted",
    "SpecError",
    # constants
    "CRITICAL_TEMPERATURE",
]


def __getattr__(name):
    if name in _LAZY:
        value = getattr(importlib.import_module(_LAZY[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'coarsen' has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(_LAZY))
