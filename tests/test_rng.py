"""Random streams: the reference xoshiro256**, seeding, saving and restoring, validation."""

import numpy as np
import pytest

from coarsen.rng import LANES, check_streams, random_words, seed_sequence, spawn_streams
from tests import reference


def test_lane_layout_constant():
    assert LANES == reference.LANES == 16


def test_first_output_by_hand():
    # xoshiro256** output is rotl(s1 * 5, 7) * 9 of the state before the step. With every lane
    # at (s0, s1, s2, s3) = (1, 2, 3, 4): rotl(10, 7) * 9 = 1280 * 9 = 11520, high half 0.
    state = np.zeros(4 * LANES, dtype=np.uint64)
    for j, v in enumerate((1, 2, 3, 4)):
        state[j * LANES:(j + 1) * LANES] = v
    words = random_words(state.reshape(1, 1, -1).copy(), 2 * LANES)
    assert words.dtype == np.uint32
    np.testing.assert_array_equal(words[0, 0], [11520, 0] * LANES)
    assert reference.Stream(state).draw() == [11520, 0] * LANES


def test_reference_generator_by_hand_second_step():
    # After one step from (1, 2, 3, 4): s2 = 3^1 = 2, s3 = 4^2 = 6, s1 = 2^2 = 0, s0 = 1^6 = 7,
    # s2 ^= 2 << 17, s3 = rotl(6, 45). The next output is rotl(0 * 5, 7) * 9 = 0.
    s = [1, 2, 3, 4]
    reference.xoshiro_next(s)
    assert s == [7, 0, 2 ^ (2 << 17), (6 << 45) & reference.MASK64]
    assert reference.xoshiro_next(s) == 0


