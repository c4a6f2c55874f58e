"""Rejection-free continuous-time dynamics: the n-fold way for Glauber flips and Kawasaki exchanges.

The method is that of Bortz, Kalos & Lebowitz, J. Comput. Phys. 17, 10 (1975): every possible
move belongs to a *class* of moves with one common rate; a class is chosen with probability
proportional to its total rate, a move uniformly within it, the clock advances by an
exponential waiting time of the total rate, and only the classes of the moves whose rate the
event changed are updated (O(1) per event).

Moves and classes
-----------------
Glauber: the moves are the N sites. A site's class is ``2 (f + z) + (s + 1) / 2`` for spin s
and neighbour sum f in -z..z (z the lattice's coordination; an open edge only narrows the
range of f), so ``2 (2 z + 1)`` classes. Its rate per sweep is the probability that one
random-sequential attempt at it flips the spin, ``(limit[(s + 1) / 2, f + z] + 1) / 2**31``,
with the integer thresholds of the random-sequential kernel
(``coarsen.engine.flip_probabilities``), so both updates realise the same probabilities to
the last bit.

Kawasaki: the moves are the bond slots ``e = a * zf + j`` (site a, forward direction j of
``zf = z / 2``, partner ``b = a + forward[j]``); only slots joining unlike spins are in a
class, the one of ``q + 2 z`` where ``q = s_a (f_a - f_b) + 2`` and the exchange changes the
energy by ``2 J q`` (h cancels: an up and a down spin trade places). A random-sequential
attempt picks site a with probability 1/N and one of its z directions with probability 1/z,
so in one sweep (N attempts) a bond is tried 2/z times on average (once from each end): a
slot's rate per sweep is ``(2 / z) (limit[q + 2 z] + 1) / 2**31``, which makes one unit of
this clock one random-sequential sweep.

Rates are kept as integers in units of 2**-31 per sweep (Glauber) or (2/z) 2**-31 per sweep
(Kawasaki), so class totals and their sums are exact int64 numbers.

Uniform choice within a class, in site order
--------------------------------------------
Every move's class is kept in a *class array*, one int8 per move (-1: none): for Glauber the
site codes themselves, for Kawasaki one entry per bond slot. Beside it, the members of each
class are counted per 64-move word (uint8) and per 2**10, 2**14 and 2**18 moves. The k-th
member in increasing move index is found by scanning those counts down to one word, and then
within the word by comparing its 64 class bytes with the class (eight 64-bit words, a
byte-equality bit trick) and taking the k-th set bit. So the choice depends only on the
configuration and the random numbers, never on the order in which moves entered a class:
the class array and counts are rebuilt from the spins at the start of every call, and a run
split into calls of any length gives the same bits. Memory layout for speed: the 16 word
counts of one class and level-1 group are contiguous (a short scan), those of all classes of
one group are adjacent (a move changing class touches few cache lines), the higher counts
are stored class by class; the word found is the cache line of codes that the event then
updates, so the last step of the search costs no extra memory traffic (Glauber).
The event loops (:func:`_glauber_sweep`, :func:`_kawasaki_sweep`) do this search inline,
with branch-free scans of 16 counts at levels 2, 1 and 0 (the counts are padded for it) and
unsigned indices, and keep array-taking helpers with loops out of them: numba
reference-counts their array arguments at every call. They find the same member as
:func:`_select`, so the random words and the results are those of the plain search.
Within a call a site carries one int8 *code* ``2 (f + z) + (s + 1) / 2``, its spin and
neighbour sum together (for Glauber, its class); the spins are written back at the end.
A Kawasaki exchange rewrites the codes of a, b and their neighbours, then brings the class
of every bond of those sites up to date against the class array (a bond reached from both
ends is found current the second time). The codes, class array and counts are built row by
row at the start of a call (about 4 ms for Glauber and 7 ms for Kawasaki on 1024**2 sites,
measured on the 2-core development machine).

Time and random words
---------------------
Time is continuous within a sweep and every sweep [t, t + 1) starts afresh: by the
memoryless property of the exponential distribution, drawing the next event time at t from
the rates in force then is exact, so nothing is carried between sweeps but the spins and the
stream. The rates of a sweep come from its temperature table (one per sweep; the
temperature and field are constant within a sweep, the time step of a changing protocol).
Each event consumes two 64-bit draws of the replica's stream, taken in order from blocks of
``LANES`` draws: the waiting time ``-ln(((u >> 11) + 1) 2**-53) / R`` (R the total rate per
sweep) and then, if the event falls before the end of the sweep, the target
``floor(((v >> 11) 2**-53) R_int)`` in the cumulative integer rates of the classes
(R_int = sum over classes of count x rate); the class holding the target is chosen and the
member ``(target - rates of the classes before) // rate`` of it. The draws left in the block
at the end of a sweep are discarded. A sweep with total rate zero consumes nothing. The
state measured at time t is thus the state after the last event before t.
"""

