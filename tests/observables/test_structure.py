"""S(k) and C(r): against direct sums and pair loops, exact identities, analytic patterns.

The twins in tests/reference.py (``structure_factor_direct``, ``correlation_pairs`` and their
radial versions) are written from the definitions with the lattice's real geometry
(triangular: a_x = (1, 0), a_y = (-1/2, sqrt 3 / 2)) and never call coarsen.observables.
Comparisons in double precision use rtol = 1e-10: the FFT's rounding error is ~1e-15 times
log2(N) relative to the largest |F|**2, far below that. Single precision is checked against
double with the float32 bound stated at ``_single_tolerance``.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.fft

from coarsen.engine import energy_per_site
from coarsen.lattice import Lattice
from coarsen.observables import (
    MeasurementGrid,
    correlation,
    displacement_length,
    radial_correlation,
    radial_structure_factor,
    structure_and_correlation,
    structure_factor,
    wavevector_magnitude,
)
from tests import reference
from tests.helpers import random_spins

#: (kind, size): non-square boxes, so that a swapped axis cannot pass unnoticed.
CASES = [("chain", (11,)), ("square", (6, 5)), ("triangular", (6, 5)), ("triangular", (4, 7)),
         ("cubic", (3, 4, 5))]


def _mask(rng, lattice, keep=0.75):
    mask = rng.random(lattice.shape) < keep
    mask.flat[0] = True
    return mask


def _single_tolerance(n_sites: int) -> float:
    """float32 rounding bound for S, C and their averages, relative to their O(1) scale:
    8 eps32 log2(N) (eps32 = 1.2e-7; the transform adds one rounding per butterfly level)."""
    return 8 * np.finfo(np.float32).eps * max(1.0, math.log2(n_sites))


@pytest.mark.parametrize("boundary", ["periodic", "open"])
@pytest.mark.parametrize("masked", [False, True], ids=["full", "masked"])
@pytest.mark.parametrize("kind,size", CASES)
def test_full_grid_matches_direct_sums(kind, size, boundary, masked):
    """S(k) on every grid wavevector equals the direct sum over sites, C(d) for every
    displacement the mean over pairs (periodic, open with zero padding, masked)."""
    rng = np.random.default_rng(11)
    lattice = Lattice(kind, size, boundary)
    mask = _mask(rng, lattice) if masked else None
    spins = random_spins(rng, 3, lattice)
    np.testing.assert_allclose(structure_factor(spins, lattice, mask),
                               reference.structure_factor_direct(spins, kind, size, mask),
                               rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(correlation(spins, lattice, mask),
                               reference.correlation_pairs(spins, kind, size,
                                                           boundary == "periodic", mask),
                               rtol=1e-10, atol=1e-12, equal_nan=True)


@pytest.mark.parametrize("boundary", ["periodic", "open"])
@pytest.mark.parametrize("masked", [False, True], ids=["full", "masked"])
@pytest.mark.parametrize("kind,size", CASES + [("square", (4, 4))])
def test_radial_averages_match_twins(kind, size, boundary, masked):
    """Shell means of S and bin means of C, with their shell and bin centres, equal the
    twins' (which find |k| and |d| by searching reciprocal-lattice and periodic images)."""
    rng = np.random.default_rng(12)
    lattice = Lattice(kind, size, boundary)
    mask = _mask(rng, lattice) if masked else None
    spins = random_spins(rng, 3, lattice)
    grid = MeasurementGrid(lattice, mask, precision="double")
    s, c = structure_and_correlation(spins, grid)
    k_twin, s_twin = reference.radial_structure_factor_direct(spins, kind, size, mask)
    r_twin, c_twin = reference.radial_correlation_pairs(spins, kind, size,
                                                        boundary == "periodic", mask)
    np.testing.assert_allclose(grid.k, k_twin, rtol=1e-12)
    np.testing.assert_array_equal(grid.r, r_twin)
    np.testing.assert_allclose(s, s_twin, rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(c, c_twin, rtol=1e-10, atol=1e-12)
    assert grid.shell_counts.sum() == lattice.n_sites  # every wavevector is in a shell
    np.testing.assert_array_equal(radial_structure_factor(spins, grid), s)
    np.testing.assert_array_equal(radial_correlation(spins, grid), c)


@pytest.mark.parametrize("boundary", ["periodic", "open"])
@pytest.mark.parametrize("kind,size", [("square", (16, 12)), ("triangular", (12, 9)),
                                       ("cubic", (6, 5, 4)), ("chain", (40,))])
def test_single_precision_agrees_with_double(kind, size, boundary):
    rng = np.random.default_rng(13)
    lattice = Lattice(kind, size, boundary)
    spins = random_spins(rng, 4, lattice)
    single = structure_and_correlation(spins, MeasurementGrid(lattice))
    double = structure_and_correlation(spins, MeasurementGrid(lattice, precision="double"))
    tol = _single_tolerance(lattice.n_sites)
    for a, b in zip(single, double):
        np.testing.assert_allclose(a, b, rtol=tol, atol=tol)


# --------------------------------------------------------------------------------------------
# exact identities (shared/REFERENCE.md Sect. 6, "Exact lattice identity" [V])
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("boundary", ["periodic", "open"])
@pytest.mark.parametrize("kind,size", CASES)
def test_identities(kind, size, boundary):
    """C(0) = 1; the mean of S over the full grid is 1 (Parseval); S(0) = M**2 / N; with a
    mask the same over present sites."""
    rng = np.random.default_rng(14)
    lattice = Lattice(kind, size, boundary)
    for mask in (None, _mask(rng, lattice)):
        spins = random_spins(rng, 5, lattice, up_fraction=0.7)
        present = np.ones(lattice.shape, bool) if mask is None else mask
        n = present.sum()
        s = structure_factor(spins, lattice, mask)
        c = correlation(spins, lattice, mask)
        m = (spins * present).reshape(5, -1).sum(axis=1)
        site_axes = tuple(range(1, lattice.dimension + 1))
        np.testing.assert_allclose(s.mean(axis=site_axes), 1.0, rtol=1e-12)
        np.testing.assert_allclose(s.reshape(5, -1)[:, 0], m**2 / n, rtol=1e-12)
        np.testing.assert_allclose(c.reshape(5, -1)[:, 0], 1.0, rtol=1e-12)
        grid = MeasurementGrid(lattice, mask)
        s_radial, c_radial = structure_and_correlation(spins, grid)
        assert grid.r[0] == 0 and grid.k[0] == 0
        tol = _single_tolerance(lattice.n_sites)
        np.testing.assert_allclose(c_radial[:, 0], 1.0, rtol=tol)
        np.testing.assert_allclose(s_radial[:, 0], m**2 / n, rtol=tol, atol=tol)
        np.testing.assert_allclose(s_radial @ grid.shell_counts / lattice.n_sites, 1.0,
                                   rtol=tol)


@pytest.mark.parametrize("kind,size", [("chain", (9,)), ("square", (7, 6)),
                                       ("triangular", (6, 7)), ("cubic", (3, 4, 5))])
def test_energy_is_minus_the_neighbour_correlations(kind, size):
    """e = -sum over bond directions of C(bond) for J = 1, h = 0 on a torus (REFERENCE.md
    Sect. 6: e = -(C(1,0) + C(0,1)) on the square lattice), full-grid C before averaging."""
    rng = np.random.default_rng(15)
    lattice = Lattice(kind, size)
    spins = random_spins(rng, 4, lattice)
    c = correlation(spins, lattice)
    total = sum(c[(slice(None),) + tuple(o[::-1])] for o in lattice.forward_offsets)
    np.testing.assert_allclose(-total, energy_per_site(spins, lattice), rtol=1e-12, atol=1e-14)


# --------------------------------------------------------------------------------------------
# analytic patterns and geometry
# --------------------------------------------------------------------------------------------
def _plane_wave(lattice, m_xyz):
    """cos(k . r) with k . r = 2 pi sum_a m_a x_a / L_a (the phase of grid wavevector m)."""
    grids = np.indices(lattice.shape)[::-1]  # x, y, z
    phase = sum(2 * np.pi * m * g / n for m, g, n in zip(m_xyz, grids, lattice.size))
    return np.cos(phase)[np.newaxis]


@pytest.mark.parametrize("kind,size,m,shell", [
    # square 16 x 16: |k| = 2 pi 3 / 16 = 3 dk
    ("square", (16, 16), (3, 0), 3),
    ("square", (16, 16), (2, 2), 3),  # |k| = 2 sqrt(2) dk = 2.83 dk
    # triangular 12 x 12, dk = 2 pi / 12; k = 2 pi (u b_x + v b_y), b_x = (1, 1/sqrt 3),
    # b_y = (0, 2/sqrt 3): |k|^2 = (4/3)(2 pi)^2 (u^2 + u v + v^2).
    # m = (1, 1): |k| = 2 pi / 6 = 2 dk; m = (1, -1): |k| = 2 pi / sqrt(108) = 1.155 dk
    ("triangular", (12, 12), (1, 1), 2),
    ("triangular", (12, 12), (1, -1), 1),
    ("cubic", (8, 8, 8), (1, 1, 1), 2),  # sqrt 3 dk
    ("chain", (20,), (5,), 5),
])
def test_plane_wave_puts_all_weight_in_its_shell(kind, size, m, shell):
    """S of cos(k0 . r) is N/4 at +-k0 and 0 elsewhere, so the shell of |k0| holds mean
    2 (N/4) / (wavevectors in the shell) and every other shell 0; C(d) = cos(k0 . d) / 2."""
    lattice = Lattice(kind, size)
    wave = _plane_wave(lattice, m)
    grid = MeasurementGrid(lattice, precision="double")
    s = radial_structure_factor(wave, grid)[0]
    index = int(np.flatnonzero(np.isclose(grid.k, shell * grid.k_spacing))[0])
    expected = np.zeros_like(s)
    expected[index] = 2 * (lattice.n_sites / 4) / grid.shell_counts[index]
    np.testing.assert_allclose(s, expected, atol=1e-10)
    c = correlation(wave, lattice)
    np.testing.assert_allclose(c, 0.5 * _plane_wave(lattice, m), atol=1e-12)


def test_triangular_geometry():
    """Real triangular geometry: the six bonds, including (1, 1), have unit length, (1, -1)
    has sqrt 3, and the largest |k| is the Brillouin-zone corner 4 pi / 3 (K point); on a
    torus the distance is the shortest image."""
    lattice = Lattice("triangular", (12, 12))
    d = displacement_length(lattice)
    for x, y in lattice.offsets:
        assert d[y % 12, x % 12] == pytest.approx(1.0)
    assert d[11, 1] == pytest.approx(math.sqrt(3.0))  # (x, y) = (1, -1)
    assert d[0, 6] == pytest.approx(6.0) and d[6, 6] == pytest.approx(6.0)
    k = wavevector_magnitude(lattice)
    assert k.max() == pytest.approx(4 * math.pi / 3)
    assert k[4, 4] == pytest.approx(4 * math.pi / 3)  # u = v = 1/3
    np.testing.assert_allclose(k[0, 6], 2 * math.pi / math.sqrt(3))  # M point, u = 1/2


def test_shells_and_bins_are_documented_widths():
    lattice = Lattice("square", (32, 24))
    grid = MeasurementGrid(lattice)
    assert grid.k_spacing == pytest.approx(2 * math.pi / 24)
    assert grid.r_max == 12.0
    np.testing.assert_array_equal(grid.r, np.arange(13.0))
    np.testing.assert_allclose(grid.k / grid.k_spacing, np.round(grid.k / grid.k_spacing))
    assert grid.pair_counts[0] == lattice.n_sites  # self-pairs
    assert grid.pair_counts[1] == 8 * lattice.n_sites  # 4 bonds and 4 diagonals, both ways


def test_open_uniform_state_is_fully_correlated():
    """With open edges each displacement's pairs are counted exactly: a uniform state has
    C = 1 in every bin."""
    for kind, size in [("square", (9, 7)), ("triangular", (8, 5)), ("cubic", (4, 3, 5))]:
        lattice = Lattice(kind, size, "open")
        spins = np.ones((1, *lattice.shape), dtype=np.int8)
        c = radial_correlation(spins, MeasurementGrid(lattice, precision="double"))
        np.testing.assert_allclose(c, 1.0, rtol=1e-12)


def test_results_do_not_depend_on_batching_or_fft_threads():
    """Replicas measured together or one at a time, and under scipy.fft.set_workers(2),
    give the same bits (transforms always run with workers=1)."""
    rng = np.random.default_rng(16)
    lattice = Lattice("square", (24, 20))
    grid = MeasurementGrid(lattice)
    spins = random_spins(rng, 12, lattice)
    together = structure_and_correlation(spins, grid)
    apart = [structure_and_correlation(spins[i:i + 1], grid) for i in range(12)]
    with scipy.fft.set_workers(2):
        threaded = structure_and_correlation(spins, grid)
    for j in range(2):
        np.testing.assert_array_equal(together[j], np.concatenate([a[j] for a in apart]))
        np.testing.assert_array_equal(together[j], threaded[j])


# --------------------------------------------------------------------------------------------
# bad input
# --------------------------------------------------------------------------------------------
def test_bad_input_names_the_parameter():
    lattice = Lattice("square", (6, 6))
    spins = np.ones((1, 6, 6), dtype=np.int8)
    with pytest.raises(TypeError, match="spins"):
        structure_factor(spins.tolist(), lattice)
    with pytest.raises(TypeError, match="spins"):
        structure_factor(spins.astype(complex), lattice)
    with pytest.raises(ValueError, match="spins: shape"):
        correlation(np.ones((1, 6, 5), np.int8), lattice)
    with pytest.raises(TypeError, match="lattice"):
        structure_factor(spins, "square")
    with pytest.raises(TypeError, match="mask: dtype"):
        MeasurementGrid(lattice, np.ones((6, 6), dtype=int))
    with pytest.raises(ValueError, match="mask: shape"):
        MeasurementGrid(lattice, np.ones((6, 5), dtype=bool))
    with pytest.raises(ValueError, match="mask: no site"):
        MeasurementGrid(lattice, np.zeros((6, 6), dtype=bool))
    with pytest.raises(ValueError, match="precision: 'half'"):
        MeasurementGrid(lattice, precision="half")
    with pytest.raises(TypeError, match="grid"):
        structure_and_correlation(spins, lattice)
    with pytest.raises(ValueError, match="spins: shape"):
        structure_and_correlation(spins, MeasurementGrid(Lattice("square", (6, 8))))