@pytest.mark.parametrize("count", [1, 31, 32, 33, 100, 257])
def test_reference_equals_random_words(count):
    states = spawn_streams(20260101, replicas=3, substreams=2)
    twin = [[reference.Stream(states[r, s]) for s in range(2)] for r in range(3)]
    words = random_words(states, count)
    assert words.shape == (3, 2, count)
    draws = -(-count // 32)
    for r in range(3):
        for s in range(2):
            expected = twin[r][s].words(draws)
            np.testing.assert_array_equal(words[r, s], expected[:count])
            # a call draws whole blocks: the state advanced by exactly `draws` blocks
            np.testing.assert_array_equal(states[r, s], twin[r][s].state())


def test_consecutive_calls_continue_the_stream():
    states = spawn_streams(5, 1)
    twin = reference.Stream(states[0, 0])
    first = random_words(states, 64)
    second = random_words(states, 64)
    np.testing.assert_array_equal(np.concatenate([first, second], axis=2)[0, 0],
                                  twin.words(4))


def test_spawn_streams_reproducible_and_shaped():
    a = spawn_streams(123, replicas=4, substreams=3)
    b = spawn_streams(123, replicas=4, substreams=3)
    assert a.shape == (4, 3, 4 * LANES) and a.dtype == np.uint64
    assert a.flags.c_contiguous
    np.testing.assert_array_equal(a, b)


def test_spawn_streams_follow_the_seed_sequence_tree():
    # Documented derivation: SeedSequence(seed).spawn(R)[r].spawn(S)[s].generate_state(64).
    seed = 987654321
    states = spawn_streams(seed, replicas=2, substreams=3)
    root = np.random.SeedSequence(seed)
    for r, child in enumerate(root.spawn(2)):
        for s, grandchild in enumerate(child.spawn(3)):
            np.testing.assert_array_equal(states[r, s],
                                          grandchild.generate_state(4 * LANES, np.uint64))
    # a SeedSequence is accepted in place of the integer
    np.testing.assert_array_equal(spawn_streams(np.random.SeedSequence(seed), 2, 3), states)


def test_more_replicas_keep_the_first_ones():
    np.testing.assert_array_equal(spawn_streams(42, 5)[:3], spawn_streams(42, 3))


def test_different_seeds_and_replicas_differ():
    a = spawn_streams(1, replicas=3, substreams=2)
    b = spawn_streams(2, replicas=3, substreams=2)
    assert not np.any(a == b)  # 384 random 64-bit words: a coincidence has odds ~1e-17
    # every generator of a run is distinct from every other
    lanes = a.reshape(3, 2, 4, LANES).transpose(0, 1, 3, 2).reshape(-1, 4)
    assert len({tuple(row) for row in lanes.tolist()}) == 3 * 2 * LANES
    wa, wb = random_words(a, 50), random_words(b, 50)
    assert not np.array_equal(wa, wb)
    assert not np.array_equal(wa[0], wa[1])


def test_save_and_restore_continues_the_stream(tmp_path):
    states = spawn_streams(777, replicas=2, substreams=2)
    random_words(states, 40)
    np.save(tmp_path / "streams.npy", states)
    uninterrupted = random_words(states, 100)
    restored = np.load(tmp_path / "streams.npy")
    assert restored.dtype == np.uint64 and restored.shape == states.shape
    check_streams(restored, 2, 2)
    np.testing.assert_array_equal(random_words(restored, 100), uninterrupted)
    np.testing.assert_array_equal(restored, states)


def test_check_streams_returns_valid_state_unchanged():
    states = spawn_streams(3, 2, 4)
    assert check_streams(states, 2, 4) is states


@pytest.mark.parametrize("bad", [np.zeros((1, 1, 64), dtype=np.int64),
                                 np.zeros((1, 1, 64), dtype=np.float64),
                                 [[[1] * 64]]], ids=["int64", "float64", "list"])
def test_check_streams_rejects_wrong_type(bad):
    with pytest.raises(TypeError, match=r"^streams: expected a uint64 ndarray"):
        check_streams(bad)


@pytest.mark.parametrize("shape", [(64,), (2, 64), (1, 1, 63), (1, 1, 4, 16)])
def test_check_streams_rejects_wrong_shape(shape):
    states = np.ones(shape, dtype=np.uint64)
    with pytest.raises(ValueError, match=r"^streams: shape .* is not \(replicas, substreams, 64\)"):
        check_streams(states)


def test_check_streams_rejects_wrong_counts():
    states = spawn_streams(3, 2, 1)
    with pytest.raises(ValueError, match=r"^streams: shape \(2, 1, 64\) .*= \(3, 1, 64\)"):
        check_streams(states, replicas=3)
    with pytest.raises(ValueError, match=r"^streams: shape \(2, 1, 64\) .*= \(2, 2, 64\)"):
        check_streams(states, substreams=2)


def test_check_streams_names_the_parameter_it_is_given():
    with pytest.raises(ValueError, match=r"^rng_state: shape"):
        check_streams(np.ones((3, 64), dtype=np.uint64), name="rng_state")


def test_check_streams_rejects_an_all_zero_lane():
    states = spawn_streams(11, 2, 2)
    states[1, 0].reshape(4, LANES)[:, 5] = 0  # lane 5 of one stream: all four words zero
    with pytest.raises(ValueError, match=r"^streams: a generator state is all zero"):
        check_streams(states)
    with pytest.raises(ValueError, match=r"^streams: a generator state is all zero"):
        random_words(states, 1)
    # a lane with three zero words and one nonzero word is valid
    states[1, 0].reshape(4, LANES)[2, 5] = 1
    check_streams(states)


def test_check_streams_rejects_read_only_and_strided_arrays():
    states = spawn_streams(11, 2, 2)
    states.setflags(write=False)
    with pytest.raises(ValueError, match=r"^streams: .*C-contiguous and writeable"):
        check_streams(states)
    strided = np.repeat(spawn_streams(11, 2, 2), 2, axis=0)[::2]
    with pytest.raises(ValueError, match=r"^streams: .*C-contiguous and writeable"):
        check_streams(strided)


@pytest.mark.parametrize("seed, error, pattern", [
    (-1, ValueError, r"^seed: -1 is negative"),
    (1.5, TypeError, r"^seed: 1.5 is not an integer"),
    ("7", TypeError, r"^seed: '7' is not an integer"),
    (True, TypeError, r"^seed: True is not an integer"),
])
def test_bad_seeds(seed, error, pattern):
    with pytest.raises(error, match=pattern):
        seed_sequence(seed)
    with pytest.raises(error, match=pattern):
        spawn_streams(seed, 1)


@pytest.mark.parametrize("name, kwargs", [("replicas", {"replicas": 0}),
                                          ("substreams", {"replicas": 1, "substreams": 0})])
def test_bad_counts(name, kwargs):
    with pytest.raises(ValueError, match=rf"^{name}: 0 must be at least 1"):
        spawn_streams(1, **kwargs)


def test_bad_word_count():
    with pytest.raises(ValueError, match=r"^count: 0 must be at least 1"):
        random_words(spawn_streams(1, 1), 0)