import numba
import numpy as np
from numba import prange

from coarsen.kernels._options import jit_inline, jit_parallel, jit_serial
from coarsen.kernels.random_words import LANES, fill_draws

__all__: list[str] = []

#: Rates are integers in units of 2**-31 (of the per-move probability of one attempt).
RATE_ONE = 2**31
_UNIFORM = 2.0**-53
#: log2 of the moves per word and per count of each level (fan-out 16 above the words).
_WORD_BITS = 6
_LEVEL1_BITS = 10
_LEVEL2_BITS = 14
_LEVEL3_BITS = 18


@numba.extending.intrinsic
def _trailing_zeros(typingctx, word):
    """Index of the lowest set bit of a non-zero uint64 (LLVM ``cttz``)."""
    sig = numba.core.types.uint64(numba.core.types.uint64)

    def codegen(context, builder, signature, args):
        from llvmlite import ir

        return builder.cttz(args[0], ir.Constant(ir.IntType(1), 0))

    return sig, codegen


# --------------------------------------------------------------------------------------------
# class sets: counts of the members of each class at four levels, over a class array
# --------------------------------------------------------------------------------------------
@jit_serial
def new_class_sets(n_classes, n_moves):
    """Empty class sets for ``n_moves`` moves: (counts0, counts1, counts2, counts3, counts).

    ``counts0[g, c, i]`` (uint8) counts the members of class c among moves 64 w .. 64 w + 63,
    w = 16 g + i (the 16 word counts of one class and level-1 group are contiguous, those of
    all classes of one group adjacent); ``countsL[c, g]`` the members of class c among moves
    ``g 2**b_L`` .. ``(g + 1) 2**b_L - 1`` (b_L = 10, 14, 18 for L = 1, 2, 3; levels 1
    and 2 padded with zero counts to a multiple of 16 groups); ``counts[c]`` all members of
    class c. Which moves they are is read from the class array
    (one int8 per move, see :func:`padded_classes`).
    """
    groups1 = (n_moves >> _LEVEL1_BITS) + 1
    groups2 = (n_moves >> _LEVEL2_BITS) + 1
    counts0 = np.zeros((groups1, n_classes, 16), dtype=np.uint8)
    # levels 1 and 2 padded with zeros to whole runs of 16 (the scans read 16 at a time)
    counts1 = np.zeros((n_classes, ((groups1 + 15) >> 4) << 4), dtype=np.int32)
    counts2 = np.zeros((n_classes, ((groups2 + 15) >> 4) << 4), dtype=np.int32)
    counts3 = np.zeros((n_classes, (n_moves >> _LEVEL3_BITS) + 1), dtype=np.int32)
    counts = np.zeros(n_classes, dtype=np.int64)
    return counts0, counts1, counts2, counts3, counts


@jit_serial
def padded_classes(n_moves):
    """Class array for ``n_moves`` moves, all -1 (no class), padded to whole 64-move words."""
    return np.full((((n_moves + 63) >> _WORD_BITS) << _WORD_BITS) + 64, -1, dtype=np.int8)


@jit_serial
def _count_members(classes, n_moves, n_classes):
    """Class sets counting the members of every class in ``classes[:n_moves]``."""
    sets = new_class_sets(n_classes, n_moves)
    counts0, counts1, counts2, counts3, counts = sets
    for move in range(n_moves):
        c = classes[move]
        if c >= 0:
            counts0[move >> _LEVEL1_BITS, c, (move >> _WORD_BITS) & 15] += 1
    for g in range(counts0.shape[0]):
        for c in range(n_classes):
            n = 0
            for i in range(16):
                n += np.int64(counts0[g, c, i])
            counts1[c, g] = n
            counts2[c, g >> (_LEVEL2_BITS - _LEVEL1_BITS)] += n
            counts3[c, g >> (_LEVEL3_BITS - _LEVEL1_BITS)] += n
            counts[c] += n
    return sets


