"""The jit options of every kernel, in one place.

``fastmath`` stays off everywhere: acceptance decisions compare integers, and the few
floating-point reductions are done outside the kernels in a fixed order.
"""

import numba

__all__ = ["jit_serial", "jit_parallel", "jit_inline"]

#: Options of a serial kernel.
SERIAL = {"nogil": True, "cache": True, "fastmath": False, "boundscheck": False}
#: Options of a kernel that runs ``prange`` loops over replicas or row blocks.
PARALLEL = {**SERIAL, "parallel": True}
#: Options of a small helper inlined into its callers at the Numba IR level.
INLINE = {**SERIAL, "inline": "always"}

jit_serial = numba.njit(**SERIAL)
jit_parallel = numba.njit(**PARALLEL)
jit_inline = numba.njit(**INLINE)
