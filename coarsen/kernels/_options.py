"""The jit options of every kernel, in one place.

``fastmath`` stays off everywhere: acceptance decisions compare integers, and the few
floating-point reductions are done outside the kernels in a fixed order.

Cache location: unless ``NUMBA_CACHE_DIR`` is set, the decorators below are created after
``numba.config.CACHE_DIR`` points at :func:`coarsen._cache_dir.numba_cache_dir`, a directory
named after a hash of all kernel sources (see :mod:`coarsen._cache_dir` for why).
"""

import os

import numba

from coarsen._cache_dir import numba_cache_dir

__all__ = ["jit_serial", "jit_parallel", "jit_inline"]

# Idle OpenMP threads sleep instead of spinning between parallel regions (libgomp reads this
# when the threading layer starts, at the first parallel kernel call). Spinning threads take
# a core from the Python and NumPy work between kernel calls: on 2 cores the test suite ran
# 4x slower with the default policy. An explicit setting by the user wins.
os.environ.setdefault("OMP_WAIT_POLICY", "PASSIVE")

if not os.environ.get("NUMBA_CACHE_DIR"):
    _directory = numba_cache_dir()
    if _directory is not None:
        numba.config.CACHE_DIR = _directory

#: Options of a serial kernel.
SERIAL = {"nogil": True, "cache": True, "fastmath": False, "boundscheck": False}
#: Options of a kernel that runs ``prange`` loops over replicas or row blocks.
PARALLEL = {**SERIAL, "parallel": True}
#: Options of a small helper inlined into its callers at the Numba IR level.
INLINE = {**SERIAL, "inline": "always"}

jit_serial = numba.njit(**SERIAL)
jit_parallel = numba.njit(**PARALLEL)
jit_inline = numba.njit(**INLINE)
