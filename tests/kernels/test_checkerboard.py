"""Sublattice (checkerboard) Glauber kernels against the brute-force twin.

Bipartite lattices (chain, square, cubic) use the colour-split layout; the triangular lattice
uses three colours ``(x + y) % 3``. The sizes below exercise rows of more than 32 sites of a
colour (two draws per row), more rows than row blocks (blocks of 2 and 3 rows), open edges
along every axis, and the minimal sizes.
"""

import numpy as np
import pytest

from coarsen.engine import advance, flip_probabilities, make_streams, substreams_needed
from coarsen.lattice import Lattice
from tests import reference
from tests.helpers import ACCEPTANCES, SCHEDULE, compare_with_twin, random_spins

COUPLINGS = ((1.0, 0.0), (1.0, 0.35), (-1.0, 0.0), (-1.0, -0.7))
#: For the larger sizes: four of the sixteen (acceptance, J, h) combinations, which still
#: pair every acceptance with both signs of J and with zero and nonzero h.
FEW = (("heat-bath", 1.0, 0.35), ("heat-bath", -1.0, 0.0), ("metropolis", 1.0, 0.0),
       ("metropolis", -1.0, -0.7))
SIZES = {
    ("chain", "periodic"): ((10,), (70,)),
    ("chain", "open"): ((2,), (66,)),
    ("square", "periodic"): ((6, 4), (66, 4), (4, 130)),
    ("square", "open"): ((6, 5), (66, 3), (4, 131)),
    ("triangular", "periodic"): ((6, 9), (99, 3), (6, 132)),
    ("triangular", "open"): ((3, 5), (99, 2), (3, 133)),
    ("cubic", "periodic"): ((4, 4, 4), (66, 4, 4), (4, 10, 8)),
    ("cubic", "open"): ((4, 3, 5), (66, 2, 3), (4, 9, 9)),
}


@pytest.mark.parametrize("J, h", COUPLINGS)
@pytest.mark.parametrize("acceptance", ACCEPTANCES)
@pytest.mark.parametrize("kind, boundary", list(SIZES))
def test_matches_twin(kind, boundary, acceptance, J, h):
    lattice = Lattice(kind, SIZES[kind, boundary][0], boundary)
    assert lattice.colouring_error() is None
    moves = compare_with_twin(lattice, 3000, SCHEDULE, update="checkerboard",
                              acceptance=acceptance, J=J, h=h)
    assert moves.sum() > 0


#: (kind, boundary, shape): "wide rows" have more than 32 sites of a colour per row, so each
#: row takes two draws; "many rows" are more rows than row blocks, so a block's stream serves
#: 2 or 3 rows (a chain has one row).
LARGER = [(kind, boundary, shape) for (kind, boundary) in SIZES
          for shape in (("wide rows",) if kind == "chain" else ("wide rows", "many rows"))]


@pytest.mark.parametrize("acceptance, J, h", FEW)
@pytest.mark.parametrize("kind, boundary, shape", LARGER)
def test_matches_twin_on_larger_lattices(kind, boundary, shape, acceptance, J, h):
    sizes = SIZES[kind, boundary]
    lattice = Lattice(kind, sizes[1] if shape == "wide rows" else sizes[2], boundary)
    rows = lattice.n_sites // lattice.size[0]
    per_row = lattice.size[0] // lattice.n_colours
    assert per_row > 32 if shape == "wide rows" else rows > 64
    moves = compare_with_twin(lattice, 3001, SCHEDULE, update="checkerboard", replicas=1,
                              acceptance=acceptance, J=J, h=h)
    assert moves.min() > 0


@pytest.mark.parametrize("kind, boundary", list(SIZES))
def test_one_stream_per_row_block(kind, boundary):
    for size in SIZES[kind, boundary]:
        lattice = Lattice(kind, size, boundary)
        rows = lattice.n_sites // lattice.size[0]
        blocks = reference.row_blocks(rows)
        assert substreams_needed(lattice, "glauber", "checkerboard") == len(blocks)
        assert len(blocks) == min(rows, 64)
        # the blocks tile the rows in order
        assert blocks[0][0] == 0 and blocks[-1][1] == rows
        assert all(a[1] == b[0] and a[0] < a[1] for a, b in zip(blocks, blocks[1:]))


def test_random_update_needs_one_stream():
    for lattice in (Lattice("square", (4, 130)), Lattice("cubic", (4, 10, 8))):
        for rule in ("glauber", "kawasaki", "kawasaki-nonlocal"):
            assert substreams_needed(lattice, rule, "random") == 1


def test_matches_twin_with_many_replicas_and_sweeps():
    lattice = Lattice("square", (8, 70), "open")
    temps = np.array([0.0, 0.5, 1.5, 2.27, 3.0, 10.0])
    moves = compare_with_twin(lattice, 41, [(6, temps), (1, 0.0)], update="checkerboard",
                              replicas=4, h=0.05)
    assert moves.min() > 0


