"""Glauber single-spin-flip dynamics with random-sequential updates (plain lattice layout).

One sweep is N attempts. Attempt k of a sweep consumes ``d + 1`` consecutive 32-bit words of
the replica's stream (d = dimension): one per coordinate, x first, each mapped to
``[0, n_axis)`` by multiply-shift, then the acceptance word ``w``. The new spin is +1 when
``w >> 1 <= up_limits[t, (s + 1) // 2, field + z]`` and -1 otherwise, where ``s`` is the old
spin and ``field`` the sum of the neighbour spins; the table holds ``floor(p * 2**31) - 1``
for the probability ``p`` that the new spin is up (``coarsen.engine.up_probabilities``). Words are
drawn in blocks of 256 attempts; the words left over at the end of a sweep are discarded, so
a run split into calls of any length consumes the same numbers.
"""

import numpy as np
from numba import prange

from coarsen.kernels._options import jit_inline, jit_parallel, jit_serial
from coarsen.kernels.geometry import SQUARE, local_field, prefetch_site
from coarsen.kernels.random_words import LANES, fill_draws, scale_word

__all__: list[str] = []

ATTEMPTS_PER_BLOCK = 256
PREFETCH_DISTANCE = 12
PREFETCH_MIN_SITES = 1 << 20


def _make_sweep(fixed_kind):
    """One replica's sweep; ``fixed_kind >= 0`` compiles a copy for periodic lattices of that
    kind, whose constant geometry the compiler folds in (about 8% faster for the square)."""

    @jit_serial
    def sweep(spins, state, limits, dims, kind, periodic, buffer, xs, ys, zs):
        if fixed_kind >= 0:
            return _sweep_body(spins, state, limits, dims, fixed_kind, True, buffer, xs, ys, zs)
        return _sweep_body(spins, state, limits, dims, kind, periodic, buffer, xs, ys, zs)

    return sweep


@jit_inline
def _sweep_body(spins, state, limits, dims, kind, periodic, buffer, xs, ys, zs):
    nx = dims[0]
    ny = dims[1]
    nz = dims[2]
    n_sites = nx * ny * nz
    d = 1 if kind == 0 else (3 if kind == 3 else 2)
    z_coord = limits.shape[1] // 2
    words = buffer.view(np.uint32)
    flips = 0
    use_prefetch = n_sites >= PREFETCH_MIN_SITES
    n_field = limits.shape[1]
    flat_limits = limits.ravel()
    remaining = n_sites
    while remaining > 0:
        count = min(ATTEMPTS_PER_BLOCK, remaining)
        per = d + 1
        blocks = (count * per + 2 * LANES - 1) // (2 * LANES)
        fill_draws(state, buffer, blocks)
        for k in range(count):
            base = k * per
            xs[k] = scale_word(words[base], nx)
            ys[k] = scale_word(words[base + 1], ny) if d > 1 else 0
            zs[k] = scale_word(words[base + 2], nz) if d > 2 else 0
        for k in range(count):
            if use_prefetch and k + PREFETCH_DISTANCE < count:
                j = k + PREFETCH_DISTANCE
                prefetch_site(spins, xs[j], ys[j], zs[j], nx, ny, nz, kind)
            x = xs[k]
            y = ys[k]
            z = zs[k]
            site = np.uint64((z * ny + y) * nx + x)
            old = spins[site]
            field = local_field(spins, x, y, z, nx, ny, nz, kind, periodic)
            w = np.int64(words[k * per + d] >> np.uint32(1))
            limit = flat_limits[np.uint64(((old + 1) >> 1) * n_field + field + z_coord)]
            new = np.int8(1) if w <= limit else np.int8(-1)
            flips += new != old
            spins[site] = new
        remaining -= count
    return flips


_sweep_square_periodic = _make_sweep(SQUARE)
_sweep_any = _make_sweep(-1)


@jit_parallel
def glauber_random_sequential(spins, states, up_limits, dims, kind, periodic, sweeps, flips):
    """Advance every replica by ``sweeps`` random-sequential Glauber sweeps, in place.

    Parameters
    ----------
    spins : ndarray of shape (R, N) and dtype int8
        Flat configurations, modified in place.
    states : ndarray of shape (R, 4 * LANES) and dtype uint64
        One stream per replica, advanced in place.
    up_limits : ndarray of shape (n_tables, 2, 2 z + 1) and dtype int32
        Integer thresholds; table ``t`` is used in sweep t (the last one for later sweeps).
    dims : ndarray of shape (3,) and dtype int64
        (nx, ny, nz), 1 for unused axes.
    kind : int
        Lattice code of ``geometry.KIND_CODES``.
    periodic : bool
        Periodic (True) or open boundaries.
    sweeps : int
        Number of sweeps.
    flips : ndarray of shape (R,) and dtype int64
        Incremented by the number of spins that changed.
    """
    n_rep = spins.shape[0]
    n_tables = up_limits.shape[0]
    for r in prange(n_rep):
        buffer = np.empty(ATTEMPTS_PER_BLOCK * 4 // 2 + LANES, dtype=np.uint64)
        xs = np.empty(ATTEMPTS_PER_BLOCK, dtype=np.int64)
        ys = np.empty(ATTEMPTS_PER_BLOCK, dtype=np.int64)
        zs = np.empty(ATTEMPTS_PER_BLOCK, dtype=np.int64)
        total = 0
        for t in range(sweeps):
            table = up_limits[min(t, n_tables - 1)]
            if kind == SQUARE and periodic:
                total += _sweep_square_periodic(spins[r], states[r], table, dims, kind, periodic,
                                                buffer, xs, ys, zs)
            else:
                total += _sweep_any(spins[r], states[r], table, dims, kind, periodic, buffer, xs,
                                    ys, zs)
        flips[r] += total