@jit_inline
def _count(counts0, counts1, counts2, counts3, counts, move, c, d):
    """Add ``d`` to the counts of class ``c`` that hold ``move``, at every level.

    Straight-line code on the arrays themselves (no tuple, no branch) and unsigned indices
    (no negative-index wrap-around): inlined into an event loop it adds no reference
    counting there, which a branchy helper taking arrays does (numba 0.68 then increfs and
    decrefs every array argument at each call, ~40 ns an event measured).
    """
    m = np.uint64(move)
    cu = np.uint64(c)
    counts0[m >> np.uint64(_LEVEL1_BITS), cu, (m >> np.uint64(_WORD_BITS)) & np.uint64(15)] += d
    counts1[cu, m >> np.uint64(_LEVEL1_BITS)] += d
    counts2[cu, m >> np.uint64(_LEVEL2_BITS)] += d
    counts3[cu, m >> np.uint64(_LEVEL3_BITS)] += d
    counts[cu] += d


_LOW7 = np.uint64(0x7F7F7F7F7F7F7F7F)
_BYTE_ONES = np.uint64(0x0101010101010101)
_GATHER = np.uint64(0x0102040810204080)


@jit_inline
def _equal_bytes(word, pattern):
    """Bit b set where byte b of ``word`` equals that of ``pattern`` (8 bits)."""
    x = word ^ pattern
    t = ~(((x & _LOW7) + _LOW7) | x | _LOW7)
    return ((t >> np.uint64(7)) * _GATHER) >> np.uint64(56)


@jit_serial
def _select(sets, words, c, k):
    """The move of rank ``k`` (0-based, in increasing move index) in class ``c``; ``words``
    is the class array viewed as uint64."""
    counts0, counts1, counts2, counts3, counts = sets
    j = 0
    while k >= counts3[c, j]:
        k -= counts3[c, j]
        j += 1
    j <<= 4
    while k >= counts2[c, j]:
        k -= counts2[c, j]
        j += 1
    j <<= 4
    while k >= counts1[c, j]:
        k -= counts1[c, j]
        j += 1
    i = 0
    while k >= counts0[j, c, i]:
        k -= counts0[j, c, i]
        i += 1
    w = (j << 4) + i
    pattern = np.uint64(c) * _BYTE_ONES
    base = w << 3
    mask = np.uint64(0)
    for b in range(8):
        mask |= _equal_bytes(words[base + b], pattern) << np.uint64(8 * b)
    for _ in range(k):
        mask &= mask - np.uint64(1)
    return (w << _WORD_BITS) + np.int64(_trailing_zeros(mask))


@jit_serial
def _differences(a, b):
    """Number of arrays that differ between two class-set tuples (0 when identical)."""
    bad = 0
    if not np.array_equal(a[0], b[0]):
        bad += 1
    if not np.array_equal(a[1], b[1]):
        bad += 1
    if not np.array_equal(a[2], b[2]):
        bad += 1
    if not np.array_equal(a[3], b[3]):
        bad += 1
    if not np.array_equal(a[4], b[4]):
        bad += 1
    return bad


# --------------------------------------------------------------------------------------------
# geometry, site codes, rates, random draws
# --------------------------------------------------------------------------------------------
@jit_inline
def _neighbour(x, y, z, k, forward, nx, ny, nz, periodic):
    """(index, x, y, z) of the neighbour in direction k (k < zf: +forward[k], else
    -forward[k - zf]); index -1 across an open edge."""
    zf = forward.shape[0]
    if k < zf:
        xn = x + forward[k, 0]
        yn = y + forward[k, 1]
        zn = z + forward[k, 2]
    else:
        xn = x - forward[k - zf, 0]
        yn = y - forward[k - zf, 1]
        zn = z - forward[k - zf, 2]
    if periodic:
        xn = xn + nx if xn < 0 else (xn - nx if xn >= nx else xn)
        yn = yn + ny if yn < 0 else (yn - ny if yn >= ny else yn)
        zn = zn + nz if zn < 0 else (zn - nz if zn >= nz else zn)
    elif not ((0 <= xn < nx) and (0 <= yn < ny) and (0 <= zn < nz)):
        return np.int64(-1), xn, yn, zn
    return (zn * ny + yn) * nx + xn, xn, yn, zn


