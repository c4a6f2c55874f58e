"""Random streams: one explicit, saveable stream per replica (and per row block).

Every random number of a run derives from the user's seed through NumPy's ``SeedSequence``:
``SeedSequence(seed).spawn(replicas)`` gives one child per replica, and each replica child
spawns one grandchild per *substream* (row blocks of the sublattice update, see
:func:`coarsen.engine.substreams_needed`; one substream for random-sequential updates). Each
substream is ``LANES`` interleaved xoshiro256** generators whose 256-bit states come from
``generate_state``. The whole state is a plain ``uint64`` array of shape
``(replicas, substreams, 4 * LANES)``: saving it (to NetCDF, ``.npy``) and restoring it
continues every stream exactly. Kernels advance only their own replica's streams, so results
do not depend on the thread count.
"""

from __future__ import annotations

import numpy as np

from coarsen.kernels.random_words import LANES, draw_words

__all__ = ["LANES", "check_streams", "random_words", "spawn_streams", "seed_sequence"]


def seed_sequence(seed) -> np.random.SeedSequence:
    """Normalise ``seed`` (a non-negative int or a ``SeedSequence``) to a ``SeedSequence``.

    Raises
    ------
    TypeError
        If ``seed`` is neither.
    ValueError
        If ``seed`` is a negative integer.
    """
    if isinstance(seed, np.random.SeedSequence):
        return seed
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)):
        raise TypeError(f"seed: {seed!r} is not an integer; give a whole number >= 0")
    if seed < 0:
        raise ValueError(f"seed: {seed!r} is negative; give a whole number >= 0")
    return np.random.SeedSequence(int(seed))


def spawn_streams(seed, replicas: int, substreams: int = 1) -> np.ndarray:
    """Create the random streams of an ensemble.

    Parameters
    ----------
    seed : int or numpy.random.SeedSequence
        The run's seed.
    replicas : int
        Number of replicas (>= 1).
    substreams : int, default: 1
        Streams per replica (>= 1).

    Returns
    -------
    ndarray of shape (replicas, substreams, 4 * LANES) and dtype uint64
        The stream states.

    Examples
    --------
    >>> states = spawn_streams(7, replicas=2)
    >>> states.shape, states.dtype.name
    ((2, 1, 64), 'uint64')
    >>> bool((spawn_streams(7, 2) == states).all())
    True
    """
    root = seed_sequence(seed)
    replicas = _positive_int(replicas, "replicas")
    substreams = _positive_int(substreams, "substreams")
    states = np.empty((replicas, substreams, 4 * LANES), dtype=np.uint64)
    for r, child in enumerate(root.spawn(replicas)):
        for s, grandchild in enumerate(child.spawn(substreams)):
            words = grandchild.generate_state(4 * LANES, np.uint64).reshape(4, LANES)
            # An all-zero xoshiro state never leaves zero; SeedSequence makes it
            # astronomically unlikely, but make it impossible.
            dead = ~words.any(axis=0)
            words[0, dead] = np.uint64(0x9E3779B97F4A7C15)
            states[r, s] = words.ravel()
    return states


def check_streams(states, replicas: int | None = None, substreams: int | None = None,
                  name: str = "streams") -> np.ndarray:
    """Validate a stream-state array and return it unchanged.

    Raises
    ------
    TypeError
        If ``states`` is not a uint64 ndarray.
    ValueError
        If its shape does not match, it is not C-contiguous and writeable, or a generator's
        state is all zero (a corrupted or hand-made state).
    """
    if not isinstance(states, np.ndarray) or states.dtype != np.uint64:
        got = getattr(states, "dtype", type(states).__name__)
        raise TypeError(f"{name}: expected a uint64 ndarray of stream states, got {got}")
    if states.ndim == 3:
        expected = (states.shape[0] if replicas is None else replicas,
                    states.shape[1] if substreams is None else substreams, 4 * LANES)
    if states.ndim != 3 or states.shape != expected:
        raise ValueError(
            f"{name}: shape {states.shape} is not (replicas, substreams, {4 * LANES})"
            + ("" if states.ndim != 3 else f" = {expected}")
            + "; create states with coarsen.rng.spawn_streams"
        )
    if not (states.flags.c_contiguous and states.flags.writeable):
        raise ValueError(f"{name}: the state array must be C-contiguous and writeable")
    lanes = states.reshape(states.shape[0], states.shape[1], 4, LANES)
    if not lanes.any(axis=2).all():
        raise ValueError(
            f"{name}: a generator state is all zero, so the array is not a valid saved state"
        )
    return states


def random_words(states: np.ndarray, count: int) -> np.ndarray:
    """Draw ``count`` uint32 words from every substream, advancing ``states`` in place.

    Meant for tests and diagnostics; the dynamics kernels draw their own words.

    Returns
    -------
    ndarray of shape (replicas, substreams, count) and dtype uint32
    """
    check_streams(states)
    count = _positive_int(count, "count")
    flat = states.reshape(-1, 4 * LANES)
    words = draw_words(flat, count)
    return words.reshape(states.shape[0], states.shape[1], count)


def _positive_int(value, name: str) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)):
        raise TypeError(f"{name}: {value!r} is not an integer")
    if value < 1:
        raise ValueError(f"{name}: {value!r} must be at least 1")
    return int(value)
