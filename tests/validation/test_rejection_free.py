"""Rejection-free (n-fold way) updates against exact results and against random-sequential runs.

* Equilibrium (Bortz, Kalos & Lebowitz, J. Comput. Phys. 17, 10 (1975): the n-fold way is
  the continuous-time version of the same Markov chain, so it samples the Boltzmann
  distribution, restricted to the starting magnetization for Kawasaki exchanges, Kawasaki,
  Phys. Rev. 145, 224 (1966) [M]). The exact distributions come from enumerating all 2**16
  states of the 4x4 torus (``_exact.py``, checked against REFERENCE.md Sect. 8-9 in
  ``test_enumeration.py``). The histogram is *time-weighted*: configurations are taken at
  equally spaced times of the continuous clock, so each state counts with the time the
  chain spends in it (not once per event). Chi-squared at p > 1e-3 with the protocol and
  statistics of ``test_enumeration.py`` (512 replicas, correlation-corrected statistic).
* Dynamical equivalence: one sweep of random-sequential updates and one unit of the
  rejection-free clock are the same physical time (both realise the rates of one attempt
  per site, or per site and direction, per unit time). The mean energy and domain length of
  the same spec, run with both updates and different seeds, must agree within their
  replica standard errors at every measurement time; and must *disagree* when one of the
  clocks is stretched by 1.5 (so the comparison can fail).
* Glauber's exact chain dynamics (Glauber, J. Math. Phys. 4, 294 (1963)): after a quench from
  T = infinity the wall density follows the closed form (``_exact.glauber_wall_density``).
  The n-fold way simulates the continuous-time process itself, so the comparison is exact
  (no Poisson-versus-fixed number of attempts per unit time).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from coarsen.engine import advance, make_streams
from coarsen.lattice import Lattice
from coarsen.simulate import simulate
from coarsen.spec import parse_spec
from tests.validation import _exact
from tests.validation._equilibrium import P_THRESHOLD, Z_TOLERANCE, boltzmann_check, random_spins
from tests.validation.test_enumeration import Case, _exact_classes, _sample

# ------------------------------------------------------------------------------------------
# equilibrium on the 4x4 torus
# ------------------------------------------------------------------------------------------
_SQ = dict(kind="square", size=(4, 4), boundary="periodic", temperature=2.5,
           update="rejection-free", keys=("E", "EM", "directions"))
_KAW = dict(_SQ, rule="kawasaki", keys=("E", "directions"))

CASES = [
    Case(**_SQ, seed=501, interval=32),
    Case(**_SQ, seed=502, interval=32, acceptance="metropolis"),
    Case(**_SQ, seed=503, interval=16, h=0.3),
    Case(**_KAW, seed=504, interval=32, n_up=8),
    Case(**_KAW, seed=505, interval=16, n_up=10, acceptance="metropolis"),
    # open boundaries: sites of coordination 3..6 share the classes by neighbour sum
    Case(kind="cubic", size=(4, 2, 2), boundary="open", temperature=3.0, seed=506,
         interval=8, keys=("E", "EM", "directions"), update="rejection-free"),
]


@pytest.mark.parametrize("case", [pytest.param(c, id=c.id) for c in CASES])
def test_time_weighted_histograms_are_boltzmann(case: Case):
    samples = _sample(case)
    classes, prob = _exact_classes(case)
    if case.n_up is not None:
        m0 = 2 * case.n_up - case.lattice.n_sites
        assert np.all(samples.magnetization == m0), "Kawasaki must conserve M"
    failures = []
    for key in case.keys:
        result = boltzmann_check(samples, classes, prob, key, case.id, assert_pass=False)
        if result.unexpected or not result.p_value > P_THRESHOLD:
            failures.append(f"[{key}] {result}")
    assert not failures, "\n".join(failures)


# ------------------------------------------------------------------------------------------
# dynamical equivalence with random-sequential updates
# ------------------------------------------------------------------------------------------
TIMES = [1, 2, 4, 8, 16, 32, 64, 128, 256]
STRETCHED = [round(1.5 * t) for t in TIMES]


def _spec(rule, update, seed, *, kind, size, boundary, temperature, acceptance, h):
    times = sorted(set(TIMES) | set(STRETCHED))
    return parse_spec(f"""