@jit_inline
def _coordinates(site, nx, ny, nz):
    rest = site // nx
    x = site - rest * nx
    if nz == 1:
        return x, rest, rest - rest
    plane = rest // ny
    return x, rest - plane * ny, plane


@jit_inline
def _direction(forward, k):
    """Offset (dx, dy, dz) of direction k (k < zf: +forward[k], else -forward[k - zf])."""
    zf = forward.shape[0]
    if k < zf:
        return forward[k, 0], forward[k, 1], forward[k, 2]
    return -forward[k - zf, 0], -forward[k - zf, 1], -forward[k - zf, 2]


@jit_inline
def _row_neighbour(y, zc, dy, dz, ny, nz, periodic):
    """Start index / nx of the row at (y + dy, zc + dz); -1 across an open edge."""
    yn = y + dy
    zn = zc + dz
    if periodic:
        yn %= ny
        zn %= nz
    elif not ((0 <= yn < ny) and (0 <= zn < nz)):
        return np.int64(-1)
    return zn * ny + yn


@jit_serial
def site_codes(spins, forward, dims, periodic):
    """Code ``2 (f + z) + (s + 1) / 2`` of every site (spin s, neighbour sum f), int8, in an
    array padded with -1 to whole 64-site words (:func:`padded_classes`)."""
    nx = dims[0]
    ny = dims[1]
    nz = dims[2]
    z = 2 * forward.shape[0]
    n_sites = spins.shape[0]
    sums = np.zeros(n_sites, dtype=np.int8)
    for zc in range(nz):
        for y in range(ny):
            row = (zc * ny + y) * nx
            for k in range(z):
                dx, dy, dz = _direction(forward, k)
                other = _row_neighbour(y, zc, dy, dz, ny, nz, periodic)
                if other < 0:
                    continue
                other *= nx
                lo = min(max(0, -dx), nx)
                hi = max(min(nx, nx - dx), lo)
                for x in range(lo, hi):
                    sums[row + x] += spins[other + x + dx]
                if periodic:
                    for x in range(lo):
                        sums[row + x] += spins[other + (x + dx) % nx]
                    for x in range(hi, nx):
                        sums[row + x] += spins[other + (x + dx) % nx]
    codes = padded_classes(n_sites)
    for i in range(n_sites):
        codes[i] = 2 * (sums[i] + z) + ((spins[i] + 1) >> 1)
    return codes


@jit_serial
def _write_spins(codes, spins):
    for i in range(spins.shape[0]):
        spins[i] = 2 * (codes[i] & 1) - 1


@jit_inline
def _total_rate(counts, rates):
    total = np.int64(0)
    for c in range(counts.shape[0]):
        total += counts[c] * rates[c]
    return total


@jit_inline
def _waiting_time(draw, scale, total):
    """Exponential waiting time of total integer rate ``total`` (``scale`` units per sweep)."""
    return -np.log((np.float64(draw >> np.uint64(11)) + 1.0) * _UNIFORM) * scale / total


# --------------------------------------------------------------------------------------------
# Glauber
# --------------------------------------------------------------------------------------------
@jit_serial
def glauber_classes(codes, n_sites, n_classes):
    """Class sets of Glauber flips built from scratch: site i in class ``codes[i]``."""
    return _count_members(codes, n_sites, n_classes)


@jit_serial
def _glauber_rates(limits, rates):
    """Integer flip rates of the classes from one table of flip thresholds (2, 2 z + 1)."""
    for f in range(limits.shape[1]):
        rates[2 * f] = np.int64(limits[0, f]) + 1
        rates[2 * f + 1] = np.int64(limits[1, f]) + 1


