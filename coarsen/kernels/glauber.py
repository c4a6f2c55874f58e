"""Glauber single-spin-flip dynamics with random-sequential updates (plain lattice layout).

One sweep is N attempts. Attempt k of a sweep consumes ``d + 1`` consecutive 32-bit words of
the replica's stream (d = dimension): one per coordinate, x first, each mapped to
``[0, n_axis)`` by multiply-shift, then the acceptance word ``w``. The spin ``s`` flips when
``w >> 1 <= flip_limits[t, (s + 1) // 2, field + z]`` and stays otherwise, where ``field``
is the sum of the neighbour spins; the table holds ``floor(p * 2**31) - 1`` for the
probability ``p`` that the spin flips (``coarsen.engine.flip_probabilities``). Words are
drawn in blocks of 256 attempts; the words left over at the end of a sweep are discarded, so
a run split into calls of any length consumes the same numbers.
"""

import numpy as np
from numba import prange

from coarsen.kernels._options import jit_inline, jit_parallel, jit_serial
from coarsen.kernels.geometry import (
    SQUARE,
    local_field,
    periodic_neighbours,
    prefetch,
    prefetch_site,
)
from coarsen.kernels.random_words import LANES, fill_draws, scale_word

__all__: list[str] = []

ATTEMPTS_PER_BLOCK = 256
PREFETCH_DISTANCE = 12
PREFETCH_MIN_SITES = 1 << 20


def _make_sweep(fixed_kind):
    """One replica's sweep; ``fixed_kind >= 0`` compiles a copy for periodic lattices of that
    kind (:func:`_periodic_sweep_body`), whose constant geometry the compiler folds in."""

    @jit_serial
    def sweep(spins, state, limits, dims, kind, periodic, buffer, index):
        if fixed_kind >= 0:
            return _periodic_sweep_body(spins, state, limits, dims, fixed_kind, buffer, index)
        return _sweep_body(spins, state, limits, dims, kind, periodic, buffer, index[0],
                           index[1], index[2])

    return sweep


@jit_inline
def _periodic_sweep_body(spins, state, limits, dims, kind, buffer, index):
    """A sweep of a periodic lattice in two passes over each block of attempts.

    The first pass (vectorised) turns the coordinate words into the flat indices of the
    attempted sites (``index[0]``) and of their neighbours (``index[1:z + 1]``); the second
    makes the decisions one after the other, so it does only loads, one table lookup and a
    store per attempt. The thresholds are copied into ``lut`` with the old spin's row at
    offset 0 (spin -1) or 16 (spin +1), so the lookup index is ``((s + 1) << 3) + field + z``.
    """
    nx = dims[0]
    ny = dims[1]
    nz = dims[2]
    n_sites = nx * ny * nz
    d = 1 if kind == 0 else (3 if kind == 3 else 2)
    n_nb = 2 if kind == 0 else (4 if kind == 1 else 6)
    z_coord = limits.shape[1] // 2
    lut = np.empty(32, dtype=np.int32)
    for f in range(limits.shape[1]):
        lut[f] = limits[0, f]
        lut[16 + f] = limits[1, f]
    words = buffer.view(np.uint32)
    flips = 0
    use_prefetch = n_sites >= PREFETCH_MIN_SITES
    per = d + 1
    remaining = n_sites
    while remaining > 0:
        count = min(ATTEMPTS_PER_BLOCK, remaining)
        blocks = (count * per + 2 * LANES - 1) // (2 * LANES)
        fill_draws(state, buffer, blocks)
        for k in range(count):
            base = k * per
            x = scale_word(words[base], nx)
            y = scale_word(words[base + 1], ny) if d > 1 else 0
            z = scale_word(words[base + 2], nz) if d > 2 else 0
            index[0, k] = (z * ny + y) * nx + x
            n0, n1, n2, n3, n4, n5 = periodic_neighbours(x, y, z, nx, ny, nz, kind)
            index[1, k] = n0
            index[2, k] = n1
            if n_nb > 2:
                index[3, k] = n2
                index[4, k] = n3
            if n_nb > 4:
                index[5, k] = n4
                index[6, k] = n5
        for k in range(count):
            if use_prefetch and k + PREFETCH_DISTANCE < count:
                j = k + PREFETCH_DISTANCE
                prefetch(spins, np.uint64(index[0, j]))
                for q in range(3, n_nb + 1):
                    prefetch(spins, np.uint64(index[q, j]))
            site = np.uint64(index[0, k])
            old = spins[site]
            field = np.int64(spins[np.uint64(index[1, k])]) + spins[np.uint64(index[2, k])]
            for q in range(3, n_nb + 1):
                field += spins[np.uint64(index[q, k])]
            w = np.int32(words[k * per + d] >> np.uint32(1))
            limit = lut[np.uint64(((old + 1) << 3) + field + z_coord)]
            new = np.int8(-old) if w <= limit else old
            flips += new != old
            spins[site] = new
        remaining -= count
    return flips


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
            new = np.int8(-old) if w <= limit else old
            flips += new != old
            spins[site] = new
        remaining -= count
    return flips


_sweep_square_periodic = _make_sweep(SQUARE)
_sweep_any = _make_sweep(-1)


@jit_parallel
def glauber_random_sequential(spins, states, flip_limits, dims, kind, periodic, sweeps, flips):
    """Advance every replica by ``sweeps`` random-sequential Glauber sweeps, in place.

    Parameters
    ----------
    spins : ndarray of shape (R, N) and dtype int8
        Flat configurations, modified in place.
    states : ndarray of shape (R, 4 * LANES) and dtype uint64
        One stream per replica, advanced in place.
    flip_limits : ndarray of shape (n_tables, 2, 2 z + 1) and dtype int32
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
    n_tables = flip_limits.shape[0]
    for r in prange(n_rep):
        buffer = np.empty(ATTEMPTS_PER_BLOCK * 4 // 2 + LANES, dtype=np.uint64)
        index = np.empty((7, ATTEMPTS_PER_BLOCK), dtype=np.int64)
        total = 0
        for t in range(sweeps):
            table = flip_limits[min(t, n_tables - 1)]
            if kind == SQUARE and periodic:
                total += _sweep_square_periodic(spins[r], states[r], table, dims, kind, periodic,
                                                buffer, index)
            else:
                total += _sweep_any(spins[r], states[r], table, dims, kind, periodic, buffer,
                                    index)
        flips[r] += total
