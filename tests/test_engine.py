"""The engine's Python API: energies, conservation laws, T = 0 behaviour and input checks."""

import numpy as np
import pytest

from coarsen.engine import (
    advance,
    energy_per_site,
    exchange_probabilities,
    flip_probabilities,
    magnetization_per_site,
    make_streams,
)
from coarsen.lattice import Lattice
from tests import reference
from tests.helpers import random_spins

KINDS = ("chain", "square", "triangular", "cubic")
BOUNDARIES = ("periodic", "open")
#: Small sizes with unequal (and some odd) axes.
SIZES = {"chain": (11,), "square": (5, 6), "triangular": (6, 4), "cubic": (3, 4, 5)}
#: Even sizes (and x divisible by 6) that every update accepts.
EVEN = {"chain": (12,), "square": (6, 4), "triangular": (6, 6), "cubic": (4, 4, 6)}


# --- energy and magnetization -------------------------------------------------------------
@pytest.mark.parametrize("J, h", [(1.0, 0.0), (1.0, 0.37), (-1.0, -1.25), (0.5, 2.0)])
@pytest.mark.parametrize("boundary", BOUNDARIES)
@pytest.mark.parametrize("kind", KINDS)
def test_energy_matches_bond_loop(kind, boundary, J, h):
    rng = np.random.default_rng(606)
    for size in (SIZES[kind], EVEN[kind]):
        lattice = Lattice(kind, size, boundary)
        spins = random_spins(rng, 4, lattice, up_fraction=0.4)
        np.testing.assert_allclose(energy_per_site(spins, lattice, J, h),
                                   reference.energy_per_site(spins, lattice, J, h),
                                   rtol=1e-14, atol=1e-14)


@pytest.mark.parametrize("kind, z", [("chain", 2), ("square", 4), ("triangular", 6),
                                     ("cubic", 6)])
def test_uniform_energy_is_minus_half_coordination(kind, z):
    # Periodic and all up: every site has z/2 bonds, each contributing -J.
    lattice = Lattice(kind, EVEN[kind])
    up = np.ones((2, *lattice.shape), dtype=np.int8)
    up[1] = -1
    np.testing.assert_array_equal(energy_per_site(up, lattice), [-z / 2, -z / 2])
    np.testing.assert_array_equal(energy_per_site(up, lattice, J=1.0, h=0.5),
                                  [-z / 2 - 0.5, -z / 2 + 0.5])
    np.testing.assert_array_equal(energy_per_site(up, lattice, J=-1.0), [z / 2, z / 2])
    np.testing.assert_array_equal(magnetization_per_site(up, lattice), [1.0, -1.0])


@pytest.mark.parametrize("kind", ["chain", "square", "cubic"])
def test_neel_state_energy_and_staggered_magnetization(kind):
    lattice = Lattice(kind, EVEN[kind])
    z = lattice.coordination
    neel = lattice.staggering[np.newaxis].copy()
    np.testing.assert_array_equal(energy_per_site(neel, lattice), [z / 2])
    np.testing.assert_array_equal(magnetization_per_site(neel, lattice), [0.0])
    np.testing.assert_array_equal(magnetization_per_site(neel, lattice, order="neel"), [1.0])


def test_open_energy_counts_only_inner_bonds():
    lattice = Lattice("square", (4, 3), "open")  # 3 * 3 + 4 * 2 = 17 bonds
    up = np.ones((1, *lattice.shape), dtype=np.int8)
    np.testing.assert_array_equal(energy_per_site(up, lattice), [-17 / 12])


# --- conservation ---------------------------------------------------------------------------
@pytest.mark.parametrize("rule", ["kawasaki", "kawasaki-nonlocal"])
@pytest.mark.parametrize("boundary", BOUNDARIES)
@pytest.mark.parametrize("kind", KINDS)
def test_kawasaki_conserves_magnetization_every_sweep(kind, boundary, rule):
    lattice = Lattice(kind, SIZES[kind], boundary)
    rng = np.random.default_rng(4242)
    spins = random_spins(rng, 3, lattice, up_fraction=0.35)
    streams = make_streams(4242, 3, lattice, rule)
    m0 = spins.reshape(3, -1).sum(axis=1)
    moved = 0
    for temperature in (0.0, 0.8, 2.5, 6.0, 50.0):
        moved += advance(spins, streams, lattice, 1, temperature, rule=rule, h=0.3).sum()
        np.testing.assert_array_equal(spins.reshape(3, -1).sum(axis=1), m0)
        assert set(np.unique(spins).tolist()) <= {-1, 1}
    assert moved > 0