@jit_serial
def _glauber_sweep(codes, words, counts0, counts1, counts2, counts3, counts, rates, state,
                   buffer, forward, nx, ny, nz, periodic):
    """The events of one sweep [t, t + 1) at the class rates ``rates``; returns the flips.

    Written flat on purpose: the draws, the class choice and the search for the member are
    in this body rather than in helpers that take arrays, and every hot index is unsigned.
    Numba 0.68 reference-counts the array arguments of an inlined helper with loops or
    branches at every call, and wraps negative signed indices; both together cost about a
    quarter of the time of an event (measured at L = 128 on 1024**2 sites). The levels 2, 1
    and 0 of the search scan 16 counts each without an early exit (no mispredicted loop
    exit); levels 1 and 2 are padded for that (:func:`new_class_sets`). The member found is
    the one :func:`_select` finds.
    """
    z = 2 * forward.shape[0]
    one = np.uint64(1)
    used = LANES
    clock = 0.0
    flips = 0
    total = _total_rate(counts, rates)
    while total > 0:
        # an event takes two draws: the first at an even place of a block (LANES is even)
        if used == LANES:
            fill_draws(state, buffer, 1)
            used = 0
        u = buffer[np.uint64(used)]
        clock += _waiting_time(u, np.float64(RATE_ONE), np.float64(total))
        if clock >= 1.0:
            break
        v = buffer[np.uint64(used + 1)]
        used += 2
        # the class: the first whose running sum of count x rate exceeds the target,
        # the target being the draw scaled to the integer total rate
        target = np.int64(np.float64(v >> np.uint64(11)) * _UNIFORM * np.float64(total))
        if target >= total:
            target = total - 1
        cu = np.uint64(0)
        while True:
            weight = counts[cu] * rates[cu]
            if target < weight:
                break
            target -= weight
            cu += one
        c = np.int64(cu)
        k = target // rates[cu]
        # the member of rank k, as _select: level 3, then 16 counts at each lower level
        j = np.uint64(0)
        while k >= counts3[cu, j]:
            k -= counts3[cu, j]
            j += one
        base = j << np.uint64(4)
        running = np.int64(0)
        below = np.int64(0)
        i = np.uint64(0)
        for step in range(16):
            running += counts2[cu, base + np.uint64(step)]
            if running <= k:
                i += one
                below = running
        k -= below
        base = (base + i) << np.uint64(4)
        running = np.int64(0)
        below = np.int64(0)
        i = np.uint64(0)
        for step in range(16):
            running += counts1[cu, base + np.uint64(step)]
            if running <= k:
                i += one
                below = running
        k -= below
        group = base + i
        running = np.int64(0)
        below = np.int64(0)
        i = np.uint64(0)
        for step in range(16):
            running += np.int64(counts0[group, cu, np.uint64(step)])
            if running <= k:
                i += one
                below = running
        k -= below
        w = (group << np.uint64(4)) + i
        pattern = cu * _BYTE_ONES
        first = w << np.uint64(3)
        mask = np.uint64(0)
        for b in range(8):
            mask |= _equal_bytes(words[first + np.uint64(b)], pattern) << np.uint64(8 * b)
        for _ in range(k):
            mask &= mask - one
        site = np.int64((w << np.uint64(_WORD_BITS)) + _trailing_zeros(mask))
        # the flip, and the neighbours' codes by 4 s (their sums change by twice the new spin)
        _count(counts0, counts1, counts2, counts3, counts, site, c, -1)
        _count(counts0, counts1, counts2, counts3, counts, site, c ^ 1, 1)
        codes[np.uint64(site)] = c ^ 1
        total += rates[cu ^ one] - rates[cu]
        delta = 4 * (2 * ((c ^ 1) & 1) - 1)
        x, y, zc = _coordinates(site, nx, ny, nz)
        for direction in range(z):
            n = _neighbour(x, y, zc, direction, forward, nx, ny, nz, periodic)[0]
            if n >= 0:
                nu = np.uint64(n)
                old = np.int64(codes[nu])
                _count(counts0, counts1, counts2, counts3, counts, n, old, -1)
                _count(counts0, counts1, counts2, counts3, counts, n, old + delta, 1)
                codes[nu] = old + delta
                total += rates[np.uint64(old + delta)] - rates[np.uint64(old)]
        flips += 1
    return flips


