"""The sublattice gauge: an antiferromagnet's Glauber run is its ferromagnet's run, staggered.

On a bipartite lattice the map s_i -> (-1)**colour(i) s_i takes the Hamiltonian -J sum s_i s_j
(no field) to the one with -J, and Glauber's flip probabilities depend only on the energy
change, which the map keeps (Glauber 1963; the gauge is textbook, e.g. Baxter, Exactly Solved
Models in Statistical Mechanics, 1982, sec. 1.8 — recalled from memory). The engine decides
"flip when the word is at most the flip threshold", so with the same seed the two runs make the
same moves and the configurations are equal after staggering, bit for bit. Kawasaki exchanges
are not covered: the gauge maps magnetization conservation to staggered-magnetization
conservation, a different dynamics. Nor is the rejection-free update, whose classes are
labelled by (spin, neighbour sum) and so are ordered differently under the map (equal in
distribution only).
"""

import numpy as np
import pytest

from coarsen.engine import advance, energy_per_site, make_streams
from coarsen.lattice import Lattice
from coarsen.simulate import simulate
from coarsen.spec import parse_spec
from tests.helpers import random_spins
from tests.specs import spec_text

LATTICES = [
    Lattice("chain", (40,)),
    Lattice("chain", (16,), "open"),
    Lattice("square", (12, 10)),
    Lattice("square", (10, 7), "open"),  # odd y: colours still alternate along x
    Lattice("cubic", (6, 4, 8)),
    Lattice("cubic", (6, 5, 3), "open"),
]
IDS = [f"{lat.kind}-{lat.boundary}-{'x'.join(map(str, lat.size))}" for lat in LATTICES]


def _pair(lattice, update, acceptance, temperature, sweeps, seed):
    """(ferromagnet spins, antiferromagnet spins, moves of each) after ``sweeps`` sweeps."""
    rng = np.random.default_rng(seed)
    ferro = random_spins(rng, 2, lattice)
    anti = ferro * lattice.staggering
    streams_f = make_streams(seed, 2, lattice, "glauber", update)
    streams_a = make_streams(seed, 2, lattice, "glauber", update)
    moves_f = advance(ferro, streams_f, lattice, sweeps, temperature, acceptance=acceptance,
                      update=update, J=1.0)
    moves_a = advance(anti, streams_a, lattice, sweeps, temperature, acceptance=acceptance,
                      update=update, J=-1.0)
    np.testing.assert_array_equal(streams_f, streams_a)
    return ferro, anti, moves_f, moves_a


@pytest.mark.parametrize("lattice", LATTICES, ids=IDS)
@pytest.mark.parametrize("update", ["random", "checkerboard"])
@pytest.mark.parametrize("acceptance", ["heat-bath", "metropolis"])
def test_antiferromagnet_run_is_the_staggered_ferromagnet_run(lattice, update, acceptance):
    # T from 2 Tc (2 J for the chain) down to 0.3, as a schedule (one T per sweep), so every
    # table is used.
    temperature = np.linspace(2.0 * max(lattice.tc, 1.0), 0.3, 12)
    ferro, anti, moves_f, moves_a = _pair(lattice, update, acceptance, temperature, 12, seed=5)
    assert np.all(moves_f > 0)  # the runs did something
    np.testing.assert_array_equal(anti, ferro * lattice.staggering)
    np.testing.assert_array_equal(moves_a, moves_f)
    np.testing.assert_array_equal(energy_per_site(anti, lattice, J=-1.0),
                                  energy_per_site(ferro, lattice, J=1.0))


def test_the_identity_needs_the_map():
    # Control: without staggering the start, the antiferromagnet's run differs, so the test
    # above can fail.
    lattice = Lattice("square", (12, 10))
    rng = np.random.default_rng(5)
    ferro = random_spins(rng, 1, lattice)
    anti = ferro.copy()
    for spins, J in ((ferro, 1.0), (anti, -1.0)):
        advance(spins, make_streams(5, 1, lattice, "glauber", "random"), lattice, 5, 1.5, J=J)
    assert not np.array_equal(anti, ferro * lattice.staggering)
    assert not np.array_equal(anti, ferro)


@pytest.mark.parametrize("update", ["random", "checkerboard"])
def test_neel_order_run_reproduces_the_ferromagnet_dataset(update):
    # The whole stack: a quench of the J = -1 model measured with order = "neel" gives the
    # J = +1 model's dataset (order "ferro"), variable for variable, snapshots included.
    common = dict(size=(16, 16), update=update, replicas=2, seed=23, snapshots=2,
                  temperature="value = 1.4",
                  times='times = { start = 1, stop = 40, count = 6, spacing = "log" }')
    ferro = simulate(parse_spec(spec_text(**common))).dataset
    anti = simulate(parse_spec(spec_text(**common, extra='order = "neel"\n\n[model]\nJ = -1.0')))
    anti = anti.dataset
    compared = 0
    for name, variable in ferro.data_vars.items():
        if name == "snapshot":  # raw spins: staggered ((-1)**(x + y), symmetric on 16 x 16)
            staggering = parse_spec(spec_text(**common)).lattice.staggering
            np.testing.assert_array_equal(anti[name].values, variable.values * staggering)
        else:
            np.testing.assert_array_equal(anti[name].values, variable.values, err_msg=name)
        compared += 1
    assert compared >= 5 and "snapshot" in ferro
