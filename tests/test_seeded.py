"""Seeded initial states: disk, square, stripe, zigzag and file, through the spec."""

from __future__ import annotations

import math

import numpy as np
import pytest

from coarsen import Lattice
from coarsen.initial import InitialState, initial_spins
from coarsen.seeded import read_configuration, seed_sites
from coarsen.spec import SpecError, load_spec, parse_spec


def _spec(initial: str, size=(32, 24), boundary="periodic", replicas=2) -> str:
    return f"""
[lattice]
kind = "square"
size = {list(size)}
boundary = "{boundary}"
[dynamics]
rule = "glauber"
[temperature]
value = 0.0
[initial]
{initial}
[measure]
times = [0, 5]
[ensemble]
replicas = {replicas}
seed = 1
"""


def _brute_disk(lattice, radius, centre, triangular=False):
    """Site-by-site twin: nearest-image distance to the centre, real geometry."""
    nx, ny = lattice.size
    down = np.zeros(lattice.shape, dtype=bool)
    for y in range(ny):
        for x in range(nx):
            dx = x - centre[0] - nx * round((x - centre[0]) / nx)
            dy = y - centre[1] - ny * round((y - centre[1]) / ny)
            if triangular:
                dx, dy = dx - dy / 2, dy * math.sqrt(3) / 2
            down[y, x] = dx * dx + dy * dy <= radius * radius
    return down


@pytest.mark.parametrize("kind", ["square", "triangular"])
@pytest.mark.parametrize("centre", [None, (1.0, 2.0)])
def test_disk_matches_the_site_by_site_definition(kind, centre):
    lattice = Lattice(kind, (30, 26))
    params = {"radius": 7.5} if centre is None else {"radius": 7.5, "centre": centre}
    sites = seed_sites("disk", lattice, params)
    expected = _brute_disk(lattice, 7.5, centre or (14.5, 12.5), kind == "triangular")
    assert np.array_equal(sites, expected)
    # area: pi R^2 per unit area; the triangular lattice has 2/sqrt(3) sites per unit area.
    # The lattice-point count differs from the area by O(R) (Gauss's circle problem).
    density = 2 / math.sqrt(3) if kind == "triangular" else 1.0
    assert abs(sites.sum() - density * math.pi * 7.5**2) < 4 * 2 * math.pi * 7.5 * density ** 0.5


def test_wrapped_disk_has_the_area_of_a_centred_one():
    lattice = Lattice("square", (40, 40))
    centred = seed_sites("disk", lattice, {"radius": 9.0, "centre": (20.0, 20.0)})
    corner = seed_sites("disk", lattice, {"radius": 9.0, "centre": (0.0, 0.0)})
    assert centred.sum() == corner.sum()
    assert corner[0, 0] and corner[-1, -1] and corner[0, -1]


def test_square_stripe_and_ball():
    lattice = Lattice("square", (32, 24))
    assert seed_sites("square", lattice, {"side": 10}).sum() == 100
    stripe = seed_sites("stripe", lattice, {"width": 8})
    assert stripe.sum() == 8 * 24 and np.all(stripe == stripe[:1])  # uniform along y
    assert np.flatnonzero(stripe[0]).tolist() == list(range(12, 20))
    ball = seed_sites("disk", Lattice("cubic", (12, 12, 12)), {"radius": 4.0})
    assert abs(ball.sum() - 4 / 3 * math.pi * 64) < 0.15 * 4 / 3 * math.pi * 64
    interval = seed_sites("disk", Lattice("chain", (50,)), {"radius": 5.0})
    assert interval.sum() == 10


def test_zigzag_interface_follows_the_sawtooth():
    lattice = Lattice("square", (48, 40), "open")
    sites = seed_sites("zigzag", lattice, {"amplitude": 6, "period": 16, "centre": (0.0, 20.0)})
    heights = sites.sum(axis=0)  # down sites per column, from y = 0
    x = np.arange(48)
    u = x / 16
    line = 20 + 6 * (1 - 4 * np.abs(u - np.floor(u + 0.5)))
    assert np.array_equal(heights, np.ceil(line).astype(int))
    assert heights.max() - heights.min() == 12  # apex to trough: twice the amplitude
    with pytest.raises(ValueError, match="initial.period"):
        seed_sites("zigzag", Lattice("square", (50, 40)), {"amplitude": 4, "period": 16})
    with pytest.raises(ValueError, match="initial.amplitude"):
        seed_sites("zigzag", lattice, {"amplitude": 25, "period": 16})
    with pytest.raises(ValueError, match="2 or 3 dimensions"):
        seed_sites("zigzag", Lattice("chain", (20,)), {"amplitude": 2, "period": 4})


