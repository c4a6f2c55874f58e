"""Glauber dynamics with sublattice (checkerboard) updates.

A sweep updates every site of colour 0, then every site of colour 1 (and 2 on the triangular
lattice); sites of one colour have no bond between them, so each colour is one parallel step.
Random words come from one stream per *row block* (``block_rows``), consumed row by row: each
row draws ``ceil(n / (2 * LANES))`` whole blocks for its n sites of the colour and uses word m
for its m-th site. Results therefore depend on the block layout, never on the thread count.

Bipartite lattices (chain, square, cubic) use the colour-split layout: ``halves[r, c, row, m]``
is the spin at ``x = 2 m + ((row_parity[row] + c) & 1)`` of that row, so a colour's sites in a
row are contiguous and the update loop vectorises. The decision "new spin up" is the test
``w >> 1 <= limit[old, f]`` of the other kernels, written without a table lookup: for the few
field values f_j that occur in a row, ``OR_j (f == f_j AND w >> 1 <= limit[old, f_j])``.
"""

import numpy as np
from numba import prange

from coarsen.kernels._options import jit_inline, jit_parallel, jit_serial
from coarsen.kernels.geometry import local_field
from coarsen.kernels.random_words import LANES, fill_draws

__all__: list[str] = []



@jit_parallel
def split_colours(spins, row_parity, halves):
    """Copy plain rows ``spins`` (R, rows, nx) into colour-split ``halves`` (R, 2, rows, nx/2)."""
    n_rep, rows, nx = spins.shape
    h = nx // 2
    for task in prange(n_rep * rows):
        r = task // rows
        row = task - r * rows
        p = row_parity[row] & 1
        src = spins[r, row]
        for m in range(h):
            halves[r, 0, row, m] = src[2 * m + p]
            halves[r, 1, row, m] = src[2 * m + 1 - p]


@jit_parallel
def merge_colours(halves, row_parity, spins):
    """Inverse of :func:`split_colours`."""
    n_rep, rows, nx = spins.shape
    h = nx // 2
    for task in prange(n_rep * rows):
        r = task // rows
        row = task - r * rows
        p = row_parity[row] & 1
        dst = spins[r, row]
        for m in range(h):
            dst[2 * m + p] = halves[r, 0, row, m]
            dst[2 * m + 1 - p] = halves[r, 1, row, m]


@jit_inline
def _span(me, tsum, left, right, words, lo, hi, shift, plus, minus, fields, n_thr):
    """Update ``me[lo:hi]``; site m has in-row neighbours ``left[m]`` and ``right[m + shift]``.

    ``fields[j]`` is the j-th field value that occurs in the row and ``plus[j]``/``minus[j]``
    its threshold for old spin +1/-1. The decision is the mask expression
    ``OR_j (field == fields[j] AND w >> 1 <= threshold_j)``: no table lookup, and only 8-bit
    and 32-bit lanes, so the loop vectorises. Thresholds and fields are copied to scalars so
    that the compiler keeps them in registers (stores to ``me`` could otherwise alias them),
    and the explicit narrowing casts undo Numba's promotion of small integers to int64.
    """
    p0 = plus[0]
    p1 = plus[1]
    p2 = plus[2]
    p3 = plus[3]
    p4 = plus[4]
    p5 = plus[5]
    p6 = plus[6]
    q0 = minus[0]
    q1 = minus[1]
    q2 = minus[2]
    q3 = minus[3]
    q4 = minus[4]
    q5 = minus[5]
    q6 = minus[6]
    f0 = fields[0]
    f1 = fields[1]
    f2 = fields[2]
    f3 = fields[3]
    f4 = fields[4]
    f5 = fields[5]
    f6 = fields[6]
    changed = np.int32(0)
    for m in range(lo, hi):
        field = np.int8(tsum[m] + left[m] + right[m + shift])
        old = me[m]
        was_up = old > 0
        x = np.int32(words[m] >> np.uint32(1))
        up = (((field == f0) & (x <= (p0 if was_up else q0)))
              | ((field == f1) & (x <= (p1 if was_up else q1)))
              | ((field == f2) & (x <= (p2 if was_up else q2))))
        if n_thr > 3:
            up = (up | ((field == f3) & (x <= (p3 if was_up else q3)))
                  | ((field == f4) & (x <= (p4 if was_up else q4))))
        if n_thr > 5:
            up = (up | ((field == f5) & (x <= (p5 if was_up else q5)))
                  | ((field == f6) & (x <= (p6 if was_up else q6))))
        new = np.int8(1) if up else np.int8(-1)
        changed = np.int32(changed + np.int32(new != old))
        me[m] = new
    return np.int64(changed)


