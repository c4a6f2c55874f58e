"""Rejection-free (n-fold way) updates: the Python side of ``update = "rejection-free"``.

The n-fold way of Bortz, Kalos & Lebowitz (J. Comput. Phys. 17, 10 (1975)) spends its work
only on moves that happen: moves are grouped in classes of equal rate, an event picks a
class by its total rate and a move uniformly within it, and the clock advances by an
exponential waiting time. It samples the same continuous-time Markov process as
random-sequential updates (one sweep = N attempts = one unit of time), with the same
per-move probabilities to the last bit, so both describe the same physical time; at late
times and low temperatures, where almost every random attempt is rejected, it is much
faster. Glauber flips and nearest-neighbour Kawasaki exchanges are supported, on every
lattice kind, periodic or open; the classes and the clock are described in
:mod:`coarsen.kernels.rejection_free`.

Time steps of a protocol. The temperature is constant within each sweep [t, t + 1) and takes
the protocol's value for that sweep, as for the other updates. The class rates are
recomputed at every sweep boundary and the waiting time drawn afresh there, which is exact
(the exponential distribution is memoryless); so a run depends only on the spins and the
streams at whole sweeps, and splitting it into calls of any length, or checkpointing and
resuming it, gives the same bits. The state at a measurement time t is the state after the
last event before t.

:func:`coarsen.engine.advance` dispatches here for ``update="rejection-free"``;
:func:`class_list_mismatches` is the debug check that recounts the classes from scratch.
"""

from __future__ import annotations

import numpy as np

from coarsen.kernels.rejection_free import glauber_rejection_free, kawasaki_rejection_free
from coarsen.lattice import Lattice

__all__ = ["RULES", "advance_events", "class_list_mismatches"]

#: Rules with a rejection-free update.
RULES = ("glauber", "kawasaki")


def _geometry(lattice: Lattice):
    """(forward offsets (zf, 3), dims (3,)) as int64 arrays for the kernels."""
    forward = np.zeros((len(lattice.forward_offsets), 3), dtype=np.int64)
    for j, off in enumerate(lattice.forward_offsets):
        forward[j, : len(off)] = off
    size = list(lattice.size) + [1] * (3 - lattice.dimension)
    return forward, np.array(size, dtype=np.int64)


def advance_events(flat_spins: np.ndarray, streams: np.ndarray, limits: np.ndarray,
                   lattice: Lattice, rule: str, sweeps: int, moves: np.ndarray,
                   verify: bool = False) -> np.ndarray:
    """Run the rejection-free kernel of ``rule`` on arrays already checked by the engine.

    Parameters
    ----------
    flat_spins : ndarray of shape (R, N) and dtype int8
        Configurations, modified in place.
    streams : ndarray of shape (R, 4 * LANES) and dtype uint64
        One stream per replica, advanced in place.
    limits : ndarray of dtype int32
        The engine's threshold tables, one per sweep: (sweeps, 2, 2 z + 1) for Glauber
        (``flip_probabilities``), (sweeps, 4 z + 3) for Kawasaki (``exchange_probabilities``).
    lattice : Lattice
    rule : {"glauber", "kawasaki"}
    sweeps : int
        Units of time to advance.
    moves : ndarray of shape (R,) and dtype int64
        Incremented by the moves made.
    verify : bool, default: False
        Rebuild the class lists from scratch after every sweep and compare.

    Returns
    -------
    ndarray of shape (R,) and dtype int64
        Arrays of the class bookkeeping that differed from the recount (zeros unless
        ``verify``).
    """
    if rule not in RULES:
        raise ValueError(f"rule: {rule!r} has no rejection-free update; choose one of "
                         f"{', '.join(map(repr, RULES))}")
    mismatches = np.zeros(flat_spins.shape[0], dtype=np.int64)
    kernel = glauber_rejection_free if rule == "glauber" else kawasaki_rejection_free
    forward, dims = _geometry(lattice)
    kernel(flat_spins, streams, np.ascontiguousarray(limits), forward, dims, lattice.periodic,
           int(sweeps), moves, bool(verify), mismatches)
    return mismatches


def class_list_mismatches(spins: np.ndarray, streams: np.ndarray, lattice: Lattice,
                          sweeps: int, temperature, *, rule: str = "glauber",
                          acceptance: str = "heat-bath", J: float = 1.0,
                          h: float = 0.0) -> np.ndarray:
    """Advance like ``advance(..., update="rejection-free")`` and check the class lists.

    After every sweep the kernel rebuilds its class lists (the members of every class, the
    counts at both levels, each move's class) and the neighbour sums from the spins alone and
    compares them with the ones it kept up to date event by event.

    Parameters are those of :func:`coarsen.engine.advance`.

    Returns
    -------
    ndarray of shape (R,) and dtype int64
        Number of bookkeeping arrays that differed from the recount, summed over the sweeps:
        all zero when the bookkeeping is right.
    """
    from coarsen import engine
    from coarsen._validation import check_spins
    from coarsen.rng import check_streams

    engine.check_dynamics(lattice, rule, acceptance, "rejection-free")
    check_spins(spins, lattice, writeable=True)
    if isinstance(sweeps, bool) or not isinstance(sweeps, (int, np.integer)) or sweeps < 1:
        raise ValueError(f"sweeps: {sweeps!r} is not a whole number >= 1")
    check_streams(streams, spins.shape[0], 1)
    temperatures = np.broadcast_to(np.asarray(temperature, dtype=float), (int(sweeps),))
    z = lattice.coordination
    if rule == "glauber":
        tables = [engine.flip_probabilities(t, z, J, h, acceptance) for t in temperatures]
    else:
        tables = [engine.exchange_probabilities(t, z, J, acceptance) for t in temperatures]
    limits = np.stack([engine._limits(p) for p in tables])
    moves = np.zeros(spins.shape[0], dtype=np.int64)
    return advance_events(spins.reshape(spins.shape[0], -1), streams[:, 0], limits, lattice,
                          rule, int(sweeps), moves, verify=True)
