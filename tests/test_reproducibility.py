"""The reproducibility contract: results depend only on the seed, replica and position in the run.

Not on the thread count, not on how a run is split into ``advance`` calls, and not on a
save-and-restore of the spins and stream states in between.
"""

import numba
import numpy as np
import pytest

from coarsen.engine import advance, make_streams
from coarsen.lattice import Lattice
from tests.helpers import random_spins

#: (rule, update) pairs the engine offers.
DYNAMICS = [("glauber", "random"), ("glauber", "checkerboard"), ("kawasaki", "random"),
            ("kawasaki-nonlocal", "random")]
#: Small lattices every update accepts; the y (and z) sizes give more rows than row blocks
#: for the checkerboard update, so the row blocks run in parallel and serve 2 or 3 rows.
LATTICES = {
    "chain": Lattice("chain", (70,)),
    "square": Lattice("square", (6, 130)),
    "triangular": Lattice("triangular", (6, 132), "open"),
    "cubic": Lattice("cubic", (4, 10, 8)),
}
IDS = [f"{rule}-{update}" for rule, update in DYNAMICS]


def _start(seed, lattice, rule, update, replicas=3):
    rng = np.random.default_rng(seed)
    return random_spins(rng, replicas, lattice), make_streams(seed, replicas, lattice, rule, update)


def _two_threads():
    if numba.config.NUMBA_NUM_THREADS < 2:
        pytest.skip("numba has a single thread here (NUMBA_NUM_THREADS=1)")
    return 2


def _run_with_threads(threads, spins, streams, lattice, calls, **dynamics):
    """Run ``calls`` [(sweeps, temperature)] on copies with ``threads`` numba threads."""
    spins, streams = spins.copy(), streams.copy()
    previous = numba.get_num_threads()
    numba.set_num_threads(threads)
    try:
        moves = sum(advance(spins, streams, lattice, n, T, **dynamics) for n, T in calls)
    finally:
        numba.set_num_threads(previous)
    return spins, streams, moves


def _assert_same(a, b):
    for x, y in zip(a, b):
        np.testing.assert_array_equal(x, y)


@pytest.mark.parametrize("kind", list(LATTICES))
@pytest.mark.parametrize("rule, update", DYNAMICS, ids=IDS)
def test_thread_count_does_not_matter(rule, update, kind):
    lattice = LATTICES[kind]
    spins, streams = _start(31415, lattice, rule, update, replicas=5)
    calls = [(2, 1.5), (2, [0.0, 3.0])]
    one = _run_with_threads(1, spins, streams, lattice, calls, rule=rule, update=update, h=0.1)
    two = _run_with_threads(_two_threads(), spins, streams, lattice, calls, rule=rule,
                            update=update, h=0.1)
    _assert_same(one, two)
    assert one[2].min() > 0


@pytest.mark.parametrize("lattice", [
    Lattice("square", (512, 512)),       # 2**18 sites: the replica-by-replica path, 64 blocks
    Lattice("cubic", (64, 64, 64)),      # 2**18 sites, 64 rows per block
    Lattice("triangular", (129, 258)),   # 258 rows in 64 blocks
], ids=lambda lat: lat.describe())
def test_thread_count_does_not_matter_on_large_lattices(lattice):
    spins, streams = _start(161803, lattice, "glauber", "checkerboard", replicas=2)
    calls = [(1, 1.0), (1, 4.0)]
    one = _run_with_threads(1, spins, streams, lattice, calls, update="checkerboard", J=-1.0)
    two = _run_with_threads(_two_threads(), spins, streams, lattice, calls,
                            update="checkerboard", J=-1.0)
    _assert_same(one, two)


def test_thread_count_does_not_matter_for_random_updates_on_a_large_lattice():
    lattice = Lattice("square", (512, 512))
    for rule in ("glauber", "kawasaki", "kawasaki-nonlocal"):
        spins, streams = _start(1729, lattice, rule, "random", replicas=2)
        one = _run_with_threads(1, spins, streams, lattice, [(1, 2.0)], rule=rule)
        two = _run_with_threads(_two_threads(), spins, streams, lattice, [(1, 2.0)], rule=rule)
        _assert_same(one, two)