# --- T = 0 ----------------------------------------------------------------------------------
@pytest.mark.parametrize("acceptance", ["heat-bath", "metropolis"])
@pytest.mark.parametrize("update", ["random", "checkerboard"])
@pytest.mark.parametrize("boundary", BOUNDARIES)
@pytest.mark.parametrize("kind", KINDS)
def test_glauber_never_raises_energy_at_zero_temperature(kind, boundary, update, acceptance):
    for J, h in ((1.0, 0.0), (-1.0, 0.3)):
        lattice = Lattice(kind, EVEN[kind], boundary)
        rng = np.random.default_rng(1000)
        spins = random_spins(rng, 3, lattice)
        streams = make_streams(1000, 3, lattice, "glauber", update)
        energy = energy_per_site(spins, lattice, J, h)
        flips = 0
        for _ in range(6):
            flips += advance(spins, streams, lattice, 1, 0.0, acceptance=acceptance,
                             update=update, J=J, h=h).sum()
            new = energy_per_site(spins, lattice, J, h)
            assert np.all(new <= energy + 1e-12)
            energy = new
        assert flips > 0


@pytest.mark.parametrize("rule", ["kawasaki", "kawasaki-nonlocal"])
@pytest.mark.parametrize("acceptance", ["heat-bath", "metropolis"])
def test_kawasaki_never_raises_energy_at_zero_temperature(rule, acceptance):
    for kind in KINDS:
        lattice = Lattice(kind, SIZES[kind])
        rng = np.random.default_rng(1001)
        spins = random_spins(rng, 2, lattice)
        streams = make_streams(1001, 2, lattice, rule)
        energy = energy_per_site(spins, lattice)
        for _ in range(4):
            advance(spins, streams, lattice, 1, 0.0, rule=rule, acceptance=acceptance)
            new = energy_per_site(spins, lattice)
            assert np.all(new <= energy + 1e-12)
            energy = new


def test_zero_temperature_tables_are_exact():
    # heat-bath: dE < 0 always, dE = 0 with 1/2, dE > 0 never; Metropolis: dE <= 0 always.
    hb = flip_probabilities(0.0, 4, J=1.0, h=0.0, acceptance="heat-bath")
    # columns f = -4 .. 4; rows old spin -1, +1
    np.testing.assert_array_equal(hb, [[0, 0, 0, 0, 0.5, 1, 1, 1, 1],
                                       [1, 1, 1, 1, 0.5, 0, 0, 0, 0]])
    me = flip_probabilities(0.0, 4, J=1.0, h=0.0, acceptance="metropolis")
    np.testing.assert_array_equal(me, [[0, 0, 0, 0, 1, 1, 1, 1, 1], [1, 1, 1, 1, 1, 0, 0, 0, 0]])
    ex = exchange_probabilities(0.0, 2, acceptance="heat-bath")  # q = -4 .. 6
    np.testing.assert_array_equal(ex, [1, 1, 1, 1, 0.5, 0, 0, 0, 0, 0, 0])
    assert [reference.threshold(p) for p in (0.0, 0.5, 1.0)] == [-1, 2**30 - 1, 2**31 - 1]


@pytest.mark.parametrize("acceptance", ["heat-bath", "metropolis"])
def test_probability_tables_follow_their_formulas(acceptance):
    T, J, h, z = 1.7, -1.0, 0.4, 6
    table = flip_probabilities(T, z, J, h, acceptance)
    for row, old in enumerate((-1, 1)):
        for f in range(-z, z + 1):
            dE = 2.0 * old * (J * f + h)
            p_flip = (1.0 / (1.0 + np.exp(dE / T)) if acceptance == "heat-bath"
                      else min(1.0, np.exp(-dE / T)))
            assert table[row, f + z] == pytest.approx(p_flip, rel=1e-12, abs=1e-15)
    ex = exchange_probabilities(T, z, J, acceptance)
    for q in range(-2 * z, 2 * z + 3):
        dE = 2.0 * J * q
        p = (1.0 / (1.0 + np.exp(dE / T)) if acceptance == "heat-bath"
             else min(1.0, np.exp(-dE / T)))
        assert ex[q + 2 * z] == pytest.approx(p, rel=1e-12, abs=1e-15)


