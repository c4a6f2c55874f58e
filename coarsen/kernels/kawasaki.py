"""Kawasaki spin-exchange dynamics (conserved magnetization), random-sequential.

Local exchange: attempt k of a sweep (N attempts) consumes ``d + 2`` consecutive 32-bit words
of the replica's stream: one per coordinate of site a (x first), one choosing the bond
direction ``j`` in ``[0, z)`` (the neighbour b = a + ``offsets[j]``) and the acceptance word
``w``. Equal spins, or a neighbour across an open edge, leave the attempt without effect.

Nonlocal exchange: attempt k consumes 3 words: the index of an up spin in the list of up
spins, the index of a down spin in the list of down spins, and ``w``. The lists are rebuilt
in site order at the start of every sweep and updated by swapping entries on every exchange.

Both exchange the two spins when ``w >> 1 <= exchange_limits[t, q + 2 z]`` with
``q = s_a (f_a - f_b) + 2 [a, b adjacent]``, f the neighbour sums before the move; the energy
change is ``2 J q`` (the field h cancels because one up and one down spin swap).
Leftover words are discarded at the end of every sweep, as in the Glauber kernel.
"""

import numpy as np
from numba import prange

from coarsen.kernels._options import jit_inline, jit_parallel, jit_serial
from coarsen.kernels.geometry import (
    SQUARE,
    local_field,
    neighbour_index,
    periodic_neighbours,
    prefetch,
    prefetch_site,
)
from coarsen.kernels.random_words import LANES, fill_draws, scale_word

__all__: list[str] = []

ATTEMPTS_PER_BLOCK = 256
PREFETCH_DISTANCE = 12
PREFETCH_MIN_SITES = 1 << 20


@jit_inline
def _coordinates(site, nx, ny):
    x = site % nx
    rest = site // nx
    return x, rest % ny, rest // ny


def _make_local_sweep(fixed_kind):
    """One replica's sweep; ``fixed_kind >= 0`` compiles a copy for periodic lattices of that
    kind (:func:`_periodic_local_sweep_body`), whose constant geometry the compiler folds in."""

    @jit_serial
    def sweep(spins, state, limits, step_x, step_y, step_z, dims, kind, periodic, buffer,
              index):
        if fixed_kind >= 0:
            return _periodic_local_sweep_body(spins, state, limits, step_x, step_y, step_z,
                                              dims, fixed_kind, buffer, index)
        return _local_sweep_body(spins, state, limits, step_x, step_y, step_z, dims, kind,
                                 periodic, buffer, index[0], index[1], index[2])

    return sweep


@jit_inline
def _steps(steps, n_dir):
    """The (at most 6) entries of ``steps`` as a tuple of scalars, 0 past ``n_dir``."""
    return (steps[0], steps[1], steps[2] if n_dir > 2 else 0, steps[3] if n_dir > 3 else 0,
            steps[4] if n_dir > 4 else 0, steps[5] if n_dir > 5 else 0)


@jit_inline
def _select(direction, s):
    """``s[direction]`` for a 6-tuple ``s``, as a chain of selects (which vectorises)."""
    return (s[0] if direction == 0 else (s[1] if direction == 1 else (
        s[2] if direction == 2 else (s[3] if direction == 3 else (
            s[4] if direction == 4 else s[5])))))


