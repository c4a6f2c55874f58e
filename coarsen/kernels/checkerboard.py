"""Glauber dynamics with sublattice (checkerboard) updates.

A sweep updates every site of colour 0, then every site of colour 1 (and 2 on the triangular
lattice); sites of one colour have no bond between them, so each colour is one parallel step.
Random words come from one stream per *row block* (``block_rows``), consumed row by row: each
row draws ``ceil(n / (2 * LANES))`` whole blocks for its n sites of the colour and uses word m
for its m-th site. Results therefore depend on the block layout, never on the thread count.

Bipartite lattices (chain, square, cubic) use the colour-split layout: ``halves[r, c, row, m]``
is the spin at ``x = 2 m + ((row_parity[row] + c) & 1)`` of that row, so a colour's sites in a
row are contiguous and the update loop vectorises. The decision "flip" is the test
``w >> 1 <= limit[old, f]`` of the other kernels, written without a table lookup: for the few
field values f_j that occur in a row, ``OR_j (f == f_j AND w >> 1 <= limit[old, f_j])``.
Rows are updated in *runs* of consecutive rows whose neighbour rows across y and z are
consecutive too (at most ``RUN_SITES`` sites), so that the sums over those neighbours are
one long vector loop over the run rather than four short ones per row, and for periodic rows
of whole draws the decisions too: a 128^3 lattice has rows of only 64 sites of a colour.
The flat indexing into whole colour arrays (no per-row array views) avoids reference-count
updates in the row loop.
"""

import numpy as np
from numba import prange

from coarsen.kernels._options import jit_inline, jit_parallel, jit_serial
from coarsen.kernels.geometry import local_field
from coarsen.kernels.random_words import LANES, fill_draws

__all__: list[str] = []

#: Sites of one colour updated as one run of rows (the run's scratch stays in L1).
RUN_SITES = 4096


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
def _run_length(nbrs, row, stop, cap):
    """Number of rows from ``row`` (at most ``cap``, before ``stop``) that form one *run*.

    In a run every transverse neighbour row is present for all rows or for none, and rows
    ``row + k`` have neighbour rows ``nbrs[row, q] + k``: each neighbour of the run is then
    one contiguous span of the other colour's array.
    """
    n = 1
    while n < cap and row + n < stop:
        for q in range(nbrs.shape[1]):
            first = nbrs[row, q]
            here = nbrs[row + n, q]
            if (first < 0) != (here < 0) or (first >= 0 and here != first + n):
                return n
        n += 1
    return n


@jit_inline
def _transverse_sums(tsum, other, row, n_run, nbrs, h):
    """Set ``tsum[i]``, i < n_run h, to the sum of the other colour at the same position and
    in the present transverse neighbour rows; return the number of those rows present."""
    n = n_run * h
    mid = row * h
    n_nb = nbrs.shape[1]
    present = 0
    for q in range(n_nb):
        if nbrs[row, q] >= 0:
            present += 1
    if present == 4 and n_nb == 4:
        a = nbrs[row, 0] * h
        b = nbrs[row, 1] * h
        c = nbrs[row, 2] * h
        d = nbrs[row, 3] * h
        for i in range(n):
            tsum[i] = np.int8(other[np.uint64(mid + i)] + other[np.uint64(a + i)]
                              + other[np.uint64(b + i)] + other[np.uint64(c + i)]
                              + other[np.uint64(d + i)])
    elif present == 2 and n_nb == 2:
        a = nbrs[row, 0] * h
        b = nbrs[row, 1] * h
        for i in range(n):
            tsum[i] = np.int8(other[np.uint64(mid + i)] + other[np.uint64(a + i)]
                              + other[np.uint64(b + i)])
    else:
        for i in range(n):
            tsum[i] = other[np.uint64(mid + i)]
        for q in range(n_nb):
            nb = nbrs[row, q]
            if nb >= 0:
                for i in range(n):
                    tsum[i] = np.int8(tsum[i] + other[np.uint64(nb * h + i)])
    return present


