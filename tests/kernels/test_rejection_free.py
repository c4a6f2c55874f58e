"""Rejection-free (n-fold way) kernels against a brute-force twin, and their bookkeeping.

The twin below recomputes every move's rate from scratch before every event (fields by
summing neighbours, Kawasaki energy changes by recounting bonds, ``tests/reference.py``),
lists each class's members in increasing move index and reads the same random words as the
kernel (``coarsen.kernels.rejection_free`` documents the order), so it shares no
bookkeeping with the kernel: spins, stream states and event counts must agree exactly.
"""

from __future__ import annotations

import math

import numba
import numpy as np
import pytest

from coarsen.engine import advance, exchange_probabilities, flip_probabilities, make_streams
from coarsen.kernels import rejection_free as kernel
from coarsen.lattice import Lattice
from coarsen.rejection_free import _geometry, class_list_mismatches
from tests.helpers import ACCEPTANCES, BOUNDARIES, KINDS, random_spins
from tests.reference import Geometry, Stream, _exchange_q, _field, threshold

SIZES = {"chain": (31,), "square": (5, 4), "triangular": (4, 5), "cubic": (3, 3, 4)}
RATE_ONE = 2**31


# --------------------------------------------------------------------------------------------
# the twin
# --------------------------------------------------------------------------------------------
class _Draws:
    """64-bit draws of one stream, 16 per block; a fresh block at every sweep."""

    def __init__(self, stream: Stream):
        self.stream = stream
        self.block: list[int] = []

    def next(self) -> int:
        if not self.block:
            w = self.stream.draw()
            self.block = [w[2 * i] | (w[2 * i + 1] << 32) for i in range(16)]
        return self.block.pop(0)


def _glauber_moves(s, geometry, table):
    """{class: sorted sites}, {class: integer rate}."""
    z = geometry.z
    members, rates = {}, {}
    for i in range(geometry.n_sites):
        f = _field(s, i, geometry)
        c = 2 * (f + z) + (s[i] + 1) // 2
        rates[c] = threshold(table[0 if s[i] < 0 else 1][f + z]) + 1
        members.setdefault(c, []).append(i)
    return members, rates


def _kawasaki_moves(s, geometry, table):
    z = geometry.z
    zf = z // 2
    members, rates = {}, {}
    for a in range(geometry.n_sites):
        for j in range(zf):
            b = geometry.full[a][j]
            if b is None or s[a] == s[b]:
                continue
            q = _exchange_q(s, a, b, geometry)
            c = q + 2 * z
            rates[c] = threshold(table[c]) + 1
            members.setdefault(c, []).append(a * zf + j)
    return members, rates