@jit_serial
def _glauber_replica(spins, state, flip_limits, forward, dims, periodic, sweeps, verify):
    """Advance one replica; returns (flips, class-set mismatches found by ``verify``)."""
    n_classes = flip_limits.shape[1] * flip_limits.shape[2]
    n_sites = spins.shape[0]
    codes = site_codes(spins, forward, dims, periodic)
    words = codes.view(np.uint64)
    sets = glauber_classes(codes, n_sites, n_classes)
    counts0, counts1, counts2, counts3, counts = sets
    rates = np.zeros(n_classes, dtype=np.int64)
    buffer = np.empty(LANES, dtype=np.uint64)
    n_tables = flip_limits.shape[0]
    flips = 0
    mismatches = 0
    for t in range(sweeps):
        _glauber_rates(flip_limits[min(t, n_tables - 1)], rates)
        flips += _glauber_sweep(codes, words, counts0, counts1, counts2, counts3, counts, rates,
                                state, buffer, forward, dims[0], dims[1], dims[2], periodic)
        if verify:
            _write_spins(codes, spins)
            fresh = site_codes(spins, forward, dims, periodic)
            mismatches += _differences(sets, glauber_classes(fresh, n_sites, n_classes))
            if not np.array_equal(codes, fresh):
                mismatches += 1
    _write_spins(codes, spins)
    return flips, mismatches


@jit_parallel
def glauber_rejection_free(spins, states, flip_limits, forward, dims, periodic, sweeps, flips,
                           verify, mismatches):
    """Advance every replica by ``sweeps`` sweeps of rejection-free Glauber dynamics, in place.

    Parameters
    ----------
    spins : ndarray of shape (R, N) and dtype int8
        Flat configurations, modified in place.
    states : ndarray of shape (R, 4 * LANES) and dtype uint64
        One stream per replica, advanced in place.
    flip_limits : ndarray of shape (n_tables, 2, 2 z + 1) and dtype int32
        The thresholds of the random-sequential kernel; table t is used in sweep t (the last
        one for later sweeps).
    forward : ndarray of shape (z / 2, 3) and dtype int64
        Forward neighbour offsets (dx, dy, dz) (``Lattice.forward_offsets``).
    dims : ndarray of shape (3,) and dtype int64
        (nx, ny, nz), 1 for unused axes.
    periodic : bool
        Periodic (True) or open boundaries.
    sweeps : int
        Number of sweeps (units of time).
    flips : ndarray of shape (R,) and dtype int64
        Incremented by the number of spins flipped.
    verify : bool
        Rebuild the class sets from scratch after every sweep and compare (debug check).
    mismatches : ndarray of shape (R,) and dtype int64
        Incremented by the number of differing arrays found by ``verify``.
    """
    for r in prange(spins.shape[0]):
        f, m = _glauber_replica(spins[r], states[r], flip_limits, forward, dims, periodic,
                                sweeps, verify)
        flips[r] += f
        mismatches[r] += m


# --------------------------------------------------------------------------------------------
# Kawasaki
# --------------------------------------------------------------------------------------------
@jit_inline
def _bond_class(code_a, code_b, z):
    """Class ``q + 2 z`` of exchanging two sites with these (unmarked) codes, -1 if alike."""
    if (code_a ^ code_b) & 1 == 0:
        return np.int64(-1)
    s_a = 2 * np.int64(code_a & 1) - 1
    return s_a * (np.int64(code_a >> 1) - np.int64(code_b >> 1)) + 2 + 2 * z


@jit_serial
def kawasaki_classes(codes, forward, dims, periodic, n_classes):
    """Class array and class sets of Kawasaki exchanges built from scratch, over the
    ``N * zf`` bond slots (slot ``a * zf + j`` joins a and its neighbour at ``forward[j]``;
    slots across an open edge and between equal spins are in no class, -1)."""
    nx = dims[0]
    ny = dims[1]
    nz = dims[2]
    zf = forward.shape[0]
    z = 2 * zf
    n_slots = (nx * ny * nz) * zf
    classes = padded_classes(n_slots)
    for zc in range(nz):
        for y in range(ny):
            row = (zc * ny + y) * nx
            for j in range(zf):
                dx = forward[j, 0]
                other = _row_neighbour(y, zc, forward[j, 1], forward[j, 2], ny, nz, periodic)
                if other < 0:
                    continue
                other *= nx
                for x in range(nx):
                    xn = x + dx
                    if xn < 0 or xn >= nx:
                        if not periodic:
                            continue
                        xn %= nx
                    a = row + x
                    classes[a * zf + j] = _bond_class(codes[a], codes[other + xn], z)
    return classes, _count_members(classes, n_slots, n_classes)


@jit_serial
def _kawasaki_rates(limits, rates):
    for c in range(limits.shape[0]):
        rates[c] = np.int64(limits[c]) + 1