def test_seeded_spec_gives_the_seed_in_every_replica():
    spec = parse_spec(_spec('state = "disk"\nradius = 6.0'))
    spins = initial_spins(spec.initial, spec.lattice, spec.replicas, spec.seed)
    down = seed_sites("disk", spec.lattice, {"radius": 6.0})
    assert np.array_equal(spins[0], np.where(down, -1, 1)) and np.array_equal(spins[0], spins[1])
    neel = initial_spins(spec.initial, spec.lattice, 1, spec.seed, order="neel")
    assert np.array_equal(neel[0], spins[0] * spec.lattice.staggering)


def test_seeded_spec_errors_name_the_key():
    with pytest.raises(SpecError, match="initial.radius") as error:
        parse_spec(_spec('state = "disk"'))
    assert error.value.key == "initial.radius"
    with pytest.raises(SpecError, match="initial.radius: -1"):
        parse_spec(_spec('state = "disk"\nradius = -1'))
    with pytest.raises(SpecError, match="initial.centre: .* outside the lattice"):
        parse_spec(_spec('state = "disk"\nradius = 3\ncentre = [40, 3]'))
    with pytest.raises(SpecError, match="initial.centre"):
        parse_spec(_spec('state = "square"\nside = 3\ncentre = [4]'))
    with pytest.raises(SpecError, match="holds no site"):
        parse_spec(_spec('state = "square"\nside = 0.5\ncentre = [3.5, 3.5]'))


def test_file_state_reads_x_y_order_relative_to_the_spec(tmp_path):
    rng = np.random.default_rng(0)
    config = rng.integers(0, 2, size=(32, 24))  # (x, y), values 0/1
    np.save(tmp_path / "start.npy", config)
    (tmp_path / "run.toml").write_text(_spec('state = "file"\npath = "start.npy"'))
    spec = load_spec(tmp_path / "run.toml")
    spins = initial_spins(spec.initial, spec.lattice, spec.replicas, spec.seed)
    assert spins.shape == (2, 24, 32)
    assert np.array_equal(spins[1], np.where(config == 1, 1, -1).T)
    per_replica = np.stack([config, 1 - config]) * 2 - 1  # -1/+1, one per replica
    np.savez(tmp_path / "two.npz", spins=per_replica)
    spins = read_configuration(tmp_path / "two.npz", spec.lattice, 2)
    assert np.array_equal(spins[1], -spins[0])


@pytest.mark.parametrize("content, message", [
    (np.zeros((24, 32)), "holds shape"),
    (np.full((32, 24), 3), "holds values"),
    (None, "no such file"),
])
def test_file_state_errors_name_the_file(tmp_path, content, message):
    if content is not None:
        np.save(tmp_path / "start.npy", content)
    (tmp_path / "run.toml").write_text(_spec('state = "file"\npath = "start.npy"'))
    with pytest.raises(SpecError, match=message) as error:
        load_spec(tmp_path / "run.toml")
    assert "initial.path" in str(error.value) and "start.npy" in str(error.value)


def test_initial_state_parameters_are_part_of_the_frozen_spec():
    a = parse_spec(_spec('state = "disk"\nradius = 6.0'))
    b = parse_spec(_spec('state = "disk"\nradius = 6.0'))
    assert a.initial == b.initial and hash(a.initial) == hash(b.initial)
    assert InitialState("disk", parameters=(("radius", 6.0),)).parameter_dict() == {"radius": 6.0}


def test_seed_area_is_the_largest_down_domain_touching_the_seed():
    from coarsen.observables import seed_area

    lattice = Lattice("square", (20, 20))
    seed = seed_sites("square", lattice, {"side": 8})  # x, y in 6..13
    spins = np.ones((3, 20, 20), dtype=np.int8)
    spins[0][seed] = -1                      # the seed itself: 64 sites
    spins[0, 0:2, 0:2] = -1                  # a separate down cluster outside: not counted
    spins[1, 8:10, 8:10] = -1                # only a small remnant inside the seed
    spins[1, 8:10, 10:17] = -1               # ... joined to sites outside it: 2 x 9 in all
    spins[1, 15:17, 12:14] = -1              # a smaller down cluster also touching the seed
    # replica 2: no down spin left in the seed region
    spins[2, 0, 0] = -1
    assert seed_area(spins, lattice, seed).tolist() == [64, 18, 0]


def test_seeded_run_records_the_seed_area():
    """At T = 0 no down site appears outside the seed (every bulk up spin has a field of
    +4), so the seed area can only fall short of the down count if the domain splits."""
    from coarsen.simulate import simulate

    spec = parse_spec(_spec('state = "disk"\nradius = 8.0', size=(32, 32), replicas=3))
    ds = simulate(spec).dataset
    down = (1 - ds["magnetization"].values) / 2 * 32 * 32
    area = ds["seed_area"].values
    assert area.dtype == np.int64 and area[0, 0] == seed_sites("disk", spec.lattice,
                                                                  {"radius": 8.0}).sum()
    assert np.all(area <= np.round(down)) and np.all(area[:, -1] < area[:, 0])
