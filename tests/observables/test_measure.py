"""measure(): the one-call entry point: consistency with the engine, Neel order, validation."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.fft

from coarsen import dataset
from coarsen.engine import energy_per_site, magnetization_per_site
from coarsen.equilibrium import equilibrium_energy
from coarsen.lattice import Lattice
from coarsen.observables import (
    ESTIMATORS,
    MeasurementGrid,
    Measurements,
    bond_sums,
    domain_statistics,
    measure,
    structure_and_correlation,
)
from tests import reference
from tests.helpers import random_spins

KINDS = [("chain", (15,)), ("square", (8, 6)), ("triangular", (6, 9)), ("cubic", (4, 4, 6))]


@pytest.mark.parametrize("boundary", ["periodic", "open"])
@pytest.mark.parametrize("kind,size", KINDS)
def test_measurements_and_engine_agree(kind, size, boundary):
    """Energy and magnetization equal coarsen.engine's bit for bit (no mask); the other
    fields are those of the pieces; shapes and dtypes as documented."""
    rng = np.random.default_rng(31)
    lattice = Lattice(kind, size, boundary)
    spins = random_spins(rng, 5, lattice, up_fraction=0.6)
    grid = MeasurementGrid(lattice)
    for J, h in ((1.0, 0.0), (-0.7, 0.3), (2.0, -1.5)):
        m = measure(spins, lattice, grid, temperature=1.3, J=J, h=h)
        assert isinstance(m, Measurements)
        np.testing.assert_array_equal(m.energy, energy_per_site(spins, lattice, J, h))
        np.testing.assert_array_equal(m.magnetization, magnetization_per_site(spins, lattice))
    s, c = structure_and_correlation(spins, grid)
    np.testing.assert_array_equal(m.structure_factor, s)
    np.testing.assert_array_equal(m.correlation, c)
    count, largest = domain_statistics(spins, lattice)
    np.testing.assert_array_equal(m.domain_count, count)
    np.testing.assert_array_equal(m.largest_domain, largest)
    assert m.energy.dtype == m.magnetization.dtype == m.largest_domain.dtype == np.float64
    assert m.domain_count.dtype == np.int64
    assert m.structure_factor.shape == (5, len(grid.k))
    assert m.correlation.shape == (5, len(grid.r))
    assert m.length.shape == (len(ESTIMATORS), 5) and m.length.dtype == np.float64


@pytest.mark.parametrize("boundary", ["periodic", "open"])
@pytest.mark.parametrize("kind,size", KINDS)
def test_masked_energy_counts_bonds_between_present_sites(kind, size, boundary):
    """With a mask, the energy per present site from the brute-force bond loop of
    tests/reference.py applied to the spins with masked sites set to 0 (their bonds then
    contribute nothing); masked sites may hold any value."""
    rng = np.random.default_rng(32)
    lattice = Lattice(kind, size, boundary)
    mask = rng.random(lattice.shape) < 0.7
    mask.flat[0] = True
    spins = random_spins(rng, 4, lattice)
    zeroed = np.where(mask, spins, 0).astype(np.int8)
    garbage = np.where(mask, spins, 7).astype(np.int8)
    m = measure(garbage, lattice, MeasurementGrid(lattice, mask), temperature=1.0, J=1.5,
                h=0.25)
    twin = reference.energy_per_site(zeroed, lattice, 1.5, 0.25) * lattice.n_sites / mask.sum()
    np.testing.assert_allclose(m.energy, twin, rtol=1e-12)
    np.testing.assert_allclose(m.magnetization, zeroed.reshape(4, -1).sum(axis=1) / mask.sum())
    np.testing.assert_array_equal(bond_sums(zeroed, lattice, mask),
                                  np.rint(-reference.energy_per_site(zeroed, lattice)
                                          * lattice.n_sites).astype(np.int64))


@pytest.mark.parametrize("kind,size", [("chain", (12,)), ("square", (8, 6)), ("cubic", (4, 6, 4))])
def test_neel_order_on_a_checkerboard(kind, size):
    """The staggered field of a checkerboard is uniform: |m| = 1, one domain covering every
    site, S(0) = N; the antiferromagnet's ground state has e = e_eq, so wall is NaN."""
    lattice = Lattice(kind, size)
    board = lattice.staggering.astype(np.int8)[None]
    grid = MeasurementGrid(lattice)
    m = measure(board, lattice, grid, temperature=0.0, J=-1.0, order="neel")
    assert abs(m.magnetization[0]) == 1.0
    assert m.domain_count[0] == 1 and m.largest_domain[0] == 1.0
    assert m.structure_factor[0, 0] == pytest.approx(lattice.n_sites)
    assert m.energy[0] == equilibrium_energy(kind, 0.0, J=-1.0)
    assert np.isnan(m.length[ESTIMATORS.index("wall"), 0])
    np.testing.assert_array_equal(m.magnetization, magnetization_per_site(board, lattice, "neel"))
    ferro = measure(board, lattice, grid, temperature=0.0, J=-1.0)
    assert ferro.magnetization[0] == 0.0
    assert ferro.domain_count[0] == lattice.n_sites  # every site its own domain


