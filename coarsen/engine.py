"""The dynamics engine's Python API: validate, build acceptance tables, call the kernels.

Conventions (``shared/DESIGN.md``): ``H = -J sum_<ij> s_i s_j - h sum_i s_i`` with s = +-1,
k_B = 1, time in Monte Carlo sweeps (one sweep = N attempted moves for N sites).

Time convention. One random-sequential heat-bath sweep is one unit of Glauber's time
(Glauber, J. Math. Phys. 4, 294 (1963)): each site is attempted once per unit time on
average, and in one dimension the heat-bath probability equals Glauber's rate. A
checkerboard sweep updates every site exactly once, which is *not* one unit of that time:
at T = 0 it advances the chain's wall density as far as about two units (empirically,
``shared/REFERENCE.md``), so exact dynamical comparisons use ``update="random"``.

Acceptance. Every decision compares the top 31 bits of a 32-bit random word with an integer
threshold ``floor(p * 2**31) - 1``, so a probability p is realised as ``floor(p * 2**31) /
2**31`` (error below 5e-10); p = 0, 1/2 and 1 are exact, which makes T = 0 exact: heat-bath
takes zero-energy moves with probability 1/2, Metropolis always.
"""

from __future__ import annotations

import math

import numpy as np

from coarsen._validation import check_spins
from coarsen.kernels.checkerboard import (
    glauber_checkerboard_bipartite,
    glauber_checkerboard_triangular,
    merge_colours,
    split_colours,
)
from coarsen.kernels.geometry import KIND_CODES
from coarsen.kernels.glauber import glauber_random_sequential
from coarsen.kernels.kawasaki import kawasaki_local, kawasaki_nonlocal
from coarsen.lattice import Lattice
from coarsen.rejection_free import RULES as REJECTION_FREE_RULES
from coarsen.rejection_free import advance_events
from coarsen.rng import check_streams, spawn_streams

__all__ = [
    "ACCEPTANCES",
    "RULES",
    "UPDATES",
    "advance",
    "check_dynamics",
    "energy_per_site",
    "exchange_probabilities",
    "flip_probabilities",
    "magnetization_per_site",
    "make_streams",
    "substreams_needed",
]

RULES = ("glauber", "kawasaki", "kawasaki-nonlocal")
ACCEPTANCES = ("heat-bath", "metropolis")
UPDATES = ("random", "checkerboard", "rejection-free")

#: Row blocks of the sublattice update: each has its own random stream, so this number (not
#: the thread count) fixes how work can be shared between threads.
MAX_ROW_BLOCKS = 64

_THRESHOLD_SCALE = 2.0**31
_NEVER = 2**31 - 1


# --------------------------------------------------------------------------------------------
# validation
# --------------------------------------------------------------------------------------------
def _choice(value, allowed, name):
    if value not in allowed:
        raise ValueError(f"{name}: {value!r} is not one of {', '.join(map(repr, allowed))}")
    return value


def check_dynamics(lattice: Lattice, rule: str = "glauber", acceptance: str = "heat-bath",
                   update: str = "random") -> None:
    """Raise ValueError if the combination of lattice, rule, acceptance and update is invalid.

    Sublattice updates exist for Glauber dynamics only and need a lattice whose sizes split
    into sublattices (:meth:`Lattice.colouring_error`); rejection-free updates exist for
    Glauber and nearest-neighbour Kawasaki dynamics.
    """
    if not isinstance(lattice, Lattice):
        raise TypeError(f"lattice: expected a coarsen.Lattice, got {type(lattice).__name__}")
    _choice(rule, RULES, "rule")
    _choice(acceptance, ACCEPTANCES, "acceptance")
    _choice(update, UPDATES, "update")
    if update == "checkerboard":
        if rule != "glauber":
            raise ValueError(
                f"update: 'checkerboard' updates apply to rule 'glauber' only, not {rule!r}; "
                "use update 'random' for Kawasaki dynamics"
            )
        problem = lattice.colouring_error()
        if problem:
            raise ValueError(problem)
    if update == "rejection-free" and rule not in REJECTION_FREE_RULES:
        raise ValueError(
            f"update: 'rejection-free' updates apply to rules "
            f"{' and '.join(map(repr, REJECTION_FREE_RULES))}, not {rule!r}; use update "
            "'random' for nonlocal exchanges"
        )