# --- input checks ---------------------------------------------------------------------------
def _setup(kind="square", size=(6, 4), boundary="periodic", replicas=2, rule="glauber",
           update="random"):
    lattice = Lattice(kind, size, boundary)
    spins = np.ones((replicas, *lattice.shape), dtype=np.int8)
    return spins, make_streams(1, replicas, lattice, rule, update), lattice


def test_float_spins_rejected():
    spins, streams, lattice = _setup()
    with pytest.raises(TypeError, match=r"^spins: dtype is float64, expected int8"):
        advance(spins.astype(float), streams, lattice, 1, 1.0)
    with pytest.raises(TypeError, match=r"^spins: expected an int8 ndarray, got list"):
        advance(spins.tolist(), streams, lattice, 1, 1.0)
    with pytest.raises(TypeError, match=r"^spins: dtype is int64"):
        energy_per_site(spins.astype(np.int64), lattice)


@pytest.mark.parametrize("shape", [(2, 6, 4), (4, 6), (2, 4, 6, 1), (2, 3, 6)])
def test_wrong_spin_shape_rejected(shape):
    _, streams, lattice = _setup()
    with pytest.raises(ValueError, match=r"^spins: shape .* is not \(replicas, 4, 6\) for a "
                                         r"square 6x4 periodic lattice"):
        advance(np.ones(shape, dtype=np.int8), streams, lattice, 1, 1.0)


def test_no_replicas_rejected():
    _, streams, lattice = _setup()
    with pytest.raises(ValueError, match=r"^spins: needs at least one replica"):
        advance(np.ones((0, 4, 6), dtype=np.int8), streams[:0], lattice, 1, 1.0)


def test_non_contiguous_spins_rejected():
    spins, streams, lattice = _setup()
    wide = np.ones((2, 4, 12), dtype=np.int8)[:, :, ::2]
    with pytest.raises(ValueError, match=r"^spins: must be a C-contiguous, writeable array"):
        advance(wide, streams, lattice, 1, 1.0)


@pytest.mark.parametrize("value", [0, 2, -2, 127])
def test_spin_values_other_than_plus_minus_one_rejected(value):
    spins, streams, lattice = _setup()
    spins[1, 2, 3] = value
    before = spins.copy()
    with pytest.raises(ValueError, match=r"^spins: values must be \+1 or -1"):
        advance(spins, streams, lattice, 1, 1.0)
    np.testing.assert_array_equal(spins, before)


@pytest.mark.parametrize("kind, size, boundary, pattern", [
    ("square", (5, 4), "periodic", r"checkerboard.*even"),
    ("square", (4, 5), "periodic", r"checkerboard.*even"),
    ("cubic", (4, 4, 3), "periodic", r"checkerboard.*even"),
    ("chain", (9,), "periodic", r"checkerboard.*even"),
    ("square", (5, 4), "open", r"checkerboard.*x size 5 must be even"),
    ("triangular", (6, 4), "periodic", r"checkerboard.*divisible by 3"),
    ("triangular", (4, 6), "periodic", r"checkerboard.*divisible by 3"),
    ("triangular", (4, 6), "open", r"x size 4 divisible by 3"),
])
def test_checkerboard_needs_a_colourable_size(kind, size, boundary, pattern):
    lattice = Lattice(kind, size, boundary)
    spins = np.ones((1, *lattice.shape), dtype=np.int8)
    streams = make_streams(1, 1, lattice)  # random-update streams are valid here
    with pytest.raises(ValueError, match=r"^lattice size: .*" + pattern):
        advance(spins, streams, lattice, 1, 1.0, update="checkerboard")
    with pytest.raises(ValueError, match=r"^lattice size: .*" + pattern):
        make_streams(1, 1, lattice, "glauber", "checkerboard")


@pytest.mark.parametrize("rule", ["kawasaki", "kawasaki-nonlocal"])
def test_kawasaki_has_no_checkerboard_update(rule):
    spins, streams, lattice = _setup()
    with pytest.raises(ValueError, match=r"^update: 'checkerboard' updates apply to rule "
                                         rf"'glauber' only, not '{rule}'"):
        advance(spins, streams, lattice, 1, 1.0, rule=rule, update="checkerboard")


