"""xoshiro256** in interleaved lanes: the random numbers of every kernel.

One *stream* is ``LANES`` independent xoshiro256** generators (Blackman & Vigna, "Scrambled
linear pseudorandom number generators", ACM TOMS 47, 36 (2021)) stored as one flat
``uint64[4 * LANES]`` array: word ``j`` of lane ``l`` is ``state[j * LANES + l]``. Drawing a
block advances every lane once and gives ``LANES`` 64-bit outputs in lane order; the block
loop over lanes is what the compiler turns into SIMD code. Consumers read the outputs as
32-bit words, low half first (little-endian view), so both halves of every draw are used.
"""

import numpy as np

from coarsen.kernels._options import jit_inline, jit_serial

__all__: list[str] = []

#: Generators per stream; 16 lanes fill two AVX-512 (or four AVX2) registers per state word.
LANES = 16


@jit_inline
def _rotl(x, k):
    return (x << np.uint64(k)) | (x >> np.uint64(64 - k))


@jit_inline
def fill_draws(state, out, blocks):
    """Advance every lane of ``state`` ``blocks`` times, writing ``blocks * LANES`` outputs.

    Parameters
    ----------
    state : ndarray of shape (4 * LANES,) and dtype uint64
        The stream; modified in place.
    out : ndarray of dtype uint64 and at least ``blocks * LANES`` entries
        Receives output ``b * LANES + l`` of lane ``l`` at block ``b``.
    blocks : int
        Number of blocks to draw.
    """
    for b in range(blocks):
        base = b * LANES
        for lane in range(LANES):
            a0 = state[lane]
            a1 = state[LANES + lane]
            a2 = state[2 * LANES + lane]
            a3 = state[3 * LANES + lane]
            out[base + lane] = _rotl(a1 * np.uint64(5), 7) * np.uint64(9)
            t = a1 << np.uint64(17)
            a2 ^= a0
            a3 ^= a1
            a1 ^= a2
            a0 ^= a3
            a2 ^= t
            a3 = _rotl(a3, 45)
            state[lane] = a0
            state[LANES + lane] = a1
            state[2 * LANES + lane] = a2
            state[3 * LANES + lane] = a3


@jit_inline
def scale_word(word, n):
    """Map a uint32 ``word`` to an integer in ``[0, n)`` by multiply-shift (Lemire 2019).

    The bias is at most ``n / 2**32`` relative, below 1e-6 for every axis length used here.
    """
    return np.int64((np.uint64(word) * np.uint64(n)) >> np.uint64(32))


@jit_serial
def draw_words(states, count):
    """Draw ``count`` uint32 words from each stream of ``states`` (shape (S, 4 * LANES)).

    Returns an array of shape (S, count) and dtype uint32; draws whole blocks, so a stream
    advances by ``ceil(count / (2 * LANES))`` blocks.
    """
    n_streams = states.shape[0]
    blocks = (count + 2 * LANES - 1) // (2 * LANES)
    out = np.empty((n_streams, blocks * LANES), dtype=np.uint64)
    for s in range(n_streams):
        fill_draws(states[s], out[s], blocks)
    words = out.view(np.uint32)
    return words[:, :count].copy()