@jit_inline
def _periodic_local_sweep_body(spins, state, limits, step_x, step_y, step_z, dims, kind,
                               buffer, index):
    """A sweep of a periodic lattice in two passes over each block of attempts.

    The first pass (vectorised) turns the words into flat indices: site a (``index[0]``),
    its partner b (``index[1]``), the neighbours of a (``index[2:z + 2]``) and those of b
    (``index[z + 2:2 z + 2]``). The second makes the exchanges one after the other.
    """
    nx = dims[0]
    ny = dims[1]
    nz = dims[2]
    n_sites = nx * ny * nz
    d = 1 if kind == 0 else (3 if kind == 3 else 2)
    n_dir = 2 if kind == 0 else (4 if kind == 1 else 6)
    shift = 2 * n_dir
    per = d + 2
    use_prefetch = n_sites >= PREFETCH_MIN_SITES
    words = buffer.view(np.uint32)
    sx = _steps(step_x, n_dir)
    sy = _steps(step_y, n_dir)
    sz = _steps(step_z, n_dir)
    moves = 0
    remaining = n_sites
    while remaining > 0:
        count = min(ATTEMPTS_PER_BLOCK, remaining)
        blocks = (count * per + 2 * LANES - 1) // (2 * LANES)
        fill_draws(state, buffer, blocks)
        for k in range(count):
            if per == 4:
                # The four words of an attempt are two whole draws: read them as such (two
                # contiguous loads) rather than word by word (a gather in the vector loop).
                low = buffer[2 * k]
                high = buffer[2 * k + 1]
                x = scale_word(np.uint32(low & np.uint64(0xFFFFFFFF)), nx)
                y = scale_word(np.uint32(low >> np.uint64(32)), ny)
                z = 0
                direction = scale_word(np.uint32(high & np.uint64(0xFFFFFFFF)), n_dir)
            else:
                base = k * per
                x = scale_word(words[base], nx)
                y = scale_word(words[base + 1], ny) if d > 1 else 0
                z = scale_word(words[base + 2], nz) if d > 2 else 0
                direction = scale_word(words[base + d], n_dir)
            xb = x + _select(direction, sx)
            xb = xb + nx if xb < 0 else (xb - nx if xb >= nx else xb)
            yb = y
            zb = z
            if d > 1:
                yb = y + _select(direction, sy)
                yb = yb + ny if yb < 0 else (yb - ny if yb >= ny else yb)
            if d > 2:
                zb = z + _select(direction, sz)
                zb = zb + nz if zb < 0 else (zb - nz if zb >= nz else zb)
            index[0, k] = (z * ny + y) * nx + x
            index[1, k] = (zb * ny + yb) * nx + xb
            a0, a1, a2, a3, a4, a5 = periodic_neighbours(x, y, z, nx, ny, nz, kind)
            b0, b1, b2, b3, b4, b5 = periodic_neighbours(xb, yb, zb, nx, ny, nz, kind)
            index[2, k] = a0
            index[3, k] = a1
            index[2 + n_dir, k] = b0
            index[3 + n_dir, k] = b1
            if n_dir > 2:
                index[4, k] = a2
                index[5, k] = a3
                index[4 + n_dir, k] = b2
                index[5 + n_dir, k] = b3
            if n_dir > 4:
                index[6, k] = a4
                index[7, k] = a5
                index[6 + n_dir, k] = b4
                index[7 + n_dir, k] = b5
        for k in range(count):
            if use_prefetch and k + PREFETCH_DISTANCE < count:
                j = k + PREFETCH_DISTANCE
                prefetch(spins, np.uint64(index[0, j]))
                prefetch(spins, np.uint64(index[1, j]))
                for q in range(2, n_dir):  # the x neighbours share a's and b's lines
                    prefetch(spins, np.uint64(index[2 + q, j]))
                    prefetch(spins, np.uint64(index[2 + n_dir + q, j]))
            a = np.uint64(index[0, k])
            b = np.uint64(index[1, k])
            sa = spins[a]
            sb = spins[b]
            fa = np.int64(0)
            fb = np.int64(0)
            for q in range(n_dir):
                fa += spins[np.uint64(index[2 + q, k])]
                fb += spins[np.uint64(index[2 + n_dir + q, k])]
            q_energy = sa * (fa - fb) + 2
            w = np.int32(words[k * per + d + 1] >> np.uint32(1))
            # No branch: whether the spins differ and whether the move is accepted are both
            # unpredictable; equal spins give a valid table index and no swap.
            swap = (sa != sb) & (w <= limits[np.uint64(q_energy + shift)])
            spins[a] = sb if swap else sa
            spins[b] = sa if swap else sb
            moves += np.int64(swap)
        remaining -= count
    return moves


@jit_inline
def _local_sweep_body(spins, state, limits, step_x, step_y, step_z, dims, kind, periodic,
                      buffer, xs, ys, zs):
    nx = dims[0]
    ny = dims[1]
    nz = dims[2]
    n_sites = nx * ny * nz
    d = 1 if kind == 0 else (3 if kind == 3 else 2)
    n_dir = step_x.shape[0]
    shift = 2 * n_dir
    per = d + 2
    use_prefetch = n_sites >= PREFETCH_MIN_SITES
    words = buffer.view(np.uint32)
    moves = 0
    remaining = n_sites
    while remaining > 0:
        count = min(ATTEMPTS_PER_BLOCK, remaining)
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
            base = k * per
            direction = scale_word(words[base + d], n_dir)
            xb = x + step_x[direction]
            inside = 0 <= xb < nx
            xb = xb + nx if xb < 0 else (xb - nx if xb >= nx else xb)
            yb = y
            zb = z
            if d > 1:
                yb = y + step_y[direction]
                inside = inside and (0 <= yb < ny)
                yb = yb + ny if yb < 0 else (yb - ny if yb >= ny else yb)
            if d > 2:
                zb = z + step_z[direction]
                inside = inside and (0 <= zb < nz)
                zb = zb + nz if zb < 0 else (zb - nz if zb >= nz else zb)
            a = (z * ny + y) * nx + x
            b = (zb * ny + yb) * nx + xb
            sa = spins[np.uint64(a)]
            sb = spins[np.uint64(b)]
            if sa == sb or not (periodic or inside):
                continue
            # Select rather than branch: acceptance is unpredictable.
            fa = local_field(spins, x, y, z, nx, ny, nz, kind, periodic)
            fb = local_field(spins, xb, yb, zb, nx, ny, nz, kind, periodic)
            q = sa * (fa - fb) + 2
            w = np.int64(words[base + d + 1] >> np.uint32(1))
            swap = w <= limits[q + shift]
            spins[np.uint64(a)] = sb if swap else sa
            spins[np.uint64(b)] = sa if swap else sb
            moves += np.int64(swap)
        remaining -= count
    return moves


_local_sweep_square_periodic = _make_local_sweep(SQUARE)
_local_sweep_any = _make_local_sweep(-1)


