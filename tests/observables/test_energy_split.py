"""The wall/bulk split of the excess energy: exact bookkeeping, a twin, and Onsager's energy.

The twin labels domains by breadth-first search (``tests/reference.domains_bfs``), takes the
bonds from ``tests/validation/_exact.bond_pairs`` and classifies each broken bond site by
site. The split must add up to the energy above the ground state exactly, for every lattice
kind, both boundaries, masks, and through the run and the lab-data reader.
"""

from __future__ import annotations

import numpy as np
import pytest

from coarsen.lattice import Lattice
from coarsen.observables import (
    MIN_DOMAIN_AREA,
    MeasurementGrid,
    bond_sums,
    energy_split,
    measure,
)
from tests import reference
from tests.helpers import random_spins
from tests.validation._exact import bond_pairs, onsager_energy

CASES = [("chain", (40,)), ("square", (13, 11)), ("triangular", (12, 9)),
         ("cubic", (5, 6, 4))]


def _twin(spins_one, lattice, mask, min_area):
    """(wall, bulk) broken bonds, counted site by site."""
    periodic = lattice.periodic
    labels = reference.domains_bfs(spins_one, lattice.kind, lattice.size, periodic, mask)
    labels = labels.ravel()
    areas = np.bincount(labels)
    s = spins_one.ravel()
    present = np.ones(s.size, bool) if mask is None else np.asarray(mask).ravel()
    wall = bulk = 0
    for i, j in bond_pairs(lattice.kind, lattice.size, periodic):
        for a, b in zip(i.tolist(), j.tolist()):
            if not (present[a] and present[b]) or s[a] == s[b]:
                continue
            if areas[labels[a]] < min_area or areas[labels[b]] < min_area:
                bulk += 1
            else:
                wall += 1
    return wall, bulk