def _check_spin_values(spins, name="spins") -> None:
    if not np.all(np.abs(spins) == 1):
        raise ValueError(f"{name}: values must be +1 or -1")


def _temperatures(temperature, sweeps) -> np.ndarray:
    try:
        t = np.asarray(temperature, dtype=float)
    except (TypeError, ValueError):
        raise TypeError(f"temperature: {temperature!r} is not a number") from None
    if temperature is None:
        raise TypeError("temperature: None is not a number")
    if t.ndim == 0:
        t = t.reshape(1)
    elif t.ndim != 1 or t.shape[0] != sweeps:
        raise ValueError(
            f"temperature: give one value or one per sweep ({sweeps}), got shape {t.shape}"
        )
    if not np.all(np.isfinite(t)) or np.any(t < 0):
        bad = float(t[~(np.isfinite(t) & (t >= 0))][0])
        raise ValueError(f"temperature: {bad!r} is not a finite temperature >= 0")
    return t


def _fields(field, sweeps) -> np.ndarray:
    try:
        h = np.asarray(field, dtype=float)
    except (TypeError, ValueError):
        raise TypeError(f"h: {field!r} is not a number") from None
    if field is None or isinstance(field, bool):
        raise TypeError(f"h: {field!r} is not a number")
    if h.ndim == 0:
        h = h.reshape(1)
    elif h.ndim != 1 or h.shape[0] != sweeps:
        raise ValueError(f"h: give one value or one per sweep ({sweeps}), got shape {h.shape}")
    if not np.all(np.isfinite(h)):
        raise ValueError(f"h: {float(h[~np.isfinite(h)][0])!r} is not finite")
    return h


def _protocol_pairs(temps: np.ndarray, fields: np.ndarray) -> list[tuple[float, float]]:
    """One (T, h) pair per table: a single pair when both are constant, else one per sweep."""
    if temps.size == 1 and fields.size == 1:
        return [(float(temps[0]), float(fields[0]))]
    size = max(temps.size, fields.size)
    return list(zip(np.broadcast_to(temps, size).tolist(), np.broadcast_to(fields, size).tolist()))


def _finite(value, name) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise TypeError(f"{name}: {value!r} is not a number") from None
    if not math.isfinite(v):
        raise ValueError(f"{name}: {value!r} is not finite")
    return v


# --------------------------------------------------------------------------------------------
# acceptance tables
# --------------------------------------------------------------------------------------------
def _logistic(x: float) -> float:
    """1 / (1 + exp(-x)) without overflow; exact 0, 1/2, 1 at x = -inf, 0, inf."""
    if x >= 0:
        return 1.0 / (1.0 + math.exp(-x)) if x != math.inf else 1.0
    return math.exp(x) / (1.0 + math.exp(x)) if x != -math.inf else 0.0


def _boltzmann_ratio(energy_change: float, temperature: float) -> float:
    """min(1, exp(-dE/T)), with the T = 0 limit."""
    if energy_change <= 0:
        return 1.0
    if temperature == 0:
        return 0.0
    return math.exp(-energy_change / temperature)


def _heat_bath(energy_change: float, temperature: float) -> float:
    """1 / (1 + exp(dE/T)), with the T = 0 limit (1/2 for dE = 0)."""
    if temperature == 0:
        return 1.0 if energy_change < 0 else (0.5 if energy_change == 0 else 0.0)
    return _logistic(-energy_change / temperature)


