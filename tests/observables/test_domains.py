"""Domain labelling against a breadth-first-search twin, and patterns with known domains.

``tests/reference.domains_bfs`` walks equal-sign neighbours from the offsets written out in
tests/reference.py (wrapping on a torus, stopping at open edges, skipping masked sites); the
package labels with scipy.ndimage and merges across periodic edges. Two labellings agree when
they define the same partition of the sites.
"""

from __future__ import annotations

import numpy as np
import pytest

from coarsen.lattice import Lattice
from coarsen.observables import domain_count, domain_labels, domain_statistics, largest_domain
from tests import reference
from tests.helpers import random_spins

CASES = [("chain", (13,)), ("square", (9, 7)), ("triangular", (8, 7)), ("cubic", (4, 5, 3)),
         ("square", (3, 3)), ("triangular", (3, 4))]


def _same_partition(a: np.ndarray, b: np.ndarray) -> bool:
    """True when label arrays a and b group the sites identically (0 = no domain in both)."""
    a, b = a.ravel(), b.ravel()
    if not np.array_equal(a == 0, b == 0):
        return False
    pairs = set(zip(a.tolist(), b.tolist()))
    return len(pairs) == len(set(a.tolist())) == len(set(b.tolist()))


@pytest.mark.parametrize("boundary", ["periodic", "open"])
@pytest.mark.parametrize("masked", [False, True], ids=["full", "masked"])
@pytest.mark.parametrize("kind,size", CASES)
def test_labels_match_breadth_first_search(kind, size, boundary, masked):
    rng = np.random.default_rng(21)
    lattice = Lattice(kind, size, boundary)
    mask = rng.random(lattice.shape) < 0.8 if masked else None
    if mask is not None:
        mask.flat[0] = True
    for up_fraction in (0.3, 0.5, 0.8):
        spins = random_spins(rng, 3, lattice, up_fraction)
        labels, counts = domain_labels(spins, lattice, mask)
        count, largest = domain_statistics(spins, lattice, mask)
        n_present = lattice.n_sites if mask is None else mask.sum()
        for r in range(3):
            twin = reference.domains_bfs(spins[r], kind, size, boundary == "periodic", mask)
            assert _same_partition(labels[r], twin)
            assert counts[r] == count[r] == twin.max()
            assert set(np.unique(labels[r])) - {0} == set(range(1, counts[r] + 1))
            areas = np.bincount(twin.ravel())[1:]
            assert largest[r] == areas.max() / n_present


@pytest.mark.parametrize("boundary", ["periodic", "open"])
@pytest.mark.parametrize("masked", [False, True], ids=["full", "masked"])
@pytest.mark.parametrize("kind,size,block", [("square", (64, 56), 8),
                                             ("triangular", (60, 64), 8),
                                             ("cubic", (16, 16, 16), 8), ("chain", (2000,), 200)])