@pytest.mark.parametrize("temperature", [-1.0, -1e-300, np.nan, np.inf, -np.inf,
                                         [1.0, np.nan, 2.0], [1.0, 2.0, -0.5]])
def test_bad_temperature_rejected(temperature):
    spins, streams, lattice = _setup()
    before = (spins.copy(), streams.copy())
    with pytest.raises(ValueError, match=r"^temperature: .* is not a finite temperature >= 0"):
        advance(spins, streams, lattice, 3, temperature)
    np.testing.assert_array_equal(spins, before[0])
    np.testing.assert_array_equal(streams, before[1])


@pytest.mark.parametrize("temperature, shape", [([1.0, 2.0], r"\(2,\)"),
                                                ([1.0] * 4, r"\(4,\)"),
                                                ([[1.0, 2.0, 3.0]], r"\(1, 3\)")])
def test_temperature_array_must_have_one_value_per_sweep(temperature, shape):
    spins, streams, lattice = _setup()
    with pytest.raises(ValueError, match=r"^temperature: give one value or one per sweep \(3\), "
                                         r"got shape " + shape):
        advance(spins, streams, lattice, 3, temperature)


@pytest.mark.parametrize("temperature", ["warm", None, [1.0, "hot"]])
def test_non_numeric_temperature_rejected_naming_the_parameter(temperature):
    # As for J and h: a value that is not a number is named in the message (today "warm"
    # gives NumPy's bare "could not convert string to float" and None is read as NaN).
    spins, streams, lattice = _setup()
    with pytest.raises((TypeError, ValueError),
                       match=r"^temperature: .*(is not a number|not a finite)") as info:
        advance(spins, streams, lattice, 2, temperature)
    assert "nan" not in str(info.value).lower()


@pytest.mark.parametrize("option, value", [("rule", "metropolis"), ("rule", "Glauber"),
                                           ("acceptance", "glauber"), ("acceptance", None),
                                           ("update", "sequential"), ("update", "n-fold")])
def test_unknown_choices_rejected(option, value):
    spins, streams, lattice = _setup()
    with pytest.raises(ValueError, match=rf"^{option}: {value!r} is not one of "):
        advance(spins, streams, lattice, 1, 1.0, **{option: value})


@pytest.mark.parametrize("sweeps, error", [(-1, ValueError), (-100, ValueError),
                                           (1.5, TypeError), (True, TypeError), ("3", TypeError)])
def test_bad_sweeps_rejected(sweeps, error):
    # STYLE.md 11: ValueError for bad values, TypeError for bad types
    spins, streams, lattice = _setup()
    with pytest.raises(error, match=r"^sweeps: .* is not a whole number >= 0"):
        advance(spins, streams, lattice, sweeps, 1.0)


@pytest.mark.parametrize("name, value", [("J", np.nan), ("h", np.inf)])
def test_non_finite_coupling_rejected(name, value):
    spins, streams, lattice = _setup()
    with pytest.raises(ValueError, match=rf"^{name}: .* is not finite"):
        advance(spins, streams, lattice, 1, 1.0, **{name: value})


def test_wrong_streams_rejected():
    spins, streams, lattice = _setup()
    with pytest.raises(ValueError, match=r"^streams: shape \(1, 1, 64\) .* = \(2, 1, 64\)"):
        advance(spins, streams[:1].copy(), lattice, 1, 1.0)
    with pytest.raises(ValueError, match=r"^streams: shape \(2, 1, 64\) .* = \(2, 4, 64\)"):
        advance(spins, streams, lattice, 1, 1.0, update="checkerboard")  # 4 row blocks
    with pytest.raises(ValueError, match=r"^streams: shape \(2, 64\)"):
        advance(spins, streams[:, 0].copy(), lattice, 1, 1.0)
    with pytest.raises(TypeError, match=r"^streams: expected a uint64 ndarray"):
        advance(spins, streams.astype(np.int64), lattice, 1, 1.0)
    dead = streams.copy()
    dead[0, 0, :] = 0
    with pytest.raises(ValueError, match=r"^streams: a generator state is all zero"):
        advance(spins, dead, lattice, 1, 1.0)


def test_lattice_must_be_a_lattice():
    spins, streams, _ = _setup()
    with pytest.raises(TypeError, match=r"^lattice: expected a coarsen.Lattice, got tuple"):
        advance(spins, streams, ("square", (6, 4)), 1, 1.0)
