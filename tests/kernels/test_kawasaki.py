"""Kawasaki kernels (nearest-neighbour and nonlocal exchanges) against their brute-force twins.

The twin finds the exchange's energy change by recounting the bonds around the two sites, so
it checks the kernel's formula q = s_a (f_a - f_b) + 2 [adjacent] rather than repeating it.
"""

import numpy as np
import pytest

from coarsen.engine import magnetization_per_site
from coarsen.lattice import Lattice
from tests.helpers import ACCEPTANCES, BOUNDARIES, KINDS, SCHEDULE, compare_with_twin
from tests.helpers import RANDOM_SEQUENTIAL_SIZES as SIZES

RULES = ("kawasaki", "kawasaki-nonlocal")
#: Kawasaki exchanges do not depend on h; a nonzero h must change nothing (the twin ignores it).
COUPLINGS = ((1.0, 0.0), (-1.0, 0.0), (1.0, 0.6), (-1.0, -0.4))
#: For the larger sizes: four of the sixteen (acceptance, J, h) combinations, which still
#: pair every acceptance with both signs of J and with zero and nonzero h.
FEW = (("heat-bath", 1.0, 0.6), ("heat-bath", -1.0, 0.0), ("metropolis", 1.0, 0.0),
       ("metropolis", -1.0, -0.4))


@pytest.mark.parametrize("J, h", COUPLINGS)
@pytest.mark.parametrize("acceptance", ACCEPTANCES)
@pytest.mark.parametrize("boundary", BOUNDARIES)
@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize("rule", RULES)
def test_matches_twin(rule, kind, boundary, acceptance, J, h):
    lattice = Lattice(kind, SIZES[kind][0], boundary)
    moves = compare_with_twin(lattice, 404, SCHEDULE, rule=rule, acceptance=acceptance, J=J,
                              h=h)
    assert moves.min() > 0


@pytest.mark.parametrize("acceptance, J, h", FEW)
@pytest.mark.parametrize("boundary", BOUNDARIES)
@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize("rule", RULES)
def test_matches_twin_above_one_block(rule, kind, boundary, acceptance, J, h):
    # 30 % up spins: the up and down lists of the nonlocal rule differ in length.
    lattice = Lattice(kind, SIZES[kind][1], boundary)
    assert lattice.n_sites > 256 and lattice.n_sites % 256
    moves = compare_with_twin(lattice, 405, SCHEDULE, rule=rule, acceptance=acceptance, J=J,
                              h=h, up_fraction=0.3)
    assert moves.min() > 0


@pytest.mark.parametrize("rule", RULES)
def test_field_does_not_change_exchanges(rule):
    lattice = Lattice("square", (9, 7))
    a = compare_with_twin(lattice, 17, [(2, 1.4)], rule=rule, h=0.0)
    b = compare_with_twin(lattice, 17, [(2, 1.4)], rule=rule, h=1.7)
    np.testing.assert_array_equal(a, b)


@pytest.mark.parametrize("lattice", [Lattice("chain", 2, "open"), Lattice("chain", 3),
                                     Lattice("square", 2, "open"), Lattice("triangular", 3),
                                     Lattice("cubic", 2, "open"), Lattice("cubic", 3)],
                         ids=lambda lat: lat.describe())
@pytest.mark.parametrize("rule", RULES)
def test_matches_twin_on_smallest_lattices(rule, lattice):
    # On these every pair of sites is close: adjacency and wrap-around are exercised hard.
    compare_with_twin(lattice, 6, [(3, 0.0), (3, [0.7, 3.0, 9.0])], rule=rule, replicas=3)


@pytest.mark.parametrize("rule", RULES)
def test_uniform_replicas_advance_their_stream_and_stay_put(rule):
    # One replica all up, one all down, one mixed: no exchange is possible in the first two,
    # but every stream still advances by a whole sweep's words.
    lattice = Lattice("square", (6, 7), "open")
    rng = np.random.default_rng(99)
    spins = np.ones((3, *lattice.shape), dtype=np.int8)
    spins[1] = -1
    spins[2] = np.where(rng.random(lattice.shape) < 0.5, 1, -1)
    before = spins.copy()
    moves = compare_with_twin(lattice, 99, [(2, 2.0), (1, 0.0)], rule=rule, spins=spins)
    assert moves[0] == 0 and moves[1] == 0 and moves[2] > 0
    np.testing.assert_array_equal(spins[:2], before[:2])


@pytest.mark.parametrize("rule", RULES)
def test_single_minority_spin(rule):
    # n_up = 1: the multiply-shift index into a one-entry list must always be 0.
    lattice = Lattice("triangular", (6, 5))
    spins = -np.ones((1, *lattice.shape), dtype=np.int8)
    spins[0, 2, 3] = 1
    compare_with_twin(lattice, 3, [(3, 1.0)], rule=rule, spins=spins)
    assert magnetization_per_site(spins, lattice)[0] == pytest.approx(-28 / 30)