def flip_probabilities(temperature: float, coordination: int, J: float = 1.0, h: float = 0.0,
                       acceptance: str = "heat-bath") -> np.ndarray:
    """Probability that a Glauber update flips the spin, for every old spin and field.

    Parameters
    ----------
    temperature : float
        T >= 0.
    coordination : int
        Number of neighbours z; the neighbour sum f runs over -z..z.
    J, h : float
        Coupling and uniform field.
    acceptance : {"heat-bath", "metropolis"}
        With dE = 2 s (J f + h) the energy change of flipping spin s, heat-bath flips with
        probability 1 / (1 + exp(dE / T)) and Metropolis with min(1, exp(-dE / T)).

    Returns
    -------
    ndarray of shape (2, 2 z + 1)
        Row 0 for old spin -1, row 1 for +1; column ``f + z``.

    Notes
    -----
    Each entry is computed from dE alone, so it is the same float for every (s, f) with the
    same s (J f + h). With h = 0, the sublattice gauge s -> (-1)**sublattice s of a bipartite
    lattice maps (J, s, f) to (-J, s', f') with the same dE, hence the same entry, and the
    kernels' decision "flip when the word is at most the threshold" then makes the same
    moves: an antiferromagnet's run is its ferromagnet's run, staggered, bit for bit.
    """
    _choice(acceptance, ACCEPTANCES, "acceptance")
    z = coordination
    table = np.empty((2, 2 * z + 1))
    for row, old in enumerate((-1, 1)):
        for f in range(-z, z + 1):
            energy_change = 2.0 * old * (J * f + h)
            table[row, f + z] = (_heat_bath(energy_change, temperature)
                                 if acceptance == "heat-bath"
                                 else _boltzmann_ratio(energy_change, temperature))
    return table


def exchange_probabilities(temperature: float, coordination: int, J: float = 1.0,
                           acceptance: str = "heat-bath") -> np.ndarray:
    """Probability of a Kawasaki exchange with energy change 2 J q, for q = -2z .. 2z + 2.

    Returns
    -------
    ndarray of shape (4 z + 3,)
        Entry ``q + 2 z``.
    """
    _choice(acceptance, ACCEPTANCES, "acceptance")
    z = coordination
    out = np.empty(4 * z + 3)
    for q in range(-2 * z, 2 * z + 3):
        dE = 2.0 * J * q
        out[q + 2 * z] = (_heat_bath(dE, temperature) if acceptance == "heat-bath"
                          else _boltzmann_ratio(dE, temperature))
    return out


def _limits(probabilities: np.ndarray) -> np.ndarray:
    """Integer thresholds floor(p * 2**31) - 1 (p = 1 -> 2**31 - 1, p = 0 -> -1)."""
    lim = np.floor(probabilities * _THRESHOLD_SCALE) - 1
    return np.minimum(lim, _NEVER).astype(np.int32)


