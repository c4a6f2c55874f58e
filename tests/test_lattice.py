"""Lattice geometry: neighbours, colourings, bond counts, critical temperatures, validation."""

import math

import numpy as np
import pytest

from coarsen.lattice import CRITICAL_TEMPERATURE, Lattice
from tests import reference

#: Sizes per kind, chosen to include odd sizes, unequal axes and the minimal sizes.
SIZES = {
    "chain": [(2,), (3,), (8,), (9,), (64,)],
    "square": [(2, 2), (3, 3), (4, 4), (5, 4), (4, 7), (6, 9), (16, 16)],
    "triangular": [(2, 3), (3, 3), (4, 4), (6, 9), (9, 6), (5, 7), (12, 12)],
    "cubic": [(2, 2, 2), (3, 3, 3), (4, 4, 4), (4, 5, 6), (3, 4, 2)],
}
CASES = [(kind, size, boundary) for kind, sizes in SIZES.items() for size in sizes
         for boundary in ("periodic", "open") if min(size) >= (3 if boundary == "periodic" else 2)]
IDS = [f"{k}-{'x'.join(map(str, s))}-{b}" for k, s, b in CASES]


@pytest.mark.parametrize("kind, size, boundary", CASES, ids=IDS)
def test_neighbour_table_matches_brute_force(kind, size, boundary):
    lattice = Lattice(kind, size, boundary)
    twin = reference.Geometry(lattice)
    table = lattice.neighbour_table
    assert table.shape == (lattice.n_sites, lattice.coordination)
    assert table.dtype == np.int64
    np.testing.assert_array_equal(table, twin.table())


@pytest.mark.parametrize("kind, size, boundary", CASES, ids=IDS)
def test_neighbour_relation_is_symmetric(kind, size, boundary):
    lattice = Lattice(kind, size, boundary)
    table = lattice.neighbour_table
    for i, row in enumerate(table):
        for j in row[row >= 0]:
            assert i in table[j]
            assert j != i


def test_offsets_are_in_the_documented_order():
    # The Kawasaki bond direction indexes this order, so it is part of the stream contract.
    for kind, offsets in reference.OFFSETS.items():
        lattice = Lattice(kind, 4)
        d = lattice.dimension
        assert lattice.offsets == tuple(o[:d] for o in offsets)
        assert lattice.coordination == len(offsets)


def test_flat_index_is_x_fastest():
    lattice = Lattice("cubic", (4, 5, 6))
    coords = np.array([[1, 2, 3], [3, 4, 5], [0, 0, 1]])
    np.testing.assert_array_equal(lattice.flat_index(coords),
                                  [(3 * 5 + 2) * 4 + 1, (5 * 5 + 4) * 4 + 3, 20])
    assert lattice.shape == (6, 5, 4)


@pytest.mark.parametrize("kind, size, boundary", CASES, ids=IDS)
def test_bond_counts(kind, size, boundary):
    lattice = Lattice(kind, size, boundary)
    n = lattice.n_sites
    assert lattice.n_bonds == len(reference.Geometry(lattice).bonds())
    if boundary == "periodic":
        assert lattice.n_bonds == n * lattice.coordination // 2
    else:
        # open: each forward direction loses the bonds that would cross an edge
        nx, ny, nz = (tuple(size) + (1, 1))[:3]
        expected = {
            "chain": nx - 1,
            "square": (nx - 1) * ny + nx * (ny - 1),
            "triangular": (nx - 1) * ny + nx * (ny - 1) + (nx - 1) * (ny - 1),
            "cubic": (nx - 1) * ny * nz + nx * (ny - 1) * nz + nx * ny * (nz - 1),
        }[kind]
        assert lattice.n_bonds == expected


@pytest.mark.parametrize("kind, size, boundary", CASES, ids=IDS)
def test_colouring_is_proper_or_explained(kind, size, boundary):
    lattice = Lattice(kind, size, boundary)
    twin = reference.Geometry(lattice)
    colour = lattice.sublattice.ravel()
    assert lattice.sublattice.shape == lattice.shape
    assert set(colour.tolist()) <= set(range(lattice.n_colours))
    np.testing.assert_array_equal(colour, [twin.colour(i) for i in range(lattice.n_sites)])
    clashes = [(i, j) for i, j in twin.bonds() if colour[i] == colour[j]]
    problem = lattice.colouring_error()
    if problem is None:
        assert clashes == []
        return
    assert problem.startswith("lattice size: ")
    assert "sublattice" in problem
    periodic_wrap = boundary == "periodic" and any(n % lattice.n_colours for n in size)
    if periodic_wrap:
        # the wrap-around joins equal colours, and the message says which sizes are needed
        assert clashes
        assert ("even" if lattice.n_colours == 2 else "divisible by 3") in problem
    else:
        # the colouring is proper, but the colour-split layout needs a suitable x size
        assert clashes == []
        assert f"x size {size[0]}" in problem