@jit_inline
def _add_lateral(tsum, t0, other, o0, h, parity, periodic):
    """Add the in-row neighbour that ``tsum`` lacks: ``other[m - 1]`` (parity 0) or
    ``other[m + 1]`` (parity 1) of the row at ``o0``; across the row's end the wrapped site if
    periodic, nothing if open."""
    if parity == 0:
        for m in range(1, h):
            tsum[np.uint64(t0 + m)] = np.int8(tsum[np.uint64(t0 + m)]
                                              + other[np.uint64(o0 + m - 1)])
        edge = 0
        wrap = h - 1
    else:
        for m in range(h - 1):
            tsum[np.uint64(t0 + m)] = np.int8(tsum[np.uint64(t0 + m)]
                                              + other[np.uint64(o0 + m + 1)])
        edge = h - 1
        wrap = 0
    if periodic:
        tsum[np.uint64(t0 + edge)] = np.int8(tsum[np.uint64(t0 + edge)]
                                             + other[np.uint64(o0 + wrap)])


@jit_inline
def _set_thresholds(table, z_row, plus, minus, fields, n_thr):
    """The field values -z_row, -z_row + 2, ..., z_row of sites with z_row neighbours, and
    their thresholds for old spin +1 (``plus``) and -1 (``minus``); unused slots match nothing."""
    z = (table.shape[1] - 1) // 2
    for j in range(n_thr):
        if j <= z_row:
            fields[j] = 2 * j - z_row
            plus[j] = table[1, 2 * j - z_row + z]
            minus[j] = table[0, 2 * j - z_row + z]
        else:
            fields[j] = 127
            plus[j] = -1
            minus[j] = -1