def test_wall_length_uses_the_exact_equilibrium_energy():
    """equilibrium_energy=None looks up Onsager's value at the temperature; a number is used
    as given; NaN means none."""
    rng = np.random.default_rng(33)
    lattice = Lattice("square", (16, 16))
    spins = random_spins(rng, 3, lattice)
    grid = MeasurementGrid(lattice)
    wall = ESTIMATORS.index("wall")
    m = measure(spins, lattice, grid, temperature=2.0)
    np.testing.assert_allclose(m.length[wall], 1 / (m.energy - equilibrium_energy("square", 2.0)))
    given = measure(spins, lattice, grid, temperature=2.0, equilibrium_energy=-1.9)
    np.testing.assert_allclose(given.length[wall], 1 / (m.energy + 1.9))
    none = measure(spins, lattice, grid, temperature=2.0, equilibrium_energy=math.nan)
    assert np.isnan(none.length[wall]).all()
    cubic = Lattice("cubic", (4, 4, 4))
    assert np.isnan(measure(random_spins(rng, 2, cubic), cubic, MeasurementGrid(cubic),
                            temperature=3.0).length[wall]).all()


def test_replica_grouping_and_threads_do_not_change_results():
    """Many replicas at once, one at a time, or under scipy.fft.set_workers(2): same bits."""
    rng = np.random.default_rng(34)
    lattice = Lattice("triangular", (12, 15))
    grid = MeasurementGrid(lattice)
    spins = random_spins(rng, 9, lattice)
    together = measure(spins, lattice, grid, temperature=1.0)
    with scipy.fft.set_workers(2):
        threaded = measure(spins, lattice, grid, temperature=1.0)
    for name in ("energy", "magnetization", "structure_factor", "correlation", "length",
                 "domain_count", "largest_domain"):
        apart = np.concatenate([np.atleast_1d(getattr(measure(spins[i:i + 1], lattice, grid,
                                                              temperature=1.0), name).T).T
                                for i in range(9)], axis=-1 if name == "length" else 0)
        np.testing.assert_array_equal(getattr(together, name), apart, err_msg=name)
        np.testing.assert_array_equal(getattr(together, name), getattr(threaded, name))


def test_estimator_names_match_the_dataset_contract():
    assert ESTIMATORS == ("corr_zero", "corr_half", "sk_moment", "wall")
    assert ESTIMATORS == dataset.ESTIMATORS


def test_bad_input_names_the_parameter():
    lattice = Lattice("square", (6, 6))
    grid = MeasurementGrid(lattice)
    spins = np.ones((2, 6, 6), dtype=np.int8)

    def call(s=spins, lat=lattice, g=grid, **kw):
        kw.setdefault("temperature", 1.0)
        return measure(s, lat, g, **kw)

    with pytest.raises(TypeError, match="spins: expected an int8 ndarray"):
        call(s=spins.tolist())
    with pytest.raises(TypeError, match="spins: dtype is int16"):
        call(s=spins.astype(np.int16))
    with pytest.raises(ValueError, match=r"spins: shape \(2, 6, 5\)"):
        call(s=np.ones((2, 6, 5), np.int8))
    with pytest.raises(ValueError, match="spins: shape"):
        call(s=np.ones((6, 6), np.int8))
    with pytest.raises(ValueError, match="spins: values must be"):
        call(s=np.zeros((2, 6, 6), np.int8))
    with pytest.raises(TypeError, match="lattice"):
        call(lat="square")
    with pytest.raises(TypeError, match="grid: expected a MeasurementGrid"):
        call(g=lattice)
    with pytest.raises(ValueError, match="grid: built for a square 6x8"):
        call(g=MeasurementGrid(Lattice("square", (6, 8))))
    with pytest.raises(ValueError, match="order: 'anti' is not one of 'ferro', 'neel'"):
        call(order="anti")
    with pytest.raises(TypeError, match="temperature: 'hot'"):
        call(temperature="hot")
    with pytest.raises(ValueError, match="temperature: -1"):
        call(temperature=-1)
    with pytest.raises(TypeError, match="J: None"):
        call(J=None)
    with pytest.raises(ValueError, match="h: inf"):
        call(h=math.inf)
    with pytest.raises(TypeError, match="equilibrium_energy"):
        call(equilibrium_energy="low")
    triangle = Lattice("triangular", (6, 6))
    with pytest.raises(ValueError, match="order: 'neel' needs a bipartite lattice"):
        measure(np.ones((1, 6, 6), np.int8), triangle, MeasurementGrid(triangle),
                temperature=1.0, order="neel")
    odd = Lattice("square", (5, 6))
    with pytest.raises(ValueError, match="order: 'neel' needs a bipartite lattice"):
        measure(np.ones((1, 6, 5), np.int8), odd, MeasurementGrid(odd), temperature=1.0,
                order="neel")
    masked = np.ones((6, 6), dtype=bool)
    masked[0, 0] = False
    with pytest.raises(ValueError, match="spins: values at present sites"):
        bad = spins.copy()
        bad[0, 1, 1] = 0
        call(s=bad, g=MeasurementGrid(lattice, masked))


def test_thread_count_does_not_change_measurements():
    """measure(threads=1, 2, 3) on lattices large enough to be split among threads (one or
    two replicas per piece of work), and a masked grid: the same bits."""
    rng = np.random.default_rng(35)
    for lattice, mask in ((Lattice("square", (192, 160)), None),
                          (Lattice("square", (200, 180), "open"), None),
                          (Lattice("triangular", (192, 192)),
                           rng.random((192, 192)) < 0.9)):
        grid = MeasurementGrid(lattice, mask)
        spins = random_spins(rng, 5, lattice, up_fraction=0.7)
        one = measure(spins, lattice, grid, temperature=1.0, threads=1)
        for threads in (2, 3):
            many = measure(spins, lattice, grid, temperature=1.0, threads=threads)
            for name in ("energy", "magnetization", "structure_factor", "correlation",
                         "length", "domain_count", "largest_domain"):
                np.testing.assert_array_equal(getattr(one, name), getattr(many, name),
                                              err_msg=f"{lattice.describe()} {name}")
    with pytest.raises(ValueError, match="threads"):
        measure(spins, lattice, grid, temperature=1.0, threads=-1)
