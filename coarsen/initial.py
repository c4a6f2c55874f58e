"""Initial configurations of the replicas: random with a given magnetization, or all up.

The random numbers of the initial states come from their own streams
(:func:`initial_streams`), separate from the dynamics streams of
:func:`coarsen.engine.make_streams`, and are drawn with our own generator
(:func:`coarsen.rng.random_words`, xoshiro256**) rather than a NumPy ``Generator``, so a seed
gives the same configurations bit for bit whatever the NumPy version.

States
------
``random``
    Independent spins, each up with probability ``(1 + m) / 2``; or, with ``exact``, exactly
    ``floor(N (1 + m) / 2 + 1/2)`` up spins placed uniformly at random (the magnetization
    is then the nearest value to m that N spins allow, halves rounded up). ``exact`` defaults
    to True for the conserved rules (``kawasaki``, ``kawasaki-nonlocal``), where the
    magnetization never changes and should be the one asked for, and to False for Glauber.
``up``
    Every spin +1.
``disk``, ``square``, ``stripe``, ``zigzag``
    A seeded domain of the down phase in an up background (shapes and parameters in
    :mod:`coarsen.seeded`); the same configuration in every replica.
``file``
    Spins read from an array file (:func:`coarsen.seeded.read_configuration`).

With ``order = "neel"`` every state is multiplied by the lattice's staggering
``(-1)**sublattice``, so ``up`` gives the Néel state and m is the staggered magnetization.

Adding a state is one function: decorate a builder with ``@_builds("name")``
(signature of :data:`STATE_BUILDERS`).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from coarsen._validation import (
    ParameterError,
    check_bool,
    check_choice,
    check_integer,
    check_number,
)
from coarsen.engine import RULES
from coarsen.lattice import Lattice
from coarsen.rng import random_words, seed_sequence, spawn_streams
from coarsen.seeded import SEEDED_PARAMETERS, read_configuration, seed_sites

__all__ = [
    "CONSERVED_RULES",
    "INITIAL_SPAWN_KEY",
    "ORDERS",
    "PLANNED_STATES",
    "STATE_BUILDERS",
    "InitialState",
    "check_state",
    "initial_spins",
    "initial_streams",
]

#: Rules that conserve the magnetization; their random states are exact by default.
CONSERVED_RULES: tuple[str, ...] = ("kawasaki", "kawasaki-nonlocal")

#: Order parameters: the spins themselves, or the staggered field of a bipartite lattice.
ORDERS: tuple[str, ...] = ("ferro", "neel")

#: States of the design that this version does not build yet.
PLANNED_STATES: tuple[str, ...] = ()

#: Spawn-key entry that separates the initial-state streams from the dynamics streams.
INITIAL_SPAWN_KEY = 2**32 - 1

#: Builders by state name: ``builder(initial, lattice, stream, exact) -> spins`` makes one
#: replica's configuration, int8 of shape ``lattice.shape``, drawing any random words from
#: ``stream`` (that replica's stream, shape (1, 1, 4 * LANES), advanced in place).
STATE_BUILDERS: dict[str, Callable[..., np.ndarray]] = {}


def _builds(name: str):
    """Register the decorated function as the builder of state ``name``."""
    def register(builder):
        STATE_BUILDERS[name] = builder
        return builder
    return register


def check_state(state, name: str = "initial state") -> str:
    """Return ``state`` if a builder for it is registered in :data:`STATE_BUILDERS`.

    Raises
    ------
    ValueError, TypeError
        For a state of the design not built in this version (:data:`PLANNED_STATES`), an
        unknown name (with a suggestion) or a non-string; the message names ``name``.
    """
    allowed = tuple(STATE_BUILDERS)
    if isinstance(state, str) and state in PLANNED_STATES:
        raise ParameterError(
            f"{name}: {state!r} is not available in this version; choose one of "
            f"{', '.join(map(repr, allowed))}",
            name=name, value=state, allowed=allowed)
    return check_choice(state, allowed, name, what="initial state")


@dataclass(frozen=True)
class InitialState:
    """How the replicas start.

    Parameters
    ----------
    state : {"random", "up"}, default: "random"
        The configuration (see the module docstring).
    magnetization : float, default: 0.0
        For ``random``: the magnetization m in [-1, 1] (staggered with ``order = "neel"``).
    exact : bool or None, default: None
        For ``random``: True places exactly ``floor(N (1 + m) / 2 + 1/2)`` up spins, False
        draws every spin independently; None chooses exact for the conserved rules and
        independent spins for Glauber (:meth:`is_exact`).
    parameters : tuple of (str, value) pairs, default: ()
        For the seeded states and ``file``: their parameters (:data:`coarsen.seeded.
        SEEDED_PARAMETERS`), e.g. ``(("radius", 20.0),)``.

    Raises
    ------
    ValueError, TypeError
        For an unknown state, a magnetization outside [-1, 1] or a non-bool ``exact``.
    """

    state: str = "random"
    magnetization: float = 0.0
    exact: bool | None = None
    parameters: tuple = ()

    def __post_init__(self):
        check_state(self.state)
        object.__setattr__(self, "parameters", tuple((str(k), v) for k, v in self.parameters))
        m = check_number(self.magnetization, "initial magnetization", minimum=-1.0,
                         maximum=1.0)
        object.__setattr__(self, "magnetization", m)
        if self.exact is not None:
            object.__setattr__(self, "exact", check_bool(self.exact, "initial exact"))

    def parameter_dict(self) -> dict:
        """The parameters as a dict."""
        return dict(self.parameters)

    def is_exact(self, rule: str = "glauber") -> bool:
        """Whether random states are built with the exact number of up spins under ``rule``."""
        if self.exact is not None:
            return self.exact
        return rule in CONSERVED_RULES


def initial_streams(seed, replicas: int) -> np.ndarray:
    """Random streams for the initial states, one per replica.

    Parameters
    ----------
    seed : int or numpy.random.SeedSequence
        The run's seed (the same one the dynamics streams come from).
    replicas : int
        Number of replicas (>= 1).

    Returns
    -------
    ndarray of shape (replicas, 1, 4 * LANES) and dtype uint64

    Notes
    -----
    The dynamics streams are the children ``SeedSequence(seed).spawn(replicas)``, whose
    spawn keys are ``(r,)`` (and ``(r, s)`` for their substreams). These streams instead
    start from ``SeedSequence(seed, spawn_key=(2**32 - 1,))``, whose children have keys
    ``(2**32 - 1, r)`` and grandchildren ``(2**32 - 1, r, 0)``: a key of another length, and
    a first entry no replica index reaches (that would take 2**32 replicas). SeedSequence
    hashes the spawn key into the state together with the seed's entropy, so different keys
    give unrelated streams, and the initial states never reuse the dynamics' random words.
    A ``SeedSequence`` seed keeps its own spawn key in front of ``2**32 - 1`` in the same way.
    """
    root = seed_sequence(seed)
    branch = np.random.SeedSequence(root.entropy,
                                    spawn_key=tuple(root.spawn_key) + (INITIAL_SPAWN_KEY,),
                                    pool_size=root.pool_size)
    return spawn_streams(branch, replicas)


@_builds("random")
def _random_state(initial: InitialState, lattice: Lattice, stream: np.ndarray,
                  exact: bool) -> np.ndarray:
    """Independent spins up with probability (1 + m)/2, or exactly the nearest count up.

    Independent: spin up when its 32-bit word is below ``round((1 + m) / 2 * 2**32)``, so the
    probability is realised to within 2**-33 (and exactly for m = -1, 0, 1). Exact: the up
    spins are the ``n_up`` sites with the smallest ``(word, site index)`` pairs, which is a
    uniformly random set of ``n_up`` sites up to ties of the 32-bit words at the cut (about
    N / 2**32 sites, so negligible), and it is fully determined by the words.
    """
    n = lattice.n_sites
    p_up = (1.0 + initial.magnetization) / 2.0
    words = random_words(stream, n)[0, 0]
    if exact:
        n_up = min(n, math.floor(n * p_up + 0.5))
        if n_up == 0:
            up = np.zeros(n, dtype=bool)
        elif n_up == n:
            up = np.ones(n, dtype=bool)
        else:
            cut = np.partition(words, n_up - 1)[n_up - 1]
            up = words < cut
            # among the sites whose word equals the cut, the lowest site indices go up
            missing = n_up - int(np.count_nonzero(up))
            up[np.flatnonzero(words == cut)[:missing]] = True
    else:
        threshold = round(p_up * 2.0**32)
        up = (np.ones(n, dtype=bool) if threshold >= 2**32
              else words < np.uint32(threshold))
    del words
    spins = up.view(np.int8)
    spins *= 2
    spins -= 1
    return spins.reshape(lattice.shape)


@_builds("up")
def _up_state(initial: InitialState, lattice: Lattice, stream: np.ndarray,
              exact: bool) -> np.ndarray:
    """Every spin +1."""
    return np.ones(lattice.shape, dtype=np.int8)


def _seeded(name):
    def build(initial: InitialState, lattice: Lattice, stream: np.ndarray,
              exact: bool) -> np.ndarray:
        down = seed_sites(name, lattice, initial.parameter_dict())
        return np.where(down, -1, 1).astype(np.int8)
    build.__doc__ = f"A {name} of down spins in an up background (coarsen.seeded)."
    return build


for _name in SEEDED_PARAMETERS:
    if _name != "file":
        STATE_BUILDERS[_name] = _seeded(_name)
STATE_BUILDERS["file"] = None  # read whole, for all replicas at once, in initial_spins


def initial_spins(initial: InitialState, lattice: Lattice, replicas: int, seed, *,
                  rule: str = "glauber", order: str = "ferro") -> np.ndarray:
    """The starting configurations of an ensemble.

    Parameters
    ----------
    initial : InitialState
        What to build.
    lattice : Lattice
        The geometry.
    replicas : int
        Number of replicas (>= 1).
    seed : int or numpy.random.SeedSequence
        The run's seed; the random words come from :func:`initial_streams`.
    rule : {"glauber", "kawasaki", "kawasaki-nonlocal"}, default: "glauber"
        The dynamics, which choose whether random states are exact by default.
    order : {"ferro", "neel"}, default: "ferro"
        With ``"neel"`` the configuration is multiplied by ``lattice.staggering``.

    Returns
    -------
    ndarray of shape (replicas, *lattice.shape) and dtype int8
        Spins +1 and -1, C-contiguous; replica r depends only on the seed, r and the state.

    Raises
    ------
    TypeError, ValueError
        For bad arguments, or ``order = "neel"`` on a lattice that is not bipartite.

    Examples
    --------
    >>> from coarsen.lattice import Lattice
    >>> spins = initial_spins(InitialState("random", 0.5, exact=True), Lattice("square", 8),
    ...                       replicas=2, seed=3)
    >>> spins.shape, spins.dtype.name, (spins == 1).sum(axis=(1, 2)).tolist()
    ((2, 8, 8), 'int8', [48, 48])
    """
    if not isinstance(initial, InitialState):
        raise TypeError(f"initial: expected an InitialState, got {type(initial).__name__}")
    if not isinstance(lattice, Lattice):
        raise TypeError(f"lattice: expected a coarsen.Lattice, got {type(lattice).__name__}")
    replicas = check_integer(replicas, "replicas", minimum=1)
    check_choice(rule, RULES, "rule", what="rule")
    check_choice(order, ORDERS, "order", what="order")
    staggering = lattice.staggering if order == "neel" else None
    if initial.state == "file":
        spins = read_configuration(initial.parameter_dict()["path"], lattice, replicas)
        if staggering is not None:
            spins *= staggering
        return spins
    streams = initial_streams(seed, replicas)
    builder = STATE_BUILDERS[initial.state]
    exact = initial.is_exact(rule)
    spins = np.empty((replicas, *lattice.shape), dtype=np.int8)
    for r in range(replicas):
        spins[r] = builder(initial, lattice, streams[r:r + 1], exact)
        if staggering is not None:
            spins[r] *= staggering
    return spins