@pytest.mark.parametrize("acceptance", ACCEPTANCES)
def test_ground_state_of_antiferromagnet_is_stable_at_zero_temperature(acceptance):
    # J = -1, h = 0: the Neel state has every site at its lowest energy (f = -z s), so no site
    # may change at T = 0, in either layout of the colours.
    for lattice in (Lattice("square", (6, 4)), Lattice("cubic", (4, 6, 4), "open"),
                    Lattice("chain", (12,))):
        spins = lattice.staggering[np.newaxis].copy()
        moves = compare_with_twin(lattice, 13, [(2, 0.0)], update="checkerboard",
                                  acceptance=acceptance, J=-1.0, spins=spins)
        np.testing.assert_array_equal(moves, [0])
        np.testing.assert_array_equal(spins[0], lattice.staggering)


def _thresholds(lattice, T, J, h, acceptance):
    p = flip_probabilities(T, lattice.coordination, J, h, acceptance)
    return [[reference.threshold(v) for v in row] for row in p]


@pytest.mark.parametrize("kind, boundary", list(SIZES))
def test_vectorised_twin_agrees_with_loop_twin(kind, boundary):
    # The NumPy twin used for the large lattices below, checked against the plain loops.
    for number, size in enumerate(SIZES[kind, boundary]):
        lattice = Lattice(kind, size, boundary)
        rng = np.random.default_rng(50 + number)
        spins = random_spins(rng, 2, lattice)
        streams = make_streams(50 + number, 2, lattice, "glauber", "checkerboard")
        vec_spins, vec_streams = spins.copy(), streams.copy()
        for T, J, h, acceptance in ((0.0, 1.0, 0.0, "heat-bath"), (1.7, -1.0, 0.3, "metropolis")):
            loop = reference.advance(spins, streams, lattice, 1, T, update="checkerboard",
                                     acceptance=acceptance, J=J, h=h)
            vec = reference.checkerboard_sweeps_numpy(vec_spins, vec_streams, lattice,
                                                      _thresholds(lattice, T, J, h, acceptance))
            np.testing.assert_array_equal(vec_spins, spins)
            np.testing.assert_array_equal(vec_streams, streams)
            np.testing.assert_array_equal(vec, loop)


@pytest.mark.parametrize("kind, size, boundary", [
    ("square", (512, 512), "periodic"),   # 2**18 sites: swept replica by replica; 8 rows/block
    ("square", (512, 512), "open"),
    ("cubic", (64, 64, 64), "periodic"),  # 2**18 sites, 64 rows per block
    ("chain", (1 << 18,), "open"),        # one row of 2**17 sites per colour
    ("triangular", (129, 258), "periodic"),
])
def test_large_lattices_match_vectorised_twin(kind, size, boundary):
    lattice = Lattice(kind, size, boundary)
    rng = np.random.default_rng(2718)
    spins = random_spins(rng, 2, lattice)
    streams = make_streams(2718, 2, lattice, "glauber", "checkerboard")
    twin_spins, twin_streams = spins.copy(), streams.copy()
    for T, J, h, acceptance in ((0.0, 1.0, 0.0, "heat-bath"), (2.1, -1.0, -0.4, "metropolis")):
        moves = advance(spins, streams, lattice, 1, T, update="checkerboard",
                        acceptance=acceptance, J=J, h=h)
        twin = reference.checkerboard_sweeps_numpy(twin_spins, twin_streams, lattice,
                                                   _thresholds(lattice, T, J, h, acceptance))
        np.testing.assert_array_equal(spins, twin_spins)
        np.testing.assert_array_equal(streams, twin_streams)
        np.testing.assert_array_equal(moves, twin)
        assert moves.min() > 0


@pytest.mark.parametrize("acceptance", ACCEPTANCES)
@pytest.mark.parametrize("lattice", [Lattice("square", (2, 2), "open"),
                                     Lattice("square", (2, 3), "open"),
                                     Lattice("cubic", (2, 2, 2), "open"),
                                     Lattice("cubic", (2, 3, 2), "open"),
                                     Lattice("triangular", (3, 2), "open"),
                                     Lattice("triangular", (3, 3)),
                                     Lattice("chain", (4,))],
                         ids=lambda lat: lat.describe())
def test_matches_twin_on_smallest_lattices(lattice, acceptance):
    # One site of a colour per row: the row's only site is also its edge site.
    moves = compare_with_twin(lattice, 9, [(3, [0.0, 1.0, 5.0])], update="checkerboard",
                              acceptance=acceptance, J=-1.0, h=0.5, replicas=3)
    assert moves.min() > 0
