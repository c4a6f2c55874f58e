"""Interface positions along cuts: default cuts, exact seeds, noise, the spec and the dataset."""

from __future__ import annotations

import math

import numpy as np
import pytest

from coarsen.lattice import Lattice
from coarsen.observables.interfaces import (
    Cut,
    cut_coordinates,
    default_cuts,
    interface_positions,
    parse_cuts,
)
from coarsen.seeded import seed_sites
from coarsen.spec import SpecError, parse_spec


def _seed(state, lattice, parameters):
    return np.where(seed_sites(state, lattice, parameters), -1, 1).astype(np.int8)[np.newaxis]


def _spec(initial: str, measure: str = "", kind: str = "square", size=(48, 40)) -> str:
    return f"""
[lattice]
kind = "{kind}"
size = {list(size)}
[dynamics]
rule = "glauber"
[temperature]
value = 0.0
[initial]
{initial}
[measure]
times = [0, 5, 20]
{measure}
[ensemble]
replicas = 2
seed = 4
"""


def test_default_cuts_of_each_seeded_state():
    lattice = Lattice("square", (64, 48))
    disk = default_cuts("disk", lattice, {"radius": 10.0})
    assert [c.kind for c in disk] == ["radial"] * 8
    assert all(c.origin == (31.5, 23.5) and c.length == 24 for c in disk)
    assert all(math.isclose(math.hypot(*c.direction), 1.0) for c in disk)
    assert disk[2].direction == (0.0, 1.0) and disk[4].direction == (-1.0, 0.0)
    square = default_cuts("square", lattice, {"side": 10.0})
    assert [c.kind for c in square] == ["face", "corner"] * 4
    stripe = default_cuts("stripe", lattice, {"width": 10.0})
    assert len(stripe) == 8 and {c.direction for c in stripe} == {(1.0, 0.0), (-1.0, 0.0)}
    assert sorted({c.origin[1] for c in stripe}) == [11.5, 23.5, 35.5, 47.5 % 48]
    zigzag = default_cuts("zigzag", lattice, {"amplitude": 6.0, "period": 16.0})
    assert [c.kind for c in zigzag] == ["apex", "middle", "trough", "middle"] * 4
    assert [c.origin[0] for c in zigzag[:4]] == [31.5, 35.5, 39.5, 43.5]
    assert all(c.direction == (0.0, 1.0) and c.origin[1] == (23.5 - 6) / 2 for c in zigzag)
    assert len({c.label for c in zigzag}) == len(zigzag)
    assert default_cuts("file", lattice, {"path": "x.npy"}) == ()
    assert default_cuts("random", lattice, {}) == ()
    assert default_cuts("disk", Lattice("triangular", (32, 32)), {"radius": 5.0}) == ()


@pytest.mark.parametrize("boundary", ["periodic", "open"])
def test_positions_of_exact_seeds(boundary):
    lattice = Lattice("square", (64, 48), boundary)
    stripe = _seed("stripe", lattice, {"width": 12})
    cuts = default_cuts("stripe", lattice, {"width": 12})
    # a sharp step: the block-mean profile is zero half way between the last down site
    # and the first up site, 6 from the middle on each side
    np.testing.assert_allclose(interface_positions(stripe, lattice, cuts), 6.0, atol=1e-12)
    disk = _seed("disk", lattice, {"radius": 14.0})
    cuts = default_cuts("disk", lattice, {"radius": 14.0})
    radius = interface_positions(disk, lattice, cuts)[:, 0]
    assert np.all(np.abs(radius - 14.0) < 1.0), radius  # a digitised circle
    parameters = {"amplitude": 8.0, "period": 32.0}
    zigzag = _seed("zigzag", lattice, parameters)
    cuts = default_cuts("zigzag", lattice, parameters)
    heights = interface_positions(zigzag, lattice, cuts)[:, 0] + cuts[0].origin[1]
    # each column's step lies half way between its last down and first up site; a block
    # mean over 5 columns of steps less than 2.5 apart is a sum of linear ramps, zero at
    # their mean height, and the cut interpolates that between the two nearest columns.
    # Sampling the profile every lattice spacing and interpolating linearly across one
    # kink of the ramps costs at most a quarter spacing.
    step = (zigzag[0] < 0).sum(axis=0) - 0.5  # down sites per column, from y = 0
    for cut, height in zip(cuts, heights):
        x0 = int(math.floor(cut.origin[0]))
        fraction = cut.origin[0] - x0
        band = [step[np.arange(x - 2, x + 3) % 64].mean() for x in (x0, x0 + 1)]
        expected = (1 - fraction) * band[0] + fraction * band[1]
        assert abs(height - expected) <= 0.25, (cut.label, height, expected)
    apex, middle, trough = (heights[[c.kind == k for c in cuts]] for k in
                            ("apex", "middle", "trough"))
    assert apex.min() > middle.max() and middle.min() > trough.max()


