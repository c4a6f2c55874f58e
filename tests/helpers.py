"""Small shared helpers for the engine tests (no fixtures; seeds stay in the tests)."""

from __future__ import annotations

import numpy as np

from coarsen.engine import advance, make_streams
from tests import reference

__all__ = ["random_spins", "compare_with_twin"]


#: The kernel comparisons run every lattice kind, boundary and acceptance rule.
KINDS = ("chain", "square", "triangular", "cubic")
BOUNDARIES = ("periodic", "open")
ACCEPTANCES = ("heat-bath", "metropolis")
#: Random-sequential comparisons, per kind: a size below 256 sites and one above, neither a
#: multiple of 256, so the 256-attempt word blocks straddle the end of a sweep.
RANDOM_SEQUENTIAL_SIZES = {
    "chain": ((37,), (300,)),
    "square": ((7, 5), (17, 16)),
    "triangular": ((5, 7), (15, 19)),
    "cubic": ((3, 4, 5), (7, 6, 7)),
}
#: One sweep at T = 0, then a per-sweep temperature array (T near and far above Tc).
SCHEDULE = [(1, 0.0), (2, [1.1, 2.6])]


def random_spins(rng: np.random.Generator, replicas: int, lattice, up_fraction=0.5) -> np.ndarray:
    """Independent random +-1 configurations, int8 of shape (replicas, *lattice.shape)."""
    shape = (replicas, *lattice.shape)
    return np.where(rng.random(shape) < up_fraction, 1, -1).astype(np.int8)


def compare_with_twin(lattice, seed: int, schedule, *, replicas: int = 2, up_fraction=0.5,
                      spins=None, **dynamics) -> np.ndarray:
    """Run ``advance`` and the brute-force twin side by side through ``schedule``.

    ``schedule`` is a list of (sweeps, temperature) calls. After every call the spins, the
    stream states and the accepted-move counts must be identical. Returns the total moves
    per replica (so the caller can check the comparison was not vacuous).
    """
    rng = np.random.default_rng(seed)
    if spins is None:
        spins = random_spins(rng, replicas, lattice, up_fraction)
    streams = make_streams(seed, spins.shape[0], lattice, dynamics.get("rule", "glauber"),
                           dynamics.get("update", "random"))
    twin_spins, twin_streams = spins.copy(), streams.copy()
    total = np.zeros(spins.shape[0], dtype=np.int64)
    for call, (sweeps, temperature) in enumerate(schedule):
        before = streams.copy()
        moves = advance(spins, streams, lattice, sweeps, temperature, **dynamics)
        twin_moves = reference.advance(twin_spins, twin_streams, lattice, sweeps, temperature,
                                       **dynamics)
        where = f"{lattice.describe()} {dynamics} call {call} ({sweeps}, {temperature})"
        np.testing.assert_array_equal(spins, twin_spins, err_msg=f"spins differ: {where}")
        np.testing.assert_array_equal(streams, twin_streams, err_msg=f"streams differ: {where}")
        np.testing.assert_array_equal(moves, twin_moves, err_msg=f"move counts differ: {where}")
        if sweeps > 0:
            assert not np.array_equal(streams, before), f"streams did not advance: {where}"
        total += moves
    return total