# --------------------------------------------------------------------------------------------
# streams
# --------------------------------------------------------------------------------------------
def _row_blocks(rows: int) -> np.ndarray:
    n = min(rows, MAX_ROW_BLOCKS)
    return np.array([(b * rows) // n for b in range(n + 1)], dtype=np.int64)


def _rows(lattice: Lattice) -> int:
    return lattice.n_sites // lattice.size[0]


def substreams_needed(lattice: Lattice, rule: str = "glauber", update: str = "random") -> int:
    """Random streams per replica that ``advance`` needs for this lattice and update.

    One for random-sequential updates; one per row block (at most ``MAX_ROW_BLOCKS``) for
    sublattice updates.
    """
    check_dynamics(lattice, rule, "heat-bath", update)
    return _substreams(lattice, update)


def _substreams(lattice: Lattice, update: str) -> int:
    if update == "checkerboard":
        return len(_row_blocks(_rows(lattice))) - 1
    return 1


def make_streams(seed, replicas: int, lattice: Lattice, rule: str = "glauber",
                 update: str = "random") -> np.ndarray:
    """Random streams for ``replicas`` replicas of this lattice and update (see coarsen.rng)."""
    return spawn_streams(seed, replicas, substreams_needed(lattice, rule, update))


# --------------------------------------------------------------------------------------------
# geometry handed to the kernels
# --------------------------------------------------------------------------------------------
def _dims(lattice: Lattice) -> np.ndarray:
    size = list(lattice.size) + [1] * (3 - lattice.dimension)
    return np.array(size, dtype=np.int64)


def _offsets(lattice: Lattice) -> np.ndarray:
    out = np.zeros((lattice.coordination, 3), dtype=np.int64)
    for j, off in enumerate(lattice.offsets):
        out[j, : len(off)] = off
    return out


def _row_geometry(lattice: Lattice):
    """Row parity and the rows across y and z (-1 across an open edge), rows in (z, y) order."""
    ny = lattice.size[1] if lattice.dimension > 1 else 1
    nz = lattice.size[2] if lattice.dimension > 2 else 1
    rows = ny * nz
    zz, yy = np.divmod(np.arange(rows), ny)
    parity = (yy + zz).astype(np.int64)
    neighbours = []
    for axis, n in ((yy, ny), (zz, nz))[: lattice.dimension - 1]:
        for step in (-1, 1):
            moved = axis + step
            inside = (moved >= 0) & (moved < n)
            moved = moved % n
            new_y = moved if axis is yy else yy
            new_z = moved if axis is zz else zz
            idx = new_z * ny + new_y
            if not lattice.periodic:
                idx = np.where(inside, idx, -1)
            neighbours.append(idx)
    table = (np.stack(neighbours, axis=1) if neighbours
             else np.zeros((rows, 0), dtype=np.int64)).astype(np.int64)
    return parity, np.ascontiguousarray(table)


# --------------------------------------------------------------------------------------------
# the public entry point
# --------------------------------------------------------------------------------------------
def advance(spins: np.ndarray, streams: np.ndarray, lattice: Lattice, sweeps: int,
            temperature, *, rule: str = "glauber", acceptance: str = "heat-bath",
            update: str = "random", J: float = 1.0, h: float = 0.0) -> np.ndarray:
    """Advance every replica by ``sweeps`` Monte Carlo sweeps, in place.

    Parameters
    ----------
    spins : ndarray of shape (R, *lattice.shape) and dtype int8
        Configurations of +1/-1, modified in place.
    streams : ndarray of shape (R, S, 4 * LANES) and dtype uint64
        Random streams from :func:`make_streams` (S = :func:`substreams_needed`), advanced in
        place; save them with the spins to continue exactly.
    lattice : Lattice
        The geometry.
    sweeps : int
        Number of sweeps (>= 0).
    temperature : float or ndarray of shape (sweeps,)
        T >= 0, constant or one value per sweep.
    rule : {"glauber", "kawasaki", "kawasaki-nonlocal"}, default: "glauber"
        Single-spin flips (non-conserved), nearest-neighbour exchanges (conserved), or
        exchanges of a random up spin with a random down spin anywhere (globally conserved).
    acceptance : {"heat-bath", "metropolis"}, default: "heat-bath"
    update : {"random", "checkerboard", "rejection-free"}, default: "random"
        Random-sequential (N attempts at uniformly chosen sites or bonds per sweep),
        sublattice sweeps (Glauber only), or the rejection-free n-fold way in continuous
        time (Glauber and Kawasaki; the same dynamics as random-sequential updates with one
        sweep as the unit of time, see :mod:`coarsen.rejection_free`). Metropolis
        acceptance with sublattice sweeps forces every zero-energy flip, which makes the
        dynamics non-ergodic on small or one-dimensional lattices: on a ring it conserves
        the difference of the bond sums of even and odd bonds, so from a random start it
        does not reach equilibrium (see ``tests/validation/test_enumeration.py``). Use
        heat-bath acceptance or random updates there.
    J : float, default: 1.0
        Coupling (either sign).
    h : float or ndarray of shape (sweeps,), default: 0.0
        Uniform field, constant or one value per sweep. Kawasaki exchanges do not depend
        on h.

    Returns
    -------
    ndarray of shape (R,) and dtype int64
        Accepted moves per replica (spins changed for Glauber, exchanges for Kawasaki; for
        rejection-free updates, the events).

    Raises
    ------
    TypeError, ValueError
        For bad arrays or parameters; the message names the parameter.
    """
    check_dynamics(lattice, rule, acceptance, update)
    check_spins(spins, lattice, writeable=True)
    if isinstance(sweeps, bool) or not isinstance(sweeps, (int, np.integer)):
        raise TypeError(f"sweeps: {sweeps!r} is not a whole number >= 0")
    if sweeps < 0:
        raise ValueError(f"sweeps: {sweeps!r} is not a whole number >= 0")
    sweeps = int(sweeps)
    temps = _temperatures(temperature, sweeps)
    J = _finite(J, "J")
    fields = _fields(h, sweeps)
    n_rep = spins.shape[0]
    check_streams(streams, n_rep, _substreams(lattice, update))
    moves = np.zeros(n_rep, dtype=np.int64)
    if sweeps == 0:
        return moves
    _check_spin_values(spins)
    z = lattice.coordination
    kind = KIND_CODES[lattice.kind]
    periodic = lattice.periodic
    dims = _dims(lattice)
    flat = spins.reshape(n_rep, -1)
    if rule == "glauber":
        cache = {}
        for pair in _protocol_pairs(temps, fields):
            if pair not in cache:
                cache[pair] = _limits(flip_probabilities(pair[0], z, J, pair[1], acceptance))
        tables = np.stack([cache[pair] for pair in _protocol_pairs(temps, fields)])
        if update == "random":
            glauber_random_sequential(flat, streams[:, 0], tables, dims, kind, periodic,
                                      sweeps, moves)
        elif update == "rejection-free":
            advance_events(flat, streams[:, 0], tables, lattice, rule, sweeps, moves)
        elif lattice.kind == "triangular":
            blocks = _row_blocks(_rows(lattice))
            glauber_checkerboard_triangular(flat, streams, tables, dims, periodic, blocks,
                                            sweeps, moves)
        else:
            parity, row_nbrs = _row_geometry(lattice)
            rows_view = spins.reshape(n_rep, -1, lattice.size[0])
            halves = np.empty((n_rep, 2, rows_view.shape[1], lattice.size[0] // 2), np.int8)
            split_colours(rows_view, parity, halves)
            glauber_checkerboard_bipartite(halves, streams, tables, parity, row_nbrs,
                                           _row_blocks(rows_view.shape[1]), periodic,
                                           sweeps, moves)
            merge_colours(halves, parity, rows_view)
    else:
        tables = np.stack([_limits(exchange_probabilities(t, z, J, acceptance)) for t in temps])
        if update == "rejection-free":
            advance_events(flat, streams[:, 0], tables, lattice, rule, sweeps, moves)
            return moves
        kernel = kawasaki_local if rule == "kawasaki" else kawasaki_nonlocal
        kernel(flat, streams[:, 0], tables, _offsets(lattice), dims, kind, periodic, sweeps,
               moves)
    return moves


# --------------------------------------------------------------------------------------------
# energy and magnetization (NumPy; exact integers before the division)
# --------------------------------------------------------------------------------------------
def _bond_sum(spins: np.ndarray, lattice: Lattice) -> np.ndarray:
    """Sum over bonds of s_i s_j per replica, as int64."""
    s = spins.astype(np.int64)
    total = np.zeros(s.shape[0], dtype=np.int64)
    d = lattice.dimension
    for off in lattice.forward_offsets:
        # offsets are (x, y, z); array axes are (replica, z, y, x)
        axes_shift = [(d - k, step) for k, step in enumerate(off) if step]
        shifted = s
        for ax, step in axes_shift:
            shifted = np.roll(shifted, -step, axis=ax)
        prod = s * shifted
        if not lattice.periodic:
            keep = np.ones(lattice.shape, dtype=bool)
            for ax, step in axes_shift:
                idx = [slice(None)] * d
                idx[ax - 1] = slice(-step, None) if step > 0 else slice(None, -step)
                keep[tuple(idx)] = False
            prod = prod * keep
        total += prod.reshape(s.shape[0], -1).sum(axis=1)
    return total


def energy_per_site(spins: np.ndarray, lattice: Lattice, J: float = 1.0,
                    h: float = 0.0) -> np.ndarray:
    """Energy per site ``(-J sum_bonds s_i s_j - h sum_i s_i) / N`` of each replica.

    Returns
    -------
    ndarray of shape (R,) and dtype float64
    """
    check_spins(spins, lattice, writeable=True)
    bonds = _bond_sum(spins, lattice)
    field = spins.reshape(spins.shape[0], -1).sum(axis=1, dtype=np.int64)
    return (-J * bonds - h * field) / lattice.n_sites


def magnetization_per_site(spins: np.ndarray, lattice: Lattice,
                           order: str = "ferro") -> np.ndarray:
    """Order parameter per site: mean spin (``"ferro"``) or staggered mean (``"neel"``)."""
    check_spins(spins, lattice, writeable=True)
    _choice(order, ("ferro", "neel"), "order")
    s = spins.astype(np.int64)
    if order == "neel":
        s = s * lattice.staggering
    return s.reshape(s.shape[0], -1).sum(axis=1) / lattice.n_sites