@jit_serial
def _kawasaki_sweep(codes, slot_classes, words, counts0, counts1, counts2, counts3, counts,
                    rates, state, buffer, forward, nx, ny, nz, periodic, scale):
    """The events of one sweep [t, t + 1) at the class rates ``rates``; returns the exchanges.

    Written flat like :func:`_glauber_sweep`, for the same reason (numba reference-counts
    the array arguments of an inlined helper with loops or branches at every call): the
    draws, the class choice, the search for the member (the one :func:`_select` finds) and
    the updates of the bond classes are in this body, and every hot index is unsigned.
    ``scale`` is the rate units per sweep, ``(z / 2) 2**31``.
    """
    zf = forward.shape[0]
    z = 2 * zf
    zfu = np.uint64(zf)
    one = np.uint64(1)
    used = LANES
    clock = 0.0
    moves = 0
    total = _total_rate(counts, rates)
    while total > 0:
        # an event takes two draws: the first at an even place of a block (LANES is even)
        if used == LANES:
            fill_draws(state, buffer, 1)
            used = 0
        u = buffer[np.uint64(used)]
        clock += _waiting_time(u, scale, np.float64(total))
        if clock >= 1.0:
            break
        v = buffer[np.uint64(used + 1)]
        used += 2
        # the class: the first whose running sum of count x rate exceeds the target,
        # the target being the draw scaled to the integer total rate
        target = np.int64(np.float64(v >> np.uint64(11)) * _UNIFORM * np.float64(total))
        if target >= total:
            target = total - 1
        cu = np.uint64(0)
        while True:
            weight = counts[cu] * rates[cu]
            if target < weight:
                break
            target -= weight
            cu += one
        k = target // rates[cu]
        # the member of rank k, as _select: level 3, then 16 counts at each lower level
        j = np.uint64(0)
        while k >= counts3[cu, j]:
            k -= counts3[cu, j]
            j += one
        base = j << np.uint64(4)
        running = np.int64(0)
        below = np.int64(0)
        i = np.uint64(0)
        for step in range(16):
            running += counts2[cu, base + np.uint64(step)]
            if running <= k:
                i += one
                below = running
        k -= below
        base = (base + i) << np.uint64(4)
        running = np.int64(0)
        below = np.int64(0)
        i = np.uint64(0)
        for step in range(16):
            running += counts1[cu, base + np.uint64(step)]
            if running <= k:
                i += one
                below = running
        k -= below
        group = base + i
        running = np.int64(0)
        below = np.int64(0)
        i = np.uint64(0)
        for step in range(16):
            running += np.int64(counts0[group, cu, np.uint64(step)])
            if running <= k:
                i += one
                below = running
        k -= below
        w = (group << np.uint64(4)) + i
        pattern = cu * _BYTE_ONES
        first = w << np.uint64(3)
        mask = np.uint64(0)
        for byte in range(8):
            mask |= _equal_bytes(words[first + np.uint64(byte)], pattern) << np.uint64(8 * byte)
        for _ in range(k):
            mask &= mask - one
        slot = (w << np.uint64(_WORD_BITS)) + _trailing_zeros(mask)
        # the bond: site a and its neighbour b in forward direction j_ab
        au = slot // zfu
        j_ab = np.int64(slot - au * zfu)
        a = np.int64(au)
        xa, ya, za = _coordinates(a, nx, ny, nz)
        b, xb, yb, zb = _neighbour(xa, ya, za, j_ab, forward, nx, ny, nz, periodic)
        bu = np.uint64(b)
        # the exchange: spins of a and b swap, neighbour sums change by -+ 2 s_a
        delta = 4 * (2 * np.int64(codes[au] & 1) - 1)
        codes[au] ^= 1
        codes[bu] ^= 1
        for direction in range(z):
            n = _neighbour(xa, ya, za, direction, forward, nx, ny, nz, periodic)[0]
            if n >= 0:
                codes[np.uint64(n)] -= delta
            n = _neighbour(xb, yb, zb, direction, forward, nx, ny, nz, periodic)[0]
            if n >= 0:
                codes[np.uint64(n)] += delta
        # the bonds of every site whose code changed: all those of a (site 0) and b (1),
        # then those of the other neighbours of a (2 .. z + 1) and of b (z + 2 .. 2 z + 1)
        # but the bond back to a or b, done; a bond seen twice is found up to date (the
        # order does not matter: every bond ends in its class, the total is an integer sum)
        for site in range(2 * z + 2):
            back = -1
            if site == 0:
                p, x, y, zc = a, xa, ya, za
            elif site == 1:
                p, x, y, zc = b, xb, yb, zb
            else:
                kn = site - 2 if site < z + 2 else site - z - 2
                if kn == (j_ab if site < z + 2 else j_ab + zf):  # b, or a: done
                    continue
                back = kn + zf if kn < zf else kn - zf
                if site < z + 2:
                    p, x, y, zc = _neighbour(xa, ya, za, kn, forward, nx, ny, nz, periodic)
                else:
                    p, x, y, zc = _neighbour(xb, yb, zb, kn, forward, nx, ny, nz, periodic)
            if p < 0:
                continue
            pu = np.uint64(p)
            for direction in range(z):
                if direction == back:
                    continue
                q = _neighbour(x, y, zc, direction, forward, nx, ny, nz, periodic)[0]
                if q < 0:
                    continue
                qu = np.uint64(q)
                if direction < zf:
                    bond = pu * zfu + np.uint64(direction)
                    new = _bond_class(codes[pu], codes[qu], z)
                else:
                    bond = qu * zfu + np.uint64(direction - zf)
                    new = _bond_class(codes[qu], codes[pu], z)
                old = np.int64(slot_classes[bond])
                if new != old:
                    if old >= 0:
                        _count(counts0, counts1, counts2, counts3, counts, bond, old, -1)
                        total -= rates[np.uint64(old)]
                    if new >= 0:
                        _count(counts0, counts1, counts2, counts3, counts, bond, new, 1)
                        total += rates[np.uint64(new)]
                    slot_classes[bond] = new
        moves += 1
    return moves