[lattice]
kind = "{kind}"
size = {list(size)}
boundary = "{boundary}"
[model]
h = {h}
[dynamics]
rule = "{rule}"
acceptance = "{acceptance}"
update = "{update}"
[temperature]
value = {temperature}
[initial]
state = "random"
[measure]
times = {{ at = {times} }}
snapshots = 0
[ensemble]
replicas = 24
seed = {seed}
""")


def _series(ds, times):
    """(name, mean (T,), standard error (T,)) of energy and two length estimators, over the
    replicas where the value is defined (a length is undefined once a replica has ordered);
    NaN where fewer than 12 of the 24 replicas have it."""
    out = []
    sel = ds.sel(time=np.asarray(times, dtype=float))
    for name, values in (("energy", sel["energy"].values),
                         ("L corr_half", sel["length"].sel(estimator="corr_half").values),
                         ("L wall", sel["length"].sel(estimator="wall").values)):
        finite = np.isfinite(values)
        n = finite.sum(axis=0)
        enough = n >= 12
        v = np.where(finite, values, 0.0)
        mean = v.sum(axis=0) / np.maximum(n, 1)
        var = (np.where(finite, values - mean, 0.0) ** 2).sum(axis=0) / np.maximum(n - 1, 1)
        out.append((name, np.where(enough, mean, np.nan),
                    np.where(enough, np.sqrt(var / np.maximum(n, 1)), np.nan)))
    return out


EQUIVALENCE = [
    dict(rule="glauber", kind="square", size=(64, 64), boundary="periodic", temperature=1.2,
         acceptance="heat-bath", h=0.0),
    dict(rule="glauber", kind="triangular", size=(40, 40), boundary="open", temperature=2.0,
         acceptance="metropolis", h=0.05),
    dict(rule="kawasaki", kind="square", size=(40, 40), boundary="periodic", temperature=1.3,
         acceptance="metropolis", h=0.0),
]


@pytest.mark.parametrize("setup", EQUIVALENCE, ids=lambda s: f"{s['rule']}-{s['kind']}")
def test_same_physics_as_random_sequential_updates(setup):
    """|z| < 4.5 for every time and observable (at most 27 comparisons, a false alarm rate
    near 2e-4 for Gaussian errors); with the rejection-free clock read at 1.5 t the largest
    |z| must exceed 8."""
    random = simulate(_spec(update="random", seed=71, **setup)).dataset
    fast = simulate(_spec(update="rejection-free", seed=72, **setup)).dataset
    z_all, stretched_all = [], []
    for (name, m1, e1), (_, m2, e2), (_, m3, e3) in zip(
            _series(random, TIMES), _series(fast, TIMES), _series(fast, STRETCHED)):
        z = (m1 - m2) / np.hypot(e1, e2)
        stretched = (m1 - m3) / np.hypot(e1, e3)
        print(f"[equivalence] {setup['rule']} {setup['kind']} {name}: z = "
              f"{np.array2string(z, precision=2)}; stretched max |z| = "
              f"{np.nanmax(np.abs(stretched), initial=0):.1f}")
        z_all.extend(z[np.isfinite(z)])
        stretched_all.extend(stretched[np.isfinite(stretched)])
    assert len(z_all) >= 15  # energy at all 9 times and lengths at 6 or more
    assert np.abs(z_all).max() < 4.5
    assert np.abs(stretched_all).max() > 8


# ------------------------------------------------------------------------------------------
# Glauber's chain
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("temperature", [0.0, 1.0])
def test_chain_wall_density_follows_glauber(temperature):
    """Ring of 1e5 sites, 10 replicas, heat-bath rates, quench from random spins: rho(t) at
    t = 1, 2, 5, 10, 20, 50 within 5 standard errors (blocks of 1000 sites) of
    rho = e^{-2t}[I0(2t) + I1(2t)]/2 at T = 0 and of the image solution at T = 1."""
    n_sites, replicas, block = 100_000, 10, 1000
    lattice = Lattice("chain", n_sites)
    spins = random_spins(np.random.default_rng([950, int(temperature)]), replicas, lattice)
    streams = make_streams(951 + int(temperature), replicas, lattice, "glauber",
                           "rejection-free")
    clock = 0
    failures = []
    for t in (1, 2, 5, 10, 20, 50):
        advance(spins, streams, lattice, t - clock, temperature, update="rejection-free")
        clock = t
        s = spins.astype(np.int64)
        walls = (1 - s * np.roll(s, -1, axis=1)) / 2
        means = walls.reshape(replicas, -1, block).mean(axis=2).ravel()
        mean, err = means.mean(), means.std(ddof=1) / math.sqrt(means.size)
        exact = _exact.glauber_wall_density(t, temperature)
        z = (mean - exact) / err
        print(f"[glauber chain] T={temperature:g} t={t:>3}: rho = {mean:.6f} +- {err:.1e} vs "
              f"exact {exact:.6f}: z = {z:+.2f}")
        if not abs(z) < Z_TOLERANCE:
            failures.append(f"t={t}: {mean:.6f} +- {err:.1e} vs {exact:.6f} (z = {z:+.2f})")
    assert not failures, "\n".join(failures)
