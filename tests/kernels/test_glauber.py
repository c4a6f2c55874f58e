"""Random-sequential Glauber kernel against its brute-force twin (tests/reference.py).

Every comparison demands exact equality of the spins, the stream states and the number of
changed spins after each ``advance`` call, so a single word consumed out of place fails.
"""

import numpy as np
import pytest

from coarsen.engine import advance, make_streams
from coarsen.lattice import Lattice
from tests.helpers import ACCEPTANCES, BOUNDARIES, KINDS, SCHEDULE, compare_with_twin
from tests.helpers import RANDOM_SEQUENTIAL_SIZES as SIZES

#: (J, h): ferro and antiferro, with and without a field.
COUPLINGS = ((1.0, 0.0), (1.0, 0.35), (-1.0, 0.0), (-1.0, -0.7))
#: For the larger sizes: four of the sixteen (acceptance, J, h) combinations, which still
#: pair every acceptance with both signs of J and with zero and nonzero h.
FEW = (("heat-bath", 1.0, 0.35), ("heat-bath", -1.0, 0.0), ("metropolis", 1.0, 0.0),
       ("metropolis", -1.0, -0.7))


@pytest.mark.parametrize("J, h", COUPLINGS)
@pytest.mark.parametrize("acceptance", ACCEPTANCES)
@pytest.mark.parametrize("boundary", BOUNDARIES)
@pytest.mark.parametrize("kind", KINDS)
def test_matches_twin(kind, boundary, acceptance, J, h):
    lattice = Lattice(kind, SIZES[kind][0], boundary)
    moves = compare_with_twin(lattice, 2024, SCHEDULE, rule="glauber", acceptance=acceptance,
                              J=J, h=h)
    assert moves.min() > 0


@pytest.mark.parametrize("acceptance, J, h", FEW)
@pytest.mark.parametrize("boundary", BOUNDARIES)
@pytest.mark.parametrize("kind", KINDS)
def test_matches_twin_above_one_block(kind, boundary, acceptance, J, h):
    lattice = Lattice(kind, SIZES[kind][1], boundary)
    assert lattice.n_sites > 256 and lattice.n_sites % 256
    moves = compare_with_twin(lattice, 2025, SCHEDULE, rule="glauber", acceptance=acceptance,
                              J=J, h=h)
    assert moves.min() > 0


@pytest.mark.parametrize("kind, size", [("chain", (512,)), ("square", (16, 16)),
                                        ("triangular", (16, 32)), ("cubic", (8, 8, 4))])
def test_matches_twin_when_sweep_is_whole_blocks(kind, size):
    # N a multiple of 256: no partial block at the end of a sweep.
    lattice = Lattice(kind, size)
    moves = compare_with_twin(lattice, 77, [(2, 1.5), (1, 40.0)], replicas=1)
    assert moves.min() > 0


@pytest.mark.parametrize("lattice", [Lattice("chain", 2, "open"), Lattice("chain", 3),
                                     Lattice("square", 2, "open"), Lattice("triangular", 3),
                                     Lattice("cubic", 2, "open"), Lattice("cubic", 3)],
                         ids=lambda lat: lat.describe())
def test_matches_twin_on_smallest_lattices(lattice):
    moves = compare_with_twin(lattice, 5, [(3, 0.0), (3, [0.7, 3.0, 9.0])], replicas=3)
    assert moves.sum() > 0


def test_matches_twin_at_very_high_and_low_temperature():
    # T = 1e-3 (thresholds 0 / 1 but not exactly T = 0) and T = 1e6 (all close to 1/2).
    lattice = Lattice("square", (9, 11))
    compare_with_twin(lattice, 31, [(2, [1e-3, 1e6]), (1, 1e-3)], acceptance="heat-bath", h=0.1)
    compare_with_twin(lattice, 32, [(2, [1e-3, 1e6]), (1, 1e-3)], acceptance="metropolis", h=0.1)


def test_replicas_are_independent_of_each_other():
    # Replica 1 run in an ensemble of three equals replica 1 run alone with its own stream.
    lattice = Lattice("triangular", (7, 6), "open")
    rng = np.random.default_rng(8)
    spins = np.where(rng.random((3, *lattice.shape)) < 0.5, 1, -1).astype(np.int8)
    streams = make_streams(8, 3, lattice)
    alone_spins, alone_streams = spins[1:2].copy(), streams[1:2].copy()
    moves = advance(spins, streams, lattice, 3, 1.3, h=0.2)
    alone = advance(alone_spins, alone_streams, lattice, 3, 1.3, h=0.2)
    np.testing.assert_array_equal(spins[1:2], alone_spins)
    np.testing.assert_array_equal(streams[1:2], alone_streams)
    assert moves[1] == alone[0]


def test_zero_sweeps_change_nothing():
    lattice = Lattice("square", (5, 6))
    rng = np.random.default_rng(12)
    spins = np.where(rng.random((2, *lattice.shape)) < 0.5, 1, -1).astype(np.int8)
    streams = make_streams(12, 2, lattice)
    spins0, streams0 = spins.copy(), streams.copy()
    moves = advance(spins, streams, lattice, 0, 1.0)
    np.testing.assert_array_equal(moves, [0, 0])
    np.testing.assert_array_equal(spins, spins0)
    np.testing.assert_array_equal(streams, streams0)