@jit_inline
def _row(me, other, row, parity, nbrs, words, tsum, table, plus, minus, fields, periodic,
         n_thr):
    h = me.shape[0]
    z = (table.shape[1] - 1) // 2
    for m in range(h):
        tsum[m] = 0
    present = 0
    for q in range(nbrs.shape[1]):
        nb = nbrs[row, q]
        if nb >= 0:
            present += 1
            src = other[nb]
            for m in range(h):
                tsum[m] = np.int8(tsum[m] + src[m])
    z_row = present + 2
    # The field values -z_row, -z_row + 2, ..., z_row of the row's inner sites.
    for j in range(n_thr):
        if j <= z_row:
            fields[j] = 2 * j - z_row
            plus[j] = table[1, 2 * j - z_row + z]
            minus[j] = table[0, 2 * j - z_row + z]
        else:
            fields[j] = 127  # matches no field
            plus[j] = -1
            minus[j] = -1
    mid = other[row]
    changed = 0
    # parity 0: in-row neighbours at m - 1 and m; parity 1: at m and m + 1.
    if parity == 0:
        edge = 0
        changed += _span(me, tsum, mid, mid, words, 1, h, -1, plus, minus, fields, n_thr)
        wrap = h - 1
    else:
        edge = h - 1
        changed += _span(me, tsum, mid, mid, words, 0, h - 1, 1, plus, minus, fields, n_thr)
        wrap = 0
    field = np.int64(tsum[edge]) + mid[edge]
    if periodic:
        field += mid[wrap]
    old = me[edge]
    x = np.int32(words[edge] >> np.uint32(1))
    new = np.int8(1) if x <= table[(old + 1) >> 1, field + z] else np.int8(-1)
    changed += np.int64(new != old)
    me[edge] = new
    return changed


def _make_block(n_thr):
    """Update one row block of one colour; compiled once per threshold count n_thr (3, 5, 7
    for chain, square, cubic), a constant the vectorised loop needs at compile time."""

    @jit_serial
    def block(halves, states, tables, row_parity, row_neighbours, block_rows, r, b, c, t,
              periodic):
        me_all = halves[r, c]
        other = halves[r, 1 - c]
        h = halves.shape[3]
        n_blocks = (h + 2 * LANES - 1) // (2 * LANES)
        buffer = np.empty(n_blocks * LANES, dtype=np.uint64)
        words = buffer.view(np.uint32)
        tsum = np.empty(h, dtype=np.int8)
        plus = np.empty(8, dtype=np.int32)
        minus = np.empty(8, dtype=np.int32)
        fields = np.empty(8, dtype=np.int8)
        table = tables[min(t, tables.shape[0] - 1)]
        state = states[r, b]
        changed = 0
        for row in range(block_rows[b], block_rows[b + 1]):
            fill_draws(state, buffer, n_blocks)
            parity = (row_parity[row] + c) & 1
            changed += _row(me_all[row], other, row, parity, row_neighbours, words, tsum, table,
                            plus, minus, fields, periodic, n_thr)
        return changed

    return block


_block_3 = _make_block(3)
_block_5 = _make_block(5)
_block_7 = _make_block(7)