@jit_inline
def _decide(me, m0, tsum, t0, words, w0, n, plus, minus, fields, n_thr):
    """Update ``me[m0:m0 + n]``; site i has neighbour sum ``tsum[t0 + i]`` and the random word
    ``words[w0 + i]``.

    ``fields[j]`` is the j-th field value that occurs and ``plus[j]``/``minus[j]`` its
    threshold for old spin +1/-1. The decision is the mask expression
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
    for i in range(n):
        field = tsum[np.uint64(t0 + i)]
        old = me[np.uint64(m0 + i)]
        was_up = old > 0
        x = np.int32(words[np.uint64(w0 + i)] >> np.uint32(1))
        flip = (((field == f0) & (x <= (p0 if was_up else q0)))
                | ((field == f1) & (x <= (p1 if was_up else q1)))
                | ((field == f2) & (x <= (p2 if was_up else q2))))
        if n_thr > 3:
            flip = (flip | ((field == f3) & (x <= (p3 if was_up else q3)))
                    | ((field == f4) & (x <= (p4 if was_up else q4))))
        if n_thr > 5:
            flip = (flip | ((field == f5) & (x <= (p5 if was_up else q5)))
                    | ((field == f6) & (x <= (p6 if was_up else q6))))
        new = np.int8(-old) if flip else old
        changed = np.int32(changed + np.int32(flip))
        me[np.uint64(m0 + i)] = new
    return np.int64(changed)


@jit_inline
def _decide_edge(me, m, field, x_word, table):
    """The table decision for one site (an edge site of an open row, which has one neighbour
    fewer than the inner sites, so the mask expression of :func:`_decide` does not cover it)."""
    z = (table.shape[1] - 1) // 2
    old = me[np.uint64(m)]
    x = np.int32(x_word >> np.uint32(1))
    new = np.int8(-old) if x <= table[(old + 1) >> 1, field + z] else old
    me[np.uint64(m)] = new
    return np.int64(new != old)


def _make_block(n_thr):
    """Update one row block of one colour; compiled once per threshold count n_thr (3, 5, 7
    for chain, square, cubic), a constant the vectorised loop needs at compile time.

    The block's rows go in runs (:func:`_run_length`) of at most ``RUN_SITES`` sites: the
    words of the whole run are drawn at once (row after row, the same words as row by row),
    the neighbour sums across rows are one long vector loop over the run, and the in-row
    neighbour is added row by row. With periodic rows whose words fill whole draws, site i of
    the run takes word i, so the decisions are one vector loop over the run; otherwise they
    go row by row, the edge site of an open row apart.
    """

    @jit_serial
    def block(halves, states, tables, row_parity, row_neighbours, block_rows, r, b, c, t,
              periodic):
        rows = halves.shape[2]
        h = halves.shape[3]
        me = halves[r, c].reshape(rows * h)
        other = halves[r, 1 - c].reshape(rows * h)
        n_blocks = (h + 2 * LANES - 1) // (2 * LANES)
        per_row = n_blocks * 2 * LANES
        cap = max(1, RUN_SITES // h)
        buffer = np.empty(cap * n_blocks * LANES, dtype=np.uint64)
        words = buffer.view(np.uint32)
        tsum = np.empty(cap * h, dtype=np.int8)
        plus = np.empty(8, dtype=np.int32)
        minus = np.empty(8, dtype=np.int32)
        fields = np.empty(8, dtype=np.int8)
        table = tables[min(t, tables.shape[0] - 1)]
        state = states[r, b]
        whole = periodic and per_row == h
        changed = 0
        row = block_rows[b]
        stop = block_rows[b + 1]
        while row < stop:
            n_run = _run_length(row_neighbours, row, stop, cap)
            fill_draws(state, buffer, n_run * n_blocks)
            present = _transverse_sums(tsum, other, row, n_run, row_neighbours, h)
            _set_thresholds(table, present + 2, plus, minus, fields, n_thr)
            for k in range(n_run):
                parity = (row_parity[row + k] + c) & 1
                _add_lateral(tsum, k * h, other, (row + k) * h, h, parity, periodic)
            # One decision loop over the whole run, or one per row (the edge site of an open
            # row apart); a single call site keeps one copy of the vector loop.
            for k in range(1 if whole else n_run):
                parity = (row_parity[row + k] + c) & 1
                lo = 0 if periodic else (1 if parity == 0 else 0)
                n = n_run * h if whole else (h if periodic else h - 1)
                changed += _decide(me, (row + k) * h + lo, tsum, k * h + lo, words,
                                   k * per_row + lo, n, plus, minus, fields, n_thr)
                if not periodic:
                    edge = 0 if parity == 0 else h - 1
                    changed += _decide_edge(me, (row + k) * h + edge, tsum[k * h + edge],
                                            words[k * per_row + edge], table)
            row += n_run
        return changed

    return block


_block_3 = _make_block(3)
_block_5 = _make_block(5)
_block_7 = _make_block(7)


@jit_parallel
def glauber_checkerboard_bipartite(halves, states, flip_limits, row_parity, row_neighbours,
                                   block_rows, periodic, sweeps, flips):
    """Advance colour-split configurations by ``sweeps`` two-colour sweeps, in place.

    Parameters
    ----------
    halves : ndarray of shape (R, 2, rows, nx // 2) and dtype int8
        Colour-split configurations (:func:`split_colours`), modified in place.
    states : ndarray of shape (R, S, 4 * LANES) and dtype uint64
        One stream per replica and row block, advanced in place.
    flip_limits : ndarray of shape (n_tables, 2, 2 z + 1) and dtype int32
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
                        _block_any(halves, states, flip_limits, row_parity, row_neighbours,
                                   block_rows, r, b, c, t, periodic, counts)
    else:
        # One lattice: the row blocks of each colour step in parallel.
        for t in range(sweeps):
            for c in range(2):
                for task in prange(n_sub):
                    _block_any(halves, states, flip_limits, row_parity, row_neighbours,
                               block_rows, 0, task, c, t, periodic, counts)
    for task in range(n_rep * n_sub):
        flips[task // n_sub] += counts[task]


@jit_inline
def _block_any(halves, states, flip_limits, row_parity, row_neighbours, block_rows, r, b, c, t,
               periodic, counts):
    """Update row block b of colour c of replica r with the variant for its coordination."""
    n_thr = row_neighbours.shape[1] + 3
    slot = r * (block_rows.shape[0] - 1) + b
    if n_thr == 3:
        counts[slot] += _block_3(halves, states, flip_limits, row_parity, row_neighbours,
                                 block_rows, r, b, c, t, periodic)
    elif n_thr == 5:
        counts[slot] += _block_5(halves, states, flip_limits, row_parity, row_neighbours,
                                 block_rows, r, b, c, t, periodic)
    else:
        counts[slot] += _block_7(halves, states, flip_limits, row_parity, row_neighbours,
                                 block_rows, r, b, c, t, periodic)


@jit_parallel
def glauber_checkerboard_triangular(spins, states, flip_limits, dims, periodic, block_rows,
                                    sweeps, flips):
    """Advance triangular configurations by ``sweeps`` three-colour sweeps, in place.

    Colour c holds the sites with ``(x + y) % 3 == c``; a row of colour c has ``nx // 3``
    sites. ``spins`` has shape (R, N) (flat, plain layout); ``flip_limits`` is indexed by
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
        table = flip_limits[min(t, flip_limits.shape[0] - 1)]
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
                        new = np.int8(-old) if w <= table[(old + 1) >> 1, field + 6] else old
                        changed += np.int64(new != old)
                        s[site] = new
                counts[task] += changed
    for task in range(n_rep * n_sub):
        flips[task // n_sub] += counts[task]