@pytest.mark.parametrize("kind, size, boundary", CASES, ids=IDS)
def test_bipartite_and_staggering(kind, size, boundary):
    lattice = Lattice(kind, size, boundary)
    twin = reference.Geometry(lattice)
    two_colourable = kind != "triangular" and all(
        (i + j) % 2 == 1 for i, j in [(sum(twin.coords[a]), sum(twin.coords[b]))
                                      for a, b in twin.bonds()])
    assert lattice.bipartite == two_colourable
    if lattice.bipartite:
        stagger = lattice.staggering.ravel().astype(int)
        assert set(stagger.tolist()) <= {-1, 1}
        assert all(stagger[a] == -stagger[b] for a, b in twin.bonds())
    else:
        with pytest.raises(ValueError, match=r"^order: 'neel' needs a bipartite lattice"):
            lattice.staggering


def test_critical_temperatures_from_the_literature():
    # Onsager, Phys. Rev. 65, 117 (1944): square lattice, sinh(2 J / Tc) = 1.
    onsager = 2.0 / math.log(1.0 + math.sqrt(2.0))
    assert Lattice("square", 4).tc == pytest.approx(onsager, rel=1e-15)
    assert math.sinh(2.0 / Lattice("square", 4).tc) == pytest.approx(1.0, rel=1e-14)
    # Houtappel, Physica 16, 425 (1950): triangular lattice, exp(4 J / Tc) = 3.
    houtappel = 4.0 / math.log(3.0)
    assert Lattice("triangular", 3).tc == pytest.approx(houtappel, rel=1e-15)
    # Ferrenberg, Xu & Landau, Phys. Rev. E 97, 043301 (2018): simple cubic lattice,
    # K_c = 0.221654626(5), i.e. Tc = 1 / K_c = 4.5115232(1).
    assert Lattice("cubic", 3).tc == pytest.approx(4.5115232, abs=5e-7)
    assert 1.0 / Lattice("cubic", 3).tc == pytest.approx(0.221654626, abs=1e-8)
    # Ising (1925): no order at T > 0 in one dimension.
    assert Lattice("chain", 3).tc == 0.0
    assert set(CRITICAL_TEMPERATURE) == {"chain", "square", "triangular", "cubic"}
    # the values do not depend on the size or the boundary
    assert Lattice("square", (6, 9), "open").tc == Lattice("square", 3).tc


def test_size_may_be_one_int_or_a_sequence():
    assert Lattice("cubic", 4).size == (4, 4, 4)
    assert Lattice("square", [5, 6]).size == (5, 6)
    assert Lattice("square", (np.int64(5), 6)).size == (5, 6)
    assert Lattice("square", [5, 6]) == Lattice("square", (5, 6))
    assert Lattice("square", (5, 6)).shape == (6, 5)
    assert Lattice("square", (5, 6)).n_sites == 30
    assert Lattice("square", (5, 6), "open").describe() == "square 5x6 open"


@pytest.mark.parametrize("kind", ["hexagonal", "Square", "", None])
def test_bad_kind(kind):
    with pytest.raises(ValueError, match=r"^lattice kind: .* is not a lattice kind; choose one of "
                                         r"chain, square, triangular, cubic"):
        Lattice(kind, 4)


@pytest.mark.parametrize("boundary", ["twisted", "Periodic", "", None])
def test_bad_boundary(boundary):
    with pytest.raises(ValueError, match=r"^lattice boundary: .* is not a boundary; choose one of "
                                         r"periodic, open"):
        Lattice("square", 4, boundary)


@pytest.mark.parametrize("kind, size, boundary, pattern", [
    ("square", (4,), "periodic", r"has 1 entries but a square lattice has 2 dimensions"),
    ("chain", (4, 4), "periodic", r"has 2 entries but a chain lattice has 1 dimension;"),
    ("cubic", (4, 4), "open", r"has 2 entries but a cubic lattice has 3 dimensions"),
    ("square", (2, 4), "periodic", r"too small; every axis of a periodic lattice needs at least 3"),
    ("cubic", (4, 1, 4), "open", r"too small; every axis of an? open lattice needs at least 2"),
    ("chain", 0, "periodic", r"too small"),
    ("square", (4.0, 4), "periodic", r"is not a list of whole numbers of sites"),
    ("square", (True, 4), "periodic", r"is not a list of whole numbers of sites"),
    ("square", "44", "periodic", r"is not a list of whole numbers of sites"),
    ("square", 4.5, "periodic", r"is not a list of whole numbers of sites"),
])
def test_bad_size(kind, size, boundary, pattern):
    with pytest.raises(ValueError, match=r"^lattice size: .*" + pattern):
        Lattice(kind, size, boundary)