@jit_parallel
def glauber_checkerboard_bipartite(halves, states, up_limits, row_parity, row_neighbours,
                                   block_rows, periodic, sweeps, flips):
    """Advance colour-split configurations by ``sweeps`` two-colour sweeps, in place.

    Parameters
    ----------
    halves : ndarray of shape (R, 2, rows, nx // 2) and dtype int8
        Colour-split configurations (:func:`split_colours`), modified in place.
    states : ndarray of shape (R, S, 4 * LANES) and dtype uint64
        One stream per replica and row block, advanced in place.
    up_limits : ndarray of shape (n_tables, 2, 2 z + 1) and dtype int32
        Thresholds indexed by [table, (old + 1) // 2, field + z]; table t is used in sweep t
        (the last one for later sweeps).
    row_parity : ndarray of shape (rows,) and dtype int64
        Sum of the coordinates other than x of each row.
    row_neighbours : ndarray of shape (rows, 2 (d - 1)) and dtype int64
        Rows holding the neighbours across y and z, -1 across an open edge.
    block_rows : ndarray of shape (S + 1,) and dtype int64
        Row block b is rows ``block_rows[b]:block_rows[b + 1]``.
    periodic : bool
        Periodic (True) or open boundaries along x (other axes come with row_neighbours).
    sweeps : int
        Number of sweeps.
    flips : ndarray of shape (R,) and dtype int64
        Incremented by the number of spins that changed.
    """
    n_rep = halves.shape[0]
    n_sub = block_rows.shape[0] - 1
    counts = np.zeros(n_rep * n_sub, dtype=np.int64)
    if n_rep > 1:
        # Several replicas: each thread sweeps whole replicas, with no barrier between colour
        # steps, so a thread slowed by another process delays only its own replicas, and a
        # replica's spins stay in that core's cache.
        for r in prange(n_rep):
            for t in range(sweeps):
                for c in range(2):
                    for b in range(n_sub):
                        _block_any(halves, states, up_limits, row_parity, row_neighbours,
                                   block_rows, r, b, c, t, periodic, counts)
    else:
        # One lattice: the row blocks of each colour step in parallel.
        for t in range(sweeps):
            for c in range(2):
                for task in prange(n_sub):
                    _block_any(halves, states, up_limits, row_parity, row_neighbours,
                               block_rows, 0, task, c, t, periodic, counts)
    for task in range(n_rep * n_sub):
        flips[task // n_sub] += counts[task]


@jit_inline
def _block_any(halves, states, up_limits, row_parity, row_neighbours, block_rows, r, b, c, t,
               periodic, counts):
    """Update row block b of colour c of replica r with the variant for its coordination."""
    n_thr = row_neighbours.shape[1] + 3
    slot = r * (block_rows.shape[0] - 1) + b
    if n_thr == 3:
        counts[slot] += _block_3(halves, states, up_limits, row_parity, row_neighbours,
                                 block_rows, r, b, c, t, periodic)
    elif n_thr == 5:
        counts[slot] += _block_5(halves, states, up_limits, row_parity, row_neighbours,
                                 block_rows, r, b, c, t, periodic)
    else:
        counts[slot] += _block_7(halves, states, up_limits, row_parity, row_neighbours,
                                 block_rows, r, b, c, t, periodic)


@jit_parallel
def glauber_checkerboard_triangular(spins, states, up_limits, dims, periodic, block_rows,
                                    sweeps, flips):
    """Advance triangular configurations by ``sweeps`` three-colour sweeps, in place.

    Colour c holds the sites with ``(x + y) % 3 == c``; a row of colour c has ``nx // 3``
    sites. ``spins`` has shape (R, N) (flat, plain layout); ``up_limits`` is indexed by
    [table, (old + 1) // 2, field + 6] as in the random-sequential kernel; the other
    parameters are those of :func:`glauber_checkerboard_bipartite`.
    """
    n_rep = spins.shape[0]
    n_sub = block_rows.shape[0] - 1
    nx = dims[0]
    ny = dims[1]
    per_row = nx // 3
    n_blocks = (per_row + 2 * LANES - 1) // (2 * LANES)
    counts = np.zeros(n_rep * n_sub, dtype=np.int64)
    for t in range(sweeps):
        table = up_limits[min(t, up_limits.shape[0] - 1)]
        for c in range(3):
            for task in prange(n_rep * n_sub):
                r = task // n_sub
                b = task - r * n_sub
                s = spins[r]
                buffer = np.empty(n_blocks * LANES, dtype=np.uint64)
                words = buffer.view(np.uint32)
                changed = 0
                for y in range(block_rows[b], block_rows[b + 1]):
                    fill_draws(states[r, b], buffer, n_blocks)
                    x0 = (c - y) % 3
                    for m in range(per_row):
                        x = x0 + 3 * m
                        site = y * nx + x
                        field = local_field(s, x, y, 0, nx, ny, 1, 2, periodic)
                        old = s[site]
                        w = np.int32(words[m] >> np.uint32(1))
                        new = np.int8(1) if w <= table[(old + 1) >> 1, field + 6] else np.int8(-1)
                        changed += np.int64(new != old)
                        s[site] = new
                counts[task] += changed
    for task in range(n_rep * n_sub):
        flips[task // n_sub] += counts[task]