def test_thread_setting_is_restored():
    before = numba.get_num_threads()
    lattice = LATTICES["square"]
    spins, streams = _start(1, lattice, "glauber", "random")
    _run_with_threads(1, spins, streams, lattice, [(1, 1.0)])
    assert numba.get_num_threads() == before


@pytest.mark.parametrize("kind", list(LATTICES))
@pytest.mark.parametrize("rule, update", DYNAMICS, ids=IDS)
def test_one_call_equals_many_calls(rule, update, kind):
    # advance(10) with a per-sweep temperature array == ten advance(1) calls, sweep by sweep.
    lattice = LATTICES[kind]
    spins, streams = _start(2718, lattice, rule, update)
    temps = np.array([0.0, 0.3, 1.0, 1.8, 2.2, 2.6, 3.5, 5.0, 0.0, 1.2])
    whole_spins, whole_streams = spins.copy(), streams.copy()
    whole = advance(whole_spins, whole_streams, lattice, 10, temps, rule=rule, update=update,
                    J=-1.0, h=0.2)
    parts = np.zeros_like(whole)
    for T in temps:
        parts += advance(spins, streams, lattice, 1, T, rule=rule, update=update, J=-1.0, h=0.2)
    np.testing.assert_array_equal(spins, whole_spins)
    np.testing.assert_array_equal(streams, whole_streams)
    np.testing.assert_array_equal(parts, whole)


@pytest.mark.parametrize("rule, update", DYNAMICS, ids=IDS)
def test_restored_checkpoint_continues_the_run(rule, update, tmp_path):
    # Save spins and streams after 4 sweeps, reload them, run 4 more: the same bits as 8 at once.
    lattice = LATTICES["square"]
    spins, streams = _start(5772, lattice, rule, update)
    straight_spins, straight_streams = spins.copy(), streams.copy()
    advance(straight_spins, straight_streams, lattice, 8, 1.9, rule=rule, update=update)
    advance(spins, streams, lattice, 4, 1.9, rule=rule, update=update)
    np.save(tmp_path / "spins.npy", spins)
    np.save(tmp_path / "streams.npy", streams)
    del spins, streams
    spins, streams = np.load(tmp_path / "spins.npy"), np.load(tmp_path / "streams.npy")
    advance(spins, streams, lattice, 4, 1.9, rule=rule, update=update)
    np.testing.assert_array_equal(spins, straight_spins)
    np.testing.assert_array_equal(streams, straight_streams)


@pytest.mark.parametrize("kind", list(LATTICES))
@pytest.mark.parametrize("rule, update", DYNAMICS, ids=IDS)
def test_same_seed_same_run_and_different_seeds_differ(rule, update, kind):
    lattice = LATTICES[kind]
    runs = []
    for seed in (100, 100, 101):
        spins, streams = _start(100, lattice, rule, update)  # same start, seed only in streams
        streams = make_streams(seed, 3, lattice, rule, update)
        advance(spins, streams, lattice, 3, 2.0, rule=rule, update=update)
        runs.append((spins, streams))
    _assert_same(runs[0], runs[1])
    assert not np.array_equal(runs[0][0], runs[2][0])
    assert not np.any(runs[0][1] == runs[2][1])


@pytest.mark.parametrize("rule, update", DYNAMICS, ids=IDS)
def test_replica_does_not_depend_on_its_ensemble(rule, update):
    # Replica 2 of an ensemble of four, run alone on its own state: identical.
    lattice = LATTICES["triangular"] if update == "checkerboard" else LATTICES["cubic"]
    spins, streams = _start(60, lattice, rule, update, replicas=4)
    alone_spins, alone_streams = spins[2:3].copy(), streams[2:3].copy()
    advance(spins, streams, lattice, 3, 1.1, rule=rule, update=update)
    advance(alone_spins, alone_streams, lattice, 3, 1.1, rule=rule, update=update)
    np.testing.assert_array_equal(spins[2:3], alone_spins)
    np.testing.assert_array_equal(streams[2:3], alone_streams)
