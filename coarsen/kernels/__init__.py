"""Jitted Numba kernels: plain arrays in, no Python objects, no I/O, nothing exported.

Each kernel has exactly one Python caller above it (``coarsen.engine``, ``coarsen.rng``) that
validates its inputs. The jit options all come from :mod:`coarsen.kernels._options`.
"""

__all__: list[str] = []