def test_noise_inside_the_domains_leaves_the_mean_position_unbiased():
    """Independent flips of 3 % of the spins scatter each position but, being symmetric
    about the wall, do not bias the mean over realisations: within 4 standard errors. The
    band average reduces the scatter compared with a single row (width 1)."""
    rng = np.random.default_rng(9)
    lattice = Lattice("square", (48, 32))
    clean = _seed("stripe", lattice, {"width": 16})
    cuts = default_cuts("stripe", lattice, {"width": 16})
    noisy = np.repeat(clean, 200, axis=0)
    noisy[rng.random(noisy.shape) < 0.03] *= -1
    scatter = {}
    for width in (1, 5):
        positions = interface_positions(noisy, lattice, cuts, width=width).ravel()
        assert np.all(np.isfinite(positions))
        error = positions.std(ddof=1) / math.sqrt(positions.size)
        if width == 5:
            assert abs(positions.mean() - 8.0) < 4 * error
        scatter[width] = positions.std()
    assert scatter[5] < scatter[1]


def test_edge_rules():
    lattice = Lattice("square", (20, 20), "open")
    up = np.ones((1, 20, 20), dtype=np.int8)
    cut = Cut("c", "custom", (10.0, 10.0), (1.0, 0.0), 8.0)
    assert interface_positions(up, lattice, [cut])[0, 0] == 0.0  # no down phase at all
    assert np.isnan(interface_positions(-up, lattice, [cut])[0, 0])  # never reaches up
    leaving = Cut("l", "custom", (10.0, 10.0), (1.0, 0.0), 30.0)  # runs off the open edge
    assert np.isnan(interface_positions(-up, lattice, [leaving])[0, 0])
    assert interface_positions(up, lattice, []).shape == (0, 1)
    with pytest.raises(ValueError, match="square lattices only"):
        interface_positions(np.ones((1, 8, 8), np.int8), Lattice("triangular", (8, 8)), [cut])
    with pytest.raises(ValueError, match="width: 4 is even"):
        interface_positions(up, lattice, [cut], width=4)


