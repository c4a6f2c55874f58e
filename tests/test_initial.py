"""Initial states: reproducibility from the seed, exact and binomial magnetizations, Néel."""

import math

import numpy as np
import pytest

from coarsen.engine import make_streams
from coarsen.initial import (
    INITIAL_SPAWN_KEY,
    STATE_BUILDERS,
    InitialState,
    initial_spins,
    initial_streams,
)
from coarsen.lattice import Lattice
from tests import reference


def _twin_words(seed: int, replica: int, count: int) -> list[int]:
    """The words replica ``replica`` draws, from the documented seed-sequence tree and the
    reference xoshiro256** (``tests/reference.py``): key (2**32 - 1, replica, 0)."""
    state = np.random.SeedSequence(seed, spawn_key=(INITIAL_SPAWN_KEY, replica, 0)
                                   ).generate_state(4 * reference.LANES, np.uint64)
    stream = reference.Stream(state)
    return stream.words(-(-count // (2 * reference.LANES)))[:count]


def test_random_state_equals_the_twin_from_its_definition():
    # independent spins: up when the site's word is below round((1 + m) / 2 * 2**32)
    lattice = Lattice("square", (12, 10))
    m = 0.3
    spins = initial_spins(InitialState("random", m, exact=False), lattice, 3, seed=8128)
    limit = round((1 + m) / 2 * 2**32)
    for r in range(3):
        words = _twin_words(8128, r, lattice.n_sites)
        expected = [1 if w < limit else -1 for w in words]
        assert spins[r].ravel().tolist() == expected


def test_exact_state_equals_the_twin_from_its_definition():
    # exact: the n_up sites with the smallest (word, site index) pairs are up
    lattice = Lattice("cubic", (5, 4, 3))
    m = -0.2
    spins = initial_spins(InitialState("random", m, exact=True), lattice, 2, seed=99)
    n = lattice.n_sites
    n_up = math.floor(n * (1 + m) / 2 + 0.5)
    for r in range(2):
        words = _twin_words(99, r, n)
        chosen = sorted(range(n), key=lambda i: (words[i], i))[:n_up]
        expected = [-1] * n
        for i in chosen:
            expected[i] = 1
        assert spins[r].ravel().tolist() == expected


def test_reproducible_and_replicas_differ():
    lattice = Lattice("square", (32, 32))
    state = InitialState()
    a = initial_spins(state, lattice, 4, seed=5)
    b = initial_spins(state, lattice, 4, seed=5)
    np.testing.assert_array_equal(a, b)
    assert a.dtype == np.int8 and a.shape == (4, 32, 32) and a.flags.c_contiguous
    assert set(np.unique(a)) == {-1, 1}
    for r in range(4):
        for q in range(r):
            assert not np.array_equal(a[r], a[q])
    assert not np.array_equal(a, initial_spins(state, lattice, 4, seed=6))
    # a replica does not depend on how many others there are
    np.testing.assert_array_equal(initial_spins(state, lattice, 2, seed=5), a[:2])


def test_initial_streams_are_not_the_dynamics_streams():
    lattice = Lattice("square", (16, 16))
    init = initial_streams(77, 6)
    dynamics = make_streams(77, 6, lattice, "glauber", "checkerboard")
    assert init.shape == (6, 1, 64)
    words = {tuple(row) for row in init.reshape(6, -1).tolist()}
    assert not words & {tuple(row) for row in dynamics.reshape(-1, 64).tolist()}
    np.testing.assert_array_equal(initial_streams(77, 6), init)


@pytest.mark.parametrize("m", [-1.0, -0.37, 0.0, 0.2, 0.5, 1.0])
@pytest.mark.parametrize("size", [(7, 9), (16, 16)])
def test_exact_magnetization_gives_exactly_the_count(m, size):
    lattice = Lattice("square", size)
    spins = initial_spins(InitialState("random", m, exact=True), lattice, 5, seed=31)
    n = lattice.n_sites
    n_up = math.floor(n * (1 + m) / 2 + 0.5)
    np.testing.assert_array_equal((spins == 1).reshape(5, -1).sum(axis=1), [n_up] * 5)


def test_exact_placement_is_uniform_over_sites():
    # Every site is up with probability n_up / N; over R replicas each site's count is
    # binomial(R, p). Compare the mean over the first and the last half of the sites with p
    # within 4 standard errors (sites within a replica are anticorrelated, which only
    # shrinks the variance, so the binomial error is an upper bound).
    lattice = Lattice("square", (32, 32))
    replicas = 64
    spins = initial_spins(InitialState("random", 0.5, exact=True), lattice, replicas, seed=404)
    up = (spins == 1).reshape(replicas, -1)
    p = 768 / 1024
    half = lattice.n_sites // 2
    se = math.sqrt(p * (1 - p) / (replicas * half))
    for part in (up[:, :half], up[:, half:]):
        assert abs(part.mean() - p) < 4 * se


@pytest.mark.parametrize("m", [-0.6, 0.0, 0.3])
def test_independent_spins_have_binomial_statistics(m):
    # Each of the N R spins is up with probability p = (1 + m) / 2 independently: the up
    # fraction is binomial, standard error sqrt(p (1 - p) / (N R)); accept within 4 of them.
    lattice = Lattice("square", (64, 64))
    replicas = 8
    spins = initial_spins(InitialState("random", m, exact=False), lattice, replicas, seed=2024)
    p = (1 + m) / 2
    count = spins.size
    se = math.sqrt(p * (1 - p) / count)
    assert abs((spins == 1).mean() - p) < 4 * se
    # and the magnetizations of the replicas scatter like independent sums
    per_replica = spins.reshape(replicas, -1).mean(axis=1)
    assert per_replica.std() > 0


def test_conserved_rules_default_to_exact():
    lattice = Lattice("square", (32, 32))
    state = InitialState()
    assert state.exact is None
    for rule in ("kawasaki", "kawasaki-nonlocal"):
        assert state.is_exact(rule)
        spins = initial_spins(state, lattice, 8, seed=12, rule=rule)
        np.testing.assert_array_equal(spins.reshape(8, -1).sum(axis=1), [0] * 8)
    assert not state.is_exact("glauber")
    glauber = initial_spins(state, lattice, 8, seed=12, rule="glauber")
    # P(sum = 0) for 1024 independent spins is about 0.025 per replica
    assert np.any(glauber.reshape(8, -1).sum(axis=1) != 0)
    free = initial_spins(InitialState(exact=False), lattice, 8, seed=12, rule="kawasaki")
    np.testing.assert_array_equal(free, glauber)


def test_up_state():
    lattice = Lattice("cubic", (4, 3, 5), "open")
    spins = initial_spins(InitialState("up"), lattice, 3, seed=0)
    assert spins.shape == (3, 5, 3, 4)
    assert np.all(spins == 1)


@pytest.mark.parametrize("kind, size", [("chain", (10,)), ("square", (8, 6)),
                                        ("cubic", (4, 4, 6))])
def test_neel_order_multiplies_by_the_staggering(kind, size):
    lattice = Lattice(kind, size)
    neel = initial_spins(InitialState("up"), lattice, 2, seed=1, order="neel")
    np.testing.assert_array_equal(neel, np.broadcast_to(lattice.staggering, neel.shape))
    state = InitialState("random", 0.5, exact=True)
    ferro = initial_spins(state, lattice, 2, seed=3)
    staggered = initial_spins(state, lattice, 2, seed=3, order="neel")
    np.testing.assert_array_equal(staggered, ferro * lattice.staggering)
    # m is the staggered magnetization
    n_up = math.floor(lattice.n_sites * 0.75 + 0.5)
    expected = (2 * n_up - lattice.n_sites) / lattice.n_sites
    m_staggered = (staggered * lattice.staggering).reshape(2, -1).mean(axis=1)
    np.testing.assert_array_equal(m_staggered, [expected] * 2)


def test_neel_needs_a_bipartite_lattice():
    with pytest.raises(ValueError, match="needs a bipartite lattice"):
        initial_spins(InitialState("up"), Lattice("triangular", (6, 6)), 1, seed=1,
                      order="neel")


def test_a_new_state_is_one_function(monkeypatch):
    def stripe(initial, lattice, stream, exact):
        spins = np.ones(lattice.shape, dtype=np.int8)
        spins[: lattice.shape[0] // 2] = -1
        return spins

    monkeypatch.setitem(STATE_BUILDERS, "half", stripe)
    spins = initial_spins(InitialState("half"), Lattice("square", (4, 4)), 2, seed=0)
    assert spins[:, :2].tolist() == [[[-1] * 4] * 2] * 2 and np.all(spins[:, 2:] == 1)


def test_bad_initial_states():
    assert set(STATE_BUILDERS) == {"random", "up", "disk", "square", "stripe", "zigzag", "file"}
    with pytest.raises(ValueError, match=r"'rnadom' is not an initial state.*did you mean "
                                         r"'random'"):
        InitialState("rnadom")
    with pytest.raises(ValueError, match="initial magnetization: 1.5 is out of range"):
        InitialState("random", 1.5)
    with pytest.raises(TypeError, match="initial exact: 1 is not true or false"):
        InitialState("random", 0.0, exact=1)
    state = InitialState()
    lattice = Lattice("square", (4, 4))
    with pytest.raises(TypeError, match="initial: expected an InitialState"):
        initial_spins("random", lattice, 1, seed=0)
    with pytest.raises(ValueError, match="replicas: 0 is out of range"):
        initial_spins(state, lattice, 0, seed=0)
    with pytest.raises(ValueError, match="rule: 'glaubr'"):
        initial_spins(state, lattice, 1, seed=0, rule="glaubr")
    with pytest.raises(ValueError, match="order: 'anti'"):
        initial_spins(state, lattice, 1, seed=0, order="anti")
    with pytest.raises(ValueError, match="seed: -1 is negative"):
        initial_spins(state, lattice, 1, seed=-1)
    with pytest.raises(TypeError, match="seed: 1.5 is not an integer"):
        initial_spins(state, lattice, 1, seed=1.5)
