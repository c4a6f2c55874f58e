"""coarsen: kinetic Ising coarsening (Glauber and Kawasaki dynamics) with Numba kernels.

The public API is written out below; everything else lives in its module (for example
:mod:`coarsen.engine` for the acceptance tables and :mod:`coarsen.rng` for stream checks).
"""

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

try:
    __version__ = version("coarsen")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0+unknown"

__all__ = [
    # functions
    "advance",
    "energy_per_site",
    "magnetization_per_site",
    "make_streams",
    "spawn_streams",
    "substreams_needed",
    # classes
    "Lattice",
    # constants
    "CRITICAL_TEMPERATURE",
]