def twin_advance(spins, streams, lattice, sweeps, temperature, rule, acceptance, J, h):
    """The n-fold way in plain Python, recounting everything before each event."""
    geometry = Geometry(lattice)
    z = geometry.z
    scale = float(RATE_ONE) if rule == "glauber" else float(RATE_ONE) * z / 2.0
    flat = spins.reshape(spins.shape[0], -1)
    events = np.zeros(spins.shape[0], dtype=np.int64)
    for r in range(flat.shape[0]):
        s = [int(v) for v in flat[r]]
        stream = Stream(streams[r, 0])
        for _ in range(sweeps):
            if rule == "glauber":
                table = flip_probabilities(temperature, z, J, h, acceptance)
            else:
                table = exchange_probabilities(temperature, z, J, acceptance)
            draws = _Draws(stream)
            clock = 0.0
            while True:
                find = _glauber_moves if rule == "glauber" else _kawasaki_moves
                members, rates = find(s, geometry, table)
                total = sum(len(m) * rates[c] for c, m in members.items())
                if total == 0:
                    break
                u = draws.next()
                clock += -math.log(((u >> 11) + 1.0) * 2.0**-53) * scale / float(total)
                if clock >= 1.0:
                    break
                target = min(int(float(draws.next() >> 11) * 2.0**-53 * float(total)), total - 1)
                for c in sorted(members):
                    weight = len(members[c]) * rates[c]
                    if target < weight:
                        move = members[c][target // rates[c]]
                        break
                    target -= weight
                if rule == "glauber":
                    s[move] = -s[move]
                else:
                    a, j = divmod(move, z // 2)
                    b = geometry.full[a][j]
                    s[a], s[b] = s[b], s[a]
                events[r] += 1
        flat[r] = s
        streams[r, 0] = stream.state()
    return events


@pytest.mark.parametrize("rule", ["glauber", "kawasaki"])
@pytest.mark.parametrize("acceptance", ACCEPTANCES)
@pytest.mark.parametrize("boundary", BOUNDARIES)
@pytest.mark.parametrize("kind", KINDS)
def test_matches_twin(kind, boundary, acceptance, rule):
    lattice = Lattice(kind, SIZES[kind], boundary)
    rng = np.random.default_rng(31)
    J, h = (1.0, 0.4) if acceptance == "heat-bath" else (-1.0, -0.3)
    spins = random_spins(rng, 2, lattice)
    streams = make_streams(32, 2, lattice, rule, "rejection-free")
    twin_spins, twin_streams = spins.copy(), streams.copy()
    total = 0
    for sweeps, T in ((2, 0.0), (4, 2.2), (2, 0.9)):
        events = advance(spins, streams, lattice, sweeps, T, rule=rule, acceptance=acceptance,
                         update="rejection-free", J=J, h=h)
        twin_events = twin_advance(twin_spins, twin_streams, lattice, sweeps, T, rule,
                                   acceptance, J, h)
        np.testing.assert_array_equal(spins, twin_spins)
        np.testing.assert_array_equal(streams, twin_streams)
        np.testing.assert_array_equal(events, twin_events)
        total += events.sum()
    assert total > 10


# --------------------------------------------------------------------------------------------
# bookkeeping
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("rule", ["glauber", "kawasaki"])
@pytest.mark.parametrize("boundary", BOUNDARIES)
@pytest.mark.parametrize("kind", KINDS)
def test_class_lists_equal_a_recount(kind, boundary, rule):
    """After every sweep of many events the kept class lists (bits, all count levels) and
    site codes equal a recount from the spins alone. 2**11 moves or more, so that several
    level-1 groups are in use."""
    size = {"chain": (2100,), "square": (48, 45), "triangular": (47, 46),
            "cubic": (13, 12, 14)}[kind]
    lattice = Lattice(kind, size, boundary)
    spins = random_spins(np.random.default_rng(5), 2, lattice)
    streams = make_streams(6, 2, lattice, rule, "rejection-free")
    T = 0.7 * max(lattice.tc, 1.0)
    before = spins.copy()
    bad = class_list_mismatches(spins, streams, lattice, 6, T, rule=rule)
    np.testing.assert_array_equal(bad, 0)
    assert (spins != before).sum() > lattice.n_sites // 10  # many events happened


def test_recount_detects_a_corrupted_list():
    """The comparison behind the debug check can fail: one member moved to the wrong class,
    or one count off, is found."""
    lattice = Lattice("square", (40, 40))
    spins = random_spins(np.random.default_rng(2), 1, lattice)[0].ravel()
    forward, dims = _geometry(lattice)
    codes = kernel.site_codes(spins, forward, dims, True)
    n = lattice.n_sites
    good = kernel.glauber_classes(codes, n, 18)
    assert kernel._differences(good, kernel.glauber_classes(codes, n, 18)) == 0
    wrong = kernel.glauber_classes(codes, n, 18)
    c = int(codes[77])
    kernel._count(*wrong, 77, c, -1)  # site 77 counted in the other spin's class
    kernel._count(*wrong, 77, c ^ 1, 1)
    assert kernel._differences(good, wrong) == 5
    wrong = kernel.glauber_classes(codes, n, 18)
    wrong[2][0, 0] += 1
    assert kernel._differences(good, wrong) == 1


def test_select_returns_members_in_site_order():
    lattice = Lattice("square", (300, 200))
    spins = random_spins(np.random.default_rng(3), 1, lattice)[0].ravel()
    forward, dims = _geometry(lattice)
    codes = kernel.site_codes(spins, forward, dims, True)
    assert codes.size % 64 == 0 and np.all(codes[lattice.n_sites:] == -1)
    sets = kernel.glauber_classes(codes, lattice.n_sites, 18)
    words = codes.view(np.uint64)
    for c in np.unique(codes[:lattice.n_sites]):
        members = np.flatnonzero(codes == c)
        ranks = np.unique(np.r_[0, len(members) - 1, np.linspace(0, len(members) - 1, 40)
                                .astype(int)])
        assert ([kernel._select(sets, words, int(c), int(k)) for k in ranks]
                == list(members[ranks]))


# --------------------------------------------------------------------------------------------
# reproducibility and limits
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("rule", ["glauber", "kawasaki"])
def test_calls_of_any_length_and_threads_give_the_same_bits(rule):
    lattice = Lattice("triangular", (24, 18))
    spins = random_spins(np.random.default_rng(8), 3, lattice)
    streams = make_streams(9, 3, lattice, rule, "rejection-free")
    temps = np.linspace(3.0, 1.0, 12)
    results = []
    previous = numba.get_num_threads()
    try:
        for threads, cuts in ((1, [12]), (numba.config.NUMBA_NUM_THREADS, [1, 4, 2, 5]),
                              (1, [1] * 12)):
            numba.set_num_threads(threads)
            s, st, events = spins.copy(), streams.copy(), np.zeros(3, dtype=np.int64)
            done = 0
            for n in cuts:
                events += advance(s, st, lattice, n, temps[done:done + n], rule=rule,
                                  update="rejection-free")
                done += n
            results.append((s, st, events))
    finally:
        numba.set_num_threads(previous)
    for s, st, events in results[1:]:
        np.testing.assert_array_equal(s, results[0][0])
        np.testing.assert_array_equal(st, results[0][1])
        np.testing.assert_array_equal(events, results[0][2])
    assert results[0][2].min() > 100


def test_frozen_state_makes_no_event_and_draws_nothing():
    """All up at T = 0: every flip has rate 0 (heat-bath, Metropolis); a flat Kawasaki
    interface has only uphill exchanges. Nothing happens and the streams do not move."""
    lattice = Lattice("square", (16, 16))
    up = np.ones((2, 16, 16), dtype=np.int8)
    slab = up.copy()
    slab[:, :8] = -1
    for rule, spins in (("glauber", up), ("kawasaki", slab)):
        streams = make_streams(1, 2, lattice, rule, "rejection-free")
        before = (spins.copy(), streams.copy())
        events = advance(spins, streams, lattice, 5, 0.0, rule=rule, update="rejection-free",
                         acceptance="metropolis")
        np.testing.assert_array_equal(events, 0)
        np.testing.assert_array_equal(spins, before[0])
        np.testing.assert_array_equal(streams, before[1])


def test_kawasaki_conserves_magnetization_and_glauber_zero_temperature_never_raises_energy():
    from coarsen.engine import energy_per_site

    lattice = Lattice("cubic", (8, 8, 8), "open")
    spins = random_spins(np.random.default_rng(4), 2, lattice)
    m0 = spins.sum(axis=(1, 2, 3))
    streams = make_streams(4, 2, lattice, "kawasaki", "rejection-free")
    advance(spins, streams, lattice, 10, 2.0, rule="kawasaki", update="rejection-free")
    np.testing.assert_array_equal(spins.sum(axis=(1, 2, 3)), m0)
    streams = make_streams(5, 2, lattice, "glauber", "rejection-free")
    energy = energy_per_site(spins, lattice)
    for _ in range(5):
        advance(spins, streams, lattice, 1, 0.0, update="rejection-free")
        new = energy_per_site(spins, lattice)
        assert np.all(new <= energy)
        energy = new


def test_nonlocal_exchanges_have_no_rejection_free_update():
    lattice = Lattice("square", (8, 8))
    spins = np.ones((1, 8, 8), dtype=np.int8)
    streams = make_streams(1, 1, lattice)
    with pytest.raises(ValueError, match="^update: 'rejection-free' updates apply to rules"):
        advance(spins, streams, lattice, 1, 1.0, rule="kawasaki-nonlocal",
                update="rejection-free")
