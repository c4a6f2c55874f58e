"""Exact finite-time distributions of tiny lattices: the dynamics itself, not only its
stationary state.

For lattices of 8 or 9 sites the one-sweep transition matrix P over all 2**N states is built
from the definitions of the moves (``_transitions.sweep_matrix``: heat-bath and Metropolis rates,
REFERENCE.md Sect. 0; N uniformly chosen attempts per random-sequential sweep, colour by
colour for sublattice sweeps, shared/DESIGN.md) -- derived here [D], no published source.
Starting from independent uniformly random spins (or a uniformly random state of a fixed-M
sector for Kawasaki), the distribution of the full configuration after n sweeps is
``p_n = p_0 P**n``. Each of 40000 independent replicas is measured once per time, so the
chi-squared test (categories merged to expected counts >= 5, pass at p > 1e-3, common
practice) needs no autocorrelation correction. This holds the engine to its exact rates,
its site selection and its sweep definition (the time unit), far from equilibrium.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pytest

from coarsen.engine import advance, make_streams
from coarsen.lattice import Lattice
from tests.validation._transitions import sweep_matrix
from tests.validation._equilibrium import P_THRESHOLD, chi_square_test, random_spins

REPLICAS = 40_000


@dataclass(frozen=True)
class Transient:
    kind: str
    size: tuple
    temperature: float
    seed: int
    rule: str = "glauber"
    update: str = "random"
    acceptance: str = "heat-bath"
    J: float = 1.0
    h: float = 0.0
    n_up: int | None = None
    boundary: str = "periodic"
    times: tuple = (1, 3)

    @property
    def id(self):
        out = "-".join([self.kind, "x".join(map(str, self.size)), self.boundary[:4],
                        f"T{self.temperature:g}", self.rule, self.acceptance, self.update])
        if self.J != 1:
            out += f"-J{self.J:g}"
        if self.h:
            out += f"-h{self.h:g}"
        if self.n_up is not None:
            out += f"-up{self.n_up}"
        return out


CASES = [
    *[Transient("chain", (8,), 1.0, 700 + 2 * i + j, update=u, acceptance=a)
      for i, u in enumerate(("random", "checkerboard"))
      for j, a in enumerate(("heat-bath", "metropolis"))],
    Transient("chain", (8,), 1.5, 704, h=0.4),
    *[Transient("chain", (8,), 1.0, 710 + 2 * i + j, rule=r, acceptance=a, n_up=3)
      for i, r in enumerate(("kawasaki", "kawasaki-nonlocal"))
      for j, a in enumerate(("heat-bath", "metropolis"))],
    Transient("square", (3, 3), 2.0, 720),
    Transient("square", (3, 3), 2.0, 721, acceptance="metropolis", J=-1.0, h=0.3),
    Transient("square", (3, 3), 2.0, 722, rule="kawasaki", n_up=4),
    Transient("triangular", (3, 3), 3.0, 723),
    Transient("triangular", (3, 3), 3.0, 724, update="checkerboard"),
    Transient("triangular", (3, 3), 3.0, 725, update="checkerboard", acceptance="metropolis"),
    Transient("cubic", (2, 2, 2), 2.0, 726, boundary="open", update="checkerboard"),
    Transient("cubic", (2, 2, 2), 2.0, 727, boundary="open", rule="kawasaki",
              acceptance="metropolis", n_up=4),
]


def _state_index(spins: np.ndarray) -> np.ndarray:
    """Bit i set where flat site i is down (the ordering of ``_exact``)."""
    flat = spins.reshape(spins.shape[0], -1)
    return ((flat < 0).astype(np.int64) << np.arange(flat.shape[1])).sum(axis=1)


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_distribution_after_n_sweeps(case: Transient):
    """Full-configuration histogram of 40000 replicas after 1 and 3 sweeps against p_0 P**n."""
    lattice = Lattice(case.kind, case.size, case.boundary)
    n = lattice.n_sites
    P = sweep_matrix(case.kind, case.size, case.boundary == "periodic", case.rule,
                            case.update, case.acceptance, case.temperature, case.J, case.h)
    assert np.allclose(P.sum(axis=1), 1.0)
    states = np.arange(2**n)
    if case.n_up is None:
        p = np.full(2**n, 2.0**-n)
    else:
        down = np.array([bin(k).count("1") for k in states])
        p = np.where(down == n - case.n_up, 1.0, 0.0)
        p /= p.sum()
    spins = random_spins(np.random.default_rng([case.seed, 4]), REPLICAS, lattice, case.n_up)
    assert chi_square_test(_state_index(spins)[:, None], states[p > 0, None],
                           p[p > 0]).p_value > P_THRESHOLD  # the start itself
    streams = make_streams(case.seed, REPLICAS, lattice, case.rule, case.update)
    clock = 0
    failures = []
    for t in case.times:
        advance(spins, streams, lattice, t - clock, case.temperature, rule=case.rule,
                update=case.update, acceptance=case.acceptance, J=case.J, h=case.h)
        p = p @ np.linalg.matrix_power(P, t - clock)
        clock = t
        keep = p > 1e-300
        result = chi_square_test(_state_index(spins)[:, None], states[keep, None], p[keep])
        print(f"\n[exact-dynamics] {case.id} t={t}: {result}")
        if result.unexpected or not result.p_value > P_THRESHOLD:
            failures.append(f"t={t}: {result}, {result.unexpected} samples in states of "
                            "zero exact probability")
    assert not failures, f"{case.id}: " + "; ".join(failures)


def test_exact_dynamics_detects_a_wrong_time_unit():
    """Power check: the heat-bath 8-ring after 3 random-sequential sweeps is rejected
    (p < 1e-6) against the exact distribution after 2 or 4 sweeps."""
    lattice = Lattice("chain", 8)
    P = sweep_matrix("chain", (8,), True, "glauber", "random", "heat-bath", 1.0)
    spins = random_spins(np.random.default_rng(5), REPLICAS, lattice)
    advance(spins, make_streams(5, REPLICAS, lattice), lattice, 3, 1.0)
    observed = _state_index(spins)[:, None]
    p0 = np.full(256, 1 / 256)
    for t, ok in ((2, False), (3, True), (4, False)):
        p = p0 @ np.linalg.matrix_power(P, t)
        result = chi_square_test(observed, np.arange(256)[:, None], p)
        print(f"\n[exact-dynamics] 3 sweeps vs exact t={t}: {result}")
        assert (result.p_value > P_THRESHOLD) if ok else (result.p_value < 1e-6)
    assert math.isclose(P.sum(), 256)