@jit_parallel
def kawasaki_local(spins, states, exchange_limits, offsets, dims, kind, periodic, sweeps, moves):
    """Advance every replica by ``sweeps`` sweeps of nearest-neighbour exchanges, in place.

    Parameters
    ----------
    spins : ndarray of shape (R, N) and dtype int8
        Flat configurations, modified in place.
    states : ndarray of shape (R, 4 * LANES) and dtype uint64
        One stream per replica, advanced in place.
    exchange_limits : ndarray of shape (n_tables, 4 z + 3) and dtype int32
        Integer thresholds indexed by ``q + 2 z``; table t is used in sweep t (the last one
        for later sweeps).
    offsets : ndarray of shape (z, 3) and dtype int64
        Neighbour offsets (dx, dy, dz), in the lattice's order.
    dims, kind, periodic
        As for the Glauber kernel.
    sweeps : int
        Number of sweeps.
    moves : ndarray of shape (R,) and dtype int64
        Incremented by the number of exchanges made.
    """
    n_rep = spins.shape[0]
    n_tables = exchange_limits.shape[0]
    step_x = np.ascontiguousarray(offsets[:, 0])
    step_y = np.ascontiguousarray(offsets[:, 1])
    step_z = np.ascontiguousarray(offsets[:, 2])
    for r in prange(n_rep):
        buffer = np.empty(ATTEMPTS_PER_BLOCK * 5 // 2 + LANES, dtype=np.uint64)
        index = np.empty((14, ATTEMPTS_PER_BLOCK), dtype=np.int64)
        total = 0
        for t in range(sweeps):
            table = exchange_limits[min(t, n_tables - 1)]
            if kind == SQUARE and periodic:
                total += _local_sweep_square_periodic(spins[r], states[r], table, step_x, step_y,
                                                      step_z, dims, kind, periodic, buffer,
                                                      index)
            else:
                total += _local_sweep_any(spins[r], states[r], table, step_x, step_y, step_z,
                                          dims, kind, periodic, buffer, index)
        moves[r] += total


@jit_inline
def _adjacent(a, b, offsets, dims, periodic):
    nx = dims[0]
    ny = dims[1]
    nz = dims[2]
    x, y, z = _coordinates(a, nx, ny)
    for j in range(offsets.shape[0]):
        if neighbour_index(x, y, z, offsets[j, 0], offsets[j, 1], offsets[j, 2],
                           nx, ny, nz, periodic) == b:
            return True
    return False


@jit_parallel
def kawasaki_nonlocal(spins, states, exchange_limits, offsets, dims, kind, periodic, sweeps, moves):
    """Advance every replica by ``sweeps`` sweeps of exchanges between any up and down spin.

    Parameters are those of :func:`kawasaki_local`. A replica with all spins equal is left
    unchanged (its stream still advances).
    """
    n_rep = spins.shape[0]
    n_tables = exchange_limits.shape[0]
    nx = dims[0]
    ny = dims[1]
    n_sites = spins.shape[1]
    shift = 2 * offsets.shape[0]
    for r in prange(n_rep):
        s = spins[r]
        state = states[r]
        buffer = np.empty(ATTEMPTS_PER_BLOCK * 3 // 2 + LANES, dtype=np.uint64)
        words = buffer.view(np.uint32)
        ups = np.empty(n_sites, dtype=np.int64)
        downs = np.empty(n_sites, dtype=np.int64)
        total = 0
        for t in range(sweeps):
            limits = exchange_limits[min(t, n_tables - 1)]
            # Lists in site order at every sweep, so that the result does not depend on how a
            # run is split into calls (a checkpoint holds no list order).
            n_up = 0
            n_down = 0
            for i in range(n_sites):
                if s[i] > 0:
                    ups[n_up] = i
                    n_up += 1
                else:
                    downs[n_down] = i
                    n_down += 1
            remaining = n_sites
            while remaining > 0:
                count = min(ATTEMPTS_PER_BLOCK, remaining)
                blocks = (count * 3 + 2 * LANES - 1) // (2 * LANES)
                fill_draws(state, buffer, blocks)
                remaining -= count
                if n_up == 0 or n_down == 0:
                    continue
                for k in range(count):
                    iu = scale_word(words[3 * k], n_up)
                    idn = scale_word(words[3 * k + 1], n_down)
                    a = ups[iu]
                    b = downs[idn]
                    xa, ya, za = _coordinates(a, nx, ny)
                    xb, yb, zb = _coordinates(b, nx, ny)
                    fa = local_field(s, xa, ya, za, nx, ny, dims[2], kind, periodic)
                    fb = local_field(s, xb, yb, zb, nx, ny, dims[2], kind, periodic)
                    q = fa - fb  # s_a = +1
                    if _adjacent(a, b, offsets, dims, periodic):
                        q += 2
                    w = np.int64(words[3 * k + 2] >> np.uint32(1))
                    if w <= limits[q + shift]:
                        s[a] = -1
                        s[b] = 1
                        ups[iu] = b
                        downs[idn] = a
                        total += 1
        moves[r] += total