def _blocks(rng, lattice, block):
    """Random signs on blocks of ``block`` sites per axis: domains of tens of sites."""
    cells = rng.random(tuple(-(-n // block) for n in lattice.shape)) < 0.5
    for axis in range(lattice.dimension):
        cells = np.repeat(cells, block, axis=axis)
    return np.where(cells[tuple(slice(0, n) for n in lattice.shape)], 1, -1).astype(np.int8)


@pytest.mark.parametrize("boundary", ["periodic", "open"])
@pytest.mark.parametrize("masked", [False, True], ids=["full", "masked"])
@pytest.mark.parametrize("kind,size", CASES)
def test_split_matches_the_site_by_site_twin(kind, size, boundary, masked):
    rng = np.random.default_rng(41)
    lattice = Lattice(kind, size, boundary)
    mask = rng.random(lattice.shape) < 0.9 if masked else None
    block = 3 if kind != "chain" else 5
    configurations = [random_spins(rng, 1, lattice, 0.8)[0], _blocks(rng, lattice, block)]
    noisy = _blocks(rng, lattice, block)
    noisy[rng.random(lattice.shape) < 0.05] *= -1  # isolated flips inside the blocks
    configurations.append(noisy)
    spins = np.stack(configurations)
    n_present = lattice.n_sites if mask is None else int(mask.sum())
    seen = np.zeros(2)
    for min_area in (1, 4, MIN_DOMAIN_AREA):
        wall, bulk = energy_split(spins, lattice, mask, J=1.0, min_area=min_area)
        seen += [wall.sum(), bulk.sum()]
        for r in range(spins.shape[0]):
            w, b = _twin(spins[r], lattice, mask, min_area)
            np.testing.assert_allclose([wall[r], bulk[r]],
                                       [2.0 * w / n_present, 2.0 * b / n_present], rtol=1e-14)
    assert np.all(seen > 0)  # both kinds of bond occurred


@pytest.mark.parametrize("boundary", ["periodic", "open"])
@pytest.mark.parametrize("kind,size", CASES)
@pytest.mark.parametrize("J,order", [(1.0, "ferro"), (0.5, "ferro"), (-1.0, "neel")])
def test_wall_plus_bulk_is_the_energy_above_the_ground_state(kind, size, boundary, J, order):
    lattice = Lattice(kind, size, boundary)
    if order == "neel" and not lattice.bipartite:
        pytest.skip("Neel order needs a bipartite lattice")
    rng = np.random.default_rng(42)
    spins = np.concatenate([random_spins(rng, 2, lattice, 0.5),
                            _blocks(rng, lattice, 4)[np.newaxis]])
    if order == "neel":
        spins = spins * lattice.staggering
    grid = MeasurementGrid(lattice)
    measured = measure(spins, lattice, grid, temperature=1.0, J=J, order=order)
    bonds = bond_sums(np.ones_like(spins[:1]), lattice)[0]
    ground = -abs(J) * bonds / lattice.n_sites  # every bond satisfied
    np.testing.assert_allclose(measured.wall_energy + measured.bulk_energy,
                               measured.energy - ground, rtol=1e-13, atol=1e-15)


def test_known_patterns():
    lattice = Lattice("square", (20, 16))
    n = lattice.n_sites
    stripe = np.ones(lattice.shape, dtype=np.int8)
    stripe[:, 5:11] = -1  # two flat walls of 16 bonds each
    single = np.ones(lattice.shape, dtype=np.int8)
    single[7, 7] = -1  # one flipped spin: 4 broken bonds, bulk
    small = np.ones(lattice.shape, dtype=np.int8)
    small[2:5, 2:7] = -1  # 15 sites, perimeter 16: bulk below 16 sites
    big = np.ones(lattice.shape, dtype=np.int8)
    big[2:6, 2:6] = -1  # 16 sites, perimeter 16: a domain
    wall, bulk = energy_split(np.stack([stripe, single, small, big]), lattice)
    np.testing.assert_allclose(wall * n / 2, [32, 0, 0, 16], rtol=1e-14)
    np.testing.assert_allclose(bulk * n / 2, [0, 4, 16, 0], rtol=1e-14)
    # a flipped spin inside the stripe: bulk, while the walls stay walls
    stripe[3, 8] = 1
    wall, bulk = energy_split(stripe[np.newaxis], lattice, J=-2.0)
    np.testing.assert_allclose([wall[0] * n / 4, bulk[0] * n / 4], [32, 4], rtol=1e-14)


def test_bad_arguments_name_the_parameter():
    lattice = Lattice("square", (8, 8))
    spins = np.ones((1, 8, 8), dtype=np.int8)
    with pytest.raises(ValueError, match="min_area"):
        energy_split(spins, lattice, min_area=0)
    with pytest.raises(TypeError, match="min_area"):
        energy_split(spins, lattice, min_area=2.5)
    with pytest.raises(ValueError, match="J"):
        energy_split(spins, lattice, J=float("nan"))


@pytest.mark.parametrize("boundary", ["periodic", "open"])
def test_run_records_a_split_that_adds_up_at_every_time(boundary):
    from coarsen.spec import parse_spec
    from coarsen.simulate import simulate

    spec = parse_spec(f"""
[lattice]
kind = "square"
size = [64, 48]
boundary = "{boundary}"
[dynamics]
rule = "glauber"
[temperature]
relative = 0.5
[measure]
times = {{ start = 1, stop = 100, count = 8 }}
[ensemble]
replicas = 3
seed = 8
""")
    ds = simulate(spec).dataset
    lattice = spec.lattice
    ground = -bond_sums(np.ones((1, *lattice.shape), np.int8), lattice)[0] / lattice.n_sites
    total = ds["wall_energy"] + ds["bulk_energy"]
    np.testing.assert_allclose(total.values, ds["energy"].values - ground, rtol=1e-13)
    assert ds["wall_energy"].dims == ("replica", "time")
    assert ds["wall_energy"].attrs["units"] == "J" and "long_name" in ds["bulk_energy"].attrs
    # the quench coarsens: wall energy falls, and at 0.5 Tc walls carry most of it late on
    wall = ds["wall_energy"].mean("replica").values
    assert wall[-1] < wall[1] and wall[-1] > ds["bulk_energy"].mean("replica").values[-1]


def test_lab_snapshots_get_the_split_with_their_mask(tmp_path):
    from coarsen.labdata import load_snapshots, measure_snapshots

    rng = np.random.default_rng(5)
    lattice = Lattice("square", (18, 14), "open")
    shots = np.stack([_blocks(rng, lattice, 4) for _ in range(3)])
    mask = rng.random(lattice.shape) < 0.9
    np.savez(tmp_path / "shots.npz", spins=np.swapaxes(shots, 1, 2), mask=mask.T)
    ds = measure_snapshots(load_snapshots(tmp_path / "shots.npz"))
    wall, bulk = energy_split(shots, lattice, mask)
    np.testing.assert_array_equal(ds["wall_energy"].values[:, 0], wall)
    np.testing.assert_array_equal(ds["bulk_energy"].values[:, 0], bulk)


def test_ordered_equilibrium_is_bulk_and_matches_onsager():
    """From the ordered state at 0.7 Tc the excitations are small thermal clusters: the
    wall energy is a negligible part (measured 0.07 %; asserted below 1 %) and the sum is
    the equilibrium excess energy
    u(T) - u(0) = u(T) + 2 of Onsager, Phys. Rev. 65, 117 (1944). L = 64 is far larger than
    xi(0.7 Tc) < 1, so the infinite-lattice energy applies (shared/REFERENCE.md Sect. 1).
    Tolerance: 4 standard errors of the mean over replicas of each replica's time average
    (measurements 50 sweeps apart, far beyond the energy's autocorrelation time there)."""
    from coarsen.spec import parse_spec
    from coarsen.simulate import simulate

    spec = parse_spec("""
[lattice]
kind = "square"
size = [64, 64]
[dynamics]
rule = "glauber"
[temperature]
relative = 0.7
[initial]
state = "up"
[measure]
times = { start = 100, stop = 2000, count = 39, spacing = "linear" }
[ensemble]
replicas = 8
seed = 2027
""")
    ds = simulate(spec).dataset
    assert ds["wall_energy"].values.sum() < 0.01 * ds["bulk_energy"].values.sum()
    per_replica = (ds["bulk_energy"] + ds["wall_energy"]).mean("time").values
    mean = per_replica.mean()
    error = per_replica.std(ddof=1) / np.sqrt(len(per_replica))
    expected = onsager_energy(float(ds["temperature"][0])) + 2.0
    assert abs(mean - expected) < 4 * error, (mean, error, expected)