@jit_serial
def _kawasaki_replica(spins, state, exchange_limits, forward, dims, periodic, sweeps, verify):
    """Advance one replica; returns (exchanges, class-set mismatches found by ``verify``)."""
    z = 2 * forward.shape[0]
    n_classes = exchange_limits.shape[1]
    codes = site_codes(spins, forward, dims, periodic)
    slot_classes, sets = kawasaki_classes(codes, forward, dims, periodic, n_classes)
    words = slot_classes.view(np.uint64)
    counts0, counts1, counts2, counts3, counts = sets
    rates = np.zeros(n_classes, dtype=np.int64)
    buffer = np.empty(LANES, dtype=np.uint64)
    n_tables = exchange_limits.shape[0]
    # a slot's rate per sweep is (2 / z) rate / 2**31
    scale = np.float64(RATE_ONE) * z / 2.0
    moves = 0
    mismatches = 0
    for t in range(sweeps):
        _kawasaki_rates(exchange_limits[min(t, n_tables - 1)], rates)
        moves += _kawasaki_sweep(codes, slot_classes, words, counts0, counts1, counts2,
                                 counts3, counts, rates, state, buffer, forward, dims[0],
                                 dims[1], dims[2], periodic, scale)
        if verify:
            _write_spins(codes, spins)
            fresh = site_codes(spins, forward, dims, periodic)
            fresh_classes, fresh_sets = kawasaki_classes(fresh, forward, dims, periodic,
                                                         n_classes)
            mismatches += _differences(sets, fresh_sets)
            if not np.array_equal(slot_classes, fresh_classes):
                mismatches += 1
            if not np.array_equal(codes, fresh):
                mismatches += 1
    _write_spins(codes, spins)
    return moves, mismatches


@jit_parallel
def kawasaki_rejection_free(spins, states, exchange_limits, forward, dims, periodic, sweeps,
                            moves, verify, mismatches):
    """Advance every replica by ``sweeps`` sweeps of rejection-free Kawasaki exchanges, in place.

    Parameters are those of :func:`glauber_rejection_free`, except ``exchange_limits``
    (n_tables, 4 z + 3), the thresholds of the random-sequential Kawasaki kernel indexed by
    ``q + 2 z``, and ``moves``, incremented by the exchanges made.
    """
    for r in prange(spins.shape[0]):
        m, bad = _kawasaki_replica(spins[r], states[r], exchange_limits, forward, dims,
                                   periodic, sweeps, verify)
        moves[r] += m
        mismatches[r] += bad