def test_large_domains_match_breadth_first_search(kind, size, block, boundary, masked):
    """Blocks of ``block`` sites per axis with random signs: few domains, so the areas come
    from runs along x rather than from a histogram of the labels (fewer than one label per 64
    sites before the periodic merge, i.e. as counted with open edges); both must agree with
    the twin."""
    rng = np.random.default_rng(22)
    lattice = Lattice(kind, size, boundary)
    keep = 0.995 if kind == "chain" else 0.97  # each missing site cuts a chain
    mask = rng.random(lattice.shape) < keep if masked else None
    for _ in range(2):
        blocks = rng.random(tuple(-(-n // block) for n in lattice.shape)) < 0.5
        for axis in range(lattice.dimension):
            blocks = np.repeat(blocks, block, axis=axis)
        spins = np.where(blocks[tuple(slice(0, n) for n in lattice.shape)], 1, -1)
        spins = spins.astype(np.int8)[np.newaxis]
        unmerged = domain_count(spins, Lattice(kind, size, "open"), mask)[0]
        assert unmerged * 64 < lattice.n_sites  # the run-length branch
        labels, counts = domain_labels(spins, lattice, mask)
        count, largest = domain_statistics(spins, lattice, mask)
        twin = reference.domains_bfs(spins[0], kind, size, boundary == "periodic", mask)
        assert _same_partition(labels[0], twin)
        assert count[0] == counts[0] == twin.max()
        n_present = lattice.n_sites if mask is None else mask.sum()
        assert largest[0] == np.bincount(twin.ravel())[1:].max() / n_present


def test_a_band_across_the_periodic_edge_is_one_domain():
    """Columns x = 6, 7, 0, 1 up on an 8 x 8 lattice: on the torus one up band and one down
    band; with open edges the up band falls into two pieces."""
    spins = np.full((1, 8, 8), -1, dtype=np.int8)
    spins[0][:, [6, 7, 0, 1]] = 1
    for kind in ("square", "triangular"):
        assert domain_count(spins, Lattice(kind, (8, 8)))[0] == 2
        assert domain_count(spins, Lattice(kind, (8, 8), "open"))[0] == 3
    assert largest_domain(spins, Lattice("square", (8, 8)))[0] == 0.5
    # a domain wrapping both ways: a cross of one row and one column
    spins = np.full((1, 8, 8), -1, dtype=np.int8)
    spins[0, 3, :] = 1
    spins[0, :, 5] = 1
    assert domain_count(spins, Lattice("square", (8, 8)))[0] == 2  # cross, and the rest
    assert domain_count(spins, Lattice("square", (8, 8), "open"))[0] == 5


def test_triangular_connectivity_includes_the_diagonal():
    """Sites (0,0), (1,1), (2,2) touch through the (1, 1) bonds of the triangular lattice but
    not on the square lattice; the anti-diagonal (0,2), (1,1), (2,0) touches on neither; on
    the torus (5, 5) and (0, 0) are neighbours across the corner."""
    def up_at(sites, n=6):
        spins = np.full((1, n, n), -1, dtype=np.int8)
        for x, y in sites:
            spins[0, y, x] = 1
        return spins
    diagonal = up_at([(0, 0), (1, 1), (2, 2)])
    anti = up_at([(0, 2), (1, 1), (2, 0)])
    tri_open, square_open = Lattice("triangular", (6, 6), "open"), Lattice("square", (6, 6), "open")
    assert domain_count(diagonal, tri_open)[0] == 2
    assert domain_count(diagonal, square_open)[0] == 4
    assert domain_count(anti, tri_open)[0] == 4
    corner = up_at([(5, 5), (0, 0)])
    assert domain_count(corner, Lattice("triangular", (6, 6)))[0] == 2
    assert domain_count(corner, tri_open)[0] == 3
    assert domain_count(corner, Lattice("square", (6, 6)))[0] == 3


def test_masked_sites_belong_to_no_domain():
    """A masked column cuts an open square lattice in two; masked sites get label 0 and the
    largest domain is a fraction of the present sites."""
    lattice = Lattice("square", (7, 4), "open")
    mask = np.ones(lattice.shape, dtype=bool)
    mask[:, 3] = False
    spins = np.ones((1, *lattice.shape), dtype=np.int8)
    spins[0][:, 3] = 0  # masked sites may hold anything
    labels, counts = domain_labels(spins, lattice, mask)
    assert counts[0] == 2
    assert np.all(labels[0][:, 3] == 0)
    assert largest_domain(spins, lattice, mask)[0] == pytest.approx(12 / 24)
    # on the torus the two halves join around the x edge
    assert domain_count(spins, Lattice("square", (7, 4)), mask)[0] == 1


def test_labels_find_the_domain_of_a_site():
    """The domain holding a site: every site with that site's label (here a seeded disk)."""
    lattice = Lattice("square", (20, 20))
    y, x = np.indices(lattice.shape)
    spins = np.where((x - 10) ** 2 + (y - 10) ** 2 <= 16, -1, 1).astype(np.int8)[None]
    labels, counts = domain_labels(spins, lattice)
    seed = labels[0, 10, 10]
    assert counts[0] == 2
    assert np.count_nonzero(labels[0] == seed) == np.count_nonzero(spins[0] < 0)


def _coarse_field(rng, lattice, block: int, up_fraction: float = 0.5) -> np.ndarray:
    """Blocks of ``block`` sites per axis with random signs, rolled by a random shift along
    every axis so that domains straddle the periodic edges; int8 of shape lattice.shape."""
    blocks = rng.random(tuple(-(-n // block) for n in lattice.shape)) < up_fraction
    for axis in range(lattice.dimension):
        blocks = np.repeat(blocks, block, axis=axis)
    field = np.where(blocks[tuple(slice(0, n) for n in lattice.shape)], 1, -1).astype(np.int8)
    shift = tuple(int(rng.integers(n)) for n in lattice.shape)
    return np.roll(field, shift, axis=tuple(range(lattice.dimension)))


KERNEL_CASES = [("chain", (40,)), ("square", (16, 12)), ("square", (3, 9)), ("square", (3, 3)),
                ("triangular", (12, 14)), ("triangular", (3, 5)), ("cubic", (6, 5, 4)),
                ("cubic", (3, 4, 3))]


@pytest.mark.parametrize("boundary", ["periodic", "open"])
@pytest.mark.parametrize("kind,size", KERNEL_CASES)
def test_kernel_matches_scipy_labelling_and_breadth_first_search(kind, size, boundary):
    """The union-find kernel, scipy.ndimage.label plus a merge over every bond
    (tests/reference.domains_scipy) and the breadth-first search give the same partition,
    count and largest area on many configurations: independent random sites at several up
    fractions, and coarse blocks shifted across the periodic edges, with and without a
    mask. The kernel numbers domains in the order of their first site, as the scipy twin
    does, so the labels agree exactly."""
    rng = np.random.default_rng(23)
    lattice = Lattice(kind, size, boundary)
    periodic = boundary == "periodic"
    for trial in range(12):
        mask = None
        if trial % 3 == 2:
            mask = rng.random(lattice.shape) < 0.85
            mask.flat[0] = True
        if trial % 2:
            spins = np.stack([_coarse_field(rng, lattice, block=int(rng.integers(2, 5)))
                              for _ in range(3)])
        else:
            spins = random_spins(rng, 3, lattice, up_fraction=(0.2, 0.5, 0.8)[trial % 3])
        labels, counts = domain_labels(spins, lattice, mask)
        count, largest = domain_statistics(spins, lattice, mask)
        n_present = lattice.n_sites if mask is None else mask.sum()
        for r in range(3):
            twin = reference.domains_scipy(spins[r], kind, size, periodic, mask)
            np.testing.assert_array_equal(labels[r], twin)
            assert _same_partition(twin, reference.domains_bfs(spins[r], kind, size, periodic,
                                                               mask))
            assert counts[r] == count[r] == twin.max()
            assert largest[r] == np.bincount(twin.ravel())[1:].max() / n_present


def test_domains_wrapping_the_torus_and_its_corners():
    """Coarse blocks rolled across both edges of a triangular torus: the kernel joins
    domains across the x edge, the y edge and, through the (1, 1) bond, the corner."""
    rng = np.random.default_rng(24)
    lattice = Lattice("triangular", (30, 26))
    for _ in range(10):
        spins = _coarse_field(rng, lattice, block=5)[np.newaxis]
        labels, counts = domain_labels(spins, lattice)
        twin = reference.domains_scipy(spins[0], "triangular", (30, 26), True)
        np.testing.assert_array_equal(labels[0], twin)
    # one up site at each corner: the corners (29, 25) and (0, 0) touch through (1, 1)
    spins = np.full((1, 26, 30), -1, dtype=np.int8)
    spins[0, 25, 29] = spins[0, 0, 0] = 1
    assert domain_count(spins, lattice)[0] == 2
    assert domain_count(spins, Lattice("square", (30, 26)))[0] == 3


@pytest.mark.parametrize("kind,size", [("square", (192, 160)), ("cubic", (32, 32, 32))])
def test_thread_count_does_not_change_domains(kind, size):
    """Replicas labelled side by side on 1, 2 or 3 threads: the same bits."""
    rng = np.random.default_rng(25)
    lattice = Lattice(kind, size)
    spins = np.stack([_coarse_field(rng, lattice, block=3) for _ in range(5)])
    one = domain_labels(spins, lattice, threads=1) + domain_statistics(spins, lattice,
                                                                       threads=1)
    for threads in (2, 3):
        many = domain_labels(spins, lattice, threads=threads) + domain_statistics(
            spins, lattice, threads=threads)
        for a, b in zip(one, many):
            np.testing.assert_array_equal(a, b)


def test_bad_thread_counts_name_the_parameter():
    lattice = Lattice("square", (4, 4))
    spins = np.ones((1, 4, 4), dtype=np.int8)
    with pytest.raises(ValueError, match=r"threads: 0 is not a positive"):
        domain_statistics(spins, lattice, threads=0)
    with pytest.raises(TypeError, match=r"threads: expected a positive int or None, got 1.5"):
        domain_labels(spins, lattice, threads=1.5)