def test_cuts_in_the_spec_and_their_errors():
    spec = parse_spec(_spec('state = "random"', 'cut_width = 3\ncuts = [{ origin = [10, 20], '
                            'direction = [3, 4], length = 15, label = "diag" }, '
                            '{ origin = [0, 0], direction = [0, 1] }]'))
    assert spec.cut_width == 3
    assert spec.cuts[0] == Cut("diag", "custom", (10.0, 20.0), (0.6, 0.8), 15.0)
    assert spec.cuts[1].label == "cut 1" and spec.cuts[1].length == 20.0
    bad = [
        ('cuts = [{ origin = [10, 20] }]', r"measure.cuts\[0\].direction: missing"),
        ('cuts = [{ origin = [60, 20], direction = [1, 0] }]', "outside the lattice"),
        ('cuts = [{ origin = [1, 2], direction = [0, 0] }]', "has no direction"),
        ('cuts = [{ origin = [1, 2], direction = [1, 0], length = -2 }]', "length"),
        ('cuts = [{ origin = [1, 2], direction = [1, 0], angle = 3 }]', "unknown key"),
        ('cuts = [{ origin = [1, 2], direction = [1, 0], label = "a" }, '
         '{ origin = [1, 2], direction = [0, 1], label = "a" }]', "used twice"),
        ('cuts = []', "not a list of cuts"),
        ('cut_width = 4', "measure.cut_width: 4 is even"),
        ('cut_width = 0', "measure.cut_width"),
    ]
    for text, message in bad:
        with pytest.raises(SpecError, match=message) as error:
            parse_spec(_spec('state = "random"', text))
        assert error.value.key.startswith("measure.cut")
    with pytest.raises(SpecError, match="measure.cuts: interface cuts are measured on square"):
        parse_spec(_spec('state = "random"', 'cuts = [{ origin = [1, 2], direction = [1, 0] }]',
                         kind="triangular", size=(24, 24)))


def test_seeded_run_records_positions_with_their_cut_coordinates():
    from coarsen.simulate import simulate

    ds = simulate(parse_spec(_spec('state = "stripe"\nwidth = 10'))).dataset
    positions = ds["interface_position"]
    assert positions.dims == ("cut", "replica", "time")
    assert positions.attrs["units"] == "lattice spacings" and "long_name" in positions.attrs
    assert list(ds["cut_kind"].values) == ["flat"] * 8 and ds.attrs["cut_width"] == 5
    for name in ("cut_origin_x", "cut_origin_y", "cut_direction_x", "cut_direction_y",
                 "cut_length"):
        assert ds[name].dims == ("cut",) and "units" in ds[name].attrs
    np.testing.assert_allclose(positions.isel(time=0).values, 5.0)
    # at T = 0 a flat wall of the square lattice is frozen (every flip costs 4 J)
    np.testing.assert_array_equal(positions.values, 5.0)
    custom = simulate(parse_spec(_spec(
        'state = "random"', 'cuts = [{ origin = [5, 5], direction = [1, 0] }]'))).dataset
    assert custom["interface_position"].shape == (1, 2, 3)
    assert list(custom["cut"].values) == ["cut 0"]
    plain = simulate(parse_spec(_spec('state = "up"'))).dataset
    assert "interface_position" not in plain and "cut" not in plain.coords


def test_positions_survive_a_checkpoint_and_the_netcdf_file(tmp_path):
    from coarsen.dataset import open_dataset
    from coarsen.simulate import run_spec, simulate

    spec = parse_spec(_spec('state = "zigzag"\namplitude = 6\nperiod = 16'))
    whole = simulate(spec).dataset
    calls = []

    def stop_after_two(clock):
        calls.append(clock)
        if len(calls) == 2:
            raise KeyboardInterrupt

    out = tmp_path / "run.nc"
    checkpoint = tmp_path / "run.nc.checkpoint"
    with pytest.raises(KeyboardInterrupt):
        simulate(spec, checkpoint=checkpoint, checkpoint_every=1e-9, after_call=stop_after_two)
    resumed = simulate(spec, checkpoint=checkpoint, resume=True)
    assert resumed.resumed_at is not None
    np.testing.assert_array_equal(resumed.dataset["interface_position"].values,
                                  whole["interface_position"].values)
    run_spec(spec, out)
    read = open_dataset(out)
    np.testing.assert_array_equal(read["interface_position"].values,
                                  whole["interface_position"].values)
    assert list(read["cut"].values) == list(whole["cut"].values)
    coords = cut_coordinates(default_cuts("zigzag", spec.lattice, spec.initial.parameter_dict()))
    np.testing.assert_array_equal(read["cut_origin_x"].values, coords["cut_origin_x"][1])
