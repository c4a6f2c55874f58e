"""Schedules T(t): values at the points, interpolation, the midpoint rule, holds and jumps."""

import numpy as np
import pytest

from coarsen.schedule import Schedule, constant, from_points


def test_constant_everywhere():
    s = constant(1.25)
    assert s.is_constant and s.points == ((0.0, 1.25),)
    assert s.at([0, 0.5, 7, 1e12]).tolist() == [1.25] * 4
    values = s.sweep_values(3, 8)
    assert values.dtype == np.float64 and values.tolist() == [1.25] * 5
    assert constant(0).at(3.0) == 0.0  # T = 0 is a temperature


def test_values_at_the_points_are_exact():
    points = [(0, 4.0), (3, 2.5), (10, 0.1), (250, 0.7)]
    s = from_points(points)
    assert not s.is_constant
    np.testing.assert_array_equal(s.at([t for t, _ in points]), [v for _, v in points])


def test_linear_between_points():
    s = from_points([[0, 3.0], [8, 1.0], [20, 2.2]])
    t = np.array([1.0, 2.5, 7.75, 9.0, 14.0, 19.5])
    # the straight line through the neighbouring points, written out
    expected = np.where(t < 8, 3.0 + (1.0 - 3.0) * t / 8, 1.0 + (2.2 - 1.0) * (t - 8) / 12)
    np.testing.assert_allclose(s.at(t), expected, rtol=1e-15)


def test_at_keeps_the_shape_of_its_argument():
    s = from_points([[0, 2.0], [4, 1.0]])
    assert s.at(2.0).shape == ()
    assert s.at([[0, 1], [2, 3]]).shape == (2, 2)


def test_holds_the_last_value():
    s = from_points([[0, 2.0], [100, 0.5]])
    np.testing.assert_array_equal(s.at([100, 100.5, 1e3, 1e15]), [0.5] * 4)
    assert s.last_change == 100.0
    np.testing.assert_array_equal(s.sweep_values(100, 104), [0.5] * 4)


def test_sweep_values_use_the_midpoint():
    s = from_points([(0, 3.0), (4, 1.0)])
    np.testing.assert_array_equal(s.sweep_values(0, 6), [2.75, 2.25, 1.75, 1.25, 1.0, 1.0])
    np.testing.assert_array_equal(s.sweep_values(2, 3), [1.75])
    assert s.sweep_values(5, 5).shape == (0,)


def test_midpoint_value_is_the_time_average_over_a_linear_stretch():
    # Over a sweep where T(t) is linear, the midpoint value equals (1/1) * integral of T over
    # the sweep; compare with a fine trapezoid sum of the schedule itself.
    s = from_points([(0, 4.0), (7, 1.3), (19, 2.0)])
    for sweep in (0, 3, 6, 7, 12, 18):
        fine = s.at(np.linspace(sweep, sweep + 1, 2001))
        average = np.trapezoid(fine, dx=1 / 2000)
        assert s.sweep_values(sweep, sweep + 1)[0] == pytest.approx(average, rel=1e-12)


def test_jump_applies_from_the_sweep_that_starts_at_it():
    s = from_points([(0, 4.0), (10, 4.0), (10, 1.0), (30, 1.0)])
    assert s.at(10.0) == 1.0  # continuous from the right: the value after the jump
    assert s.at(np.nextafter(10.0, 0)) == 4.0
    np.testing.assert_array_equal(s.sweep_values(8, 12), [4.0, 4.0, 1.0, 1.0])


def test_jump_at_time_zero_is_a_quench():
    s = from_points([(0, 1e6), (0, 0.5)])
    assert s.at(0.0) == 0.5
    np.testing.assert_array_equal(s.sweep_values(0, 3), [0.5] * 3)


def test_jump_inside_a_sweep_takes_effect_by_the_midpoint():
    s = from_points([(0, 2.0), (5.3, 2.0), (5.3, 1.0)])
    np.testing.assert_array_equal(s.sweep_values(4, 7), [2.0, 1.0, 1.0])
    s = from_points([(0, 2.0), (5.7, 2.0), (5.7, 1.0)])
    np.testing.assert_array_equal(s.sweep_values(4, 7), [2.0, 2.0, 1.0])


def test_signed_schedule_allows_negative_values():
    s = from_points([(0, -1.0), (10, 1.0)], signed=True)
    assert s.at(5.0) == 0.0
    assert constant(-0.3, signed=True).at(1.0) == -0.3


def test_schedule_is_frozen_and_normalised():
    s = Schedule([[0, 1], [2, 3]])
    assert s.points == ((0.0, 1.0), (2.0, 3.0))
    assert isinstance(s.points[0][0], float)
    with pytest.raises(AttributeError):
        s.points = ()


@pytest.mark.parametrize("points, match", [
    ([], r"points: \[\] has no points"),
    ("0, 1", "not a list of"),
    ([(0, 1.0, 2.0)], r"points\[0\]: .* is not a \[time, value\] pair"),
    ([(1, 1.0)], r"points\[0\]: the first point is at time 1.0"),
    ([(0, 1.0), (5, 2.0), (4, 1.0)], r"points\[2\]: time 4.0 comes before"),
    ([(0, 1.0), (5, 2.0), (5, 1.0), (5, 0.5)], r"points\[3\]: three points at time 5.0"),
    ([(0, -0.5)], r"points\[0\] value: -0.5 is out of range"),
    ([(0, float("nan"))], r"points\[0\] value: nan is not finite"),
    ([(0, 1.0), (float("inf"), 2.0)], r"points\[1\] time: inf is not finite"),
    ([(0, True)], r"points\[0\] value: True is not a number"),
])
def test_bad_points_name_the_point(points, match):
    with pytest.raises((ValueError, TypeError), match=match):
        from_points(points)


def test_error_uses_the_given_name():
    with pytest.raises(ValueError, match=r"^temperature\.points\[1\] value: -2.0"):
        from_points([(0, 1.0), (3, -2.0)], name="temperature.points")


def test_bad_times_and_bounds():
    s = constant(1.0)
    with pytest.raises(ValueError, match="times: -1.0 is not a finite time"):
        s.at([1.0, -1.0])
    with pytest.raises(ValueError, match="times: nan"):
        s.at(float("nan"))
    with pytest.raises(ValueError, match="stop: 2 is out of range"):
        s.sweep_values(5, 2)
    with pytest.raises(TypeError, match="start: 1.5 is not an integer"):
        s.sweep_values(1.5, 3)
    with pytest.raises(ValueError, match="value: -1.0 is out of range"):
        constant(-1.0)


def test_protocol_helpers_and_the_crossing_time():
    from coarsen.schedule import crossing_time, quench, ramp

    down = ramp(3.0, 1.0, 40)
    assert down.at([0, 20, 40, 100]).tolist() == [3.0, 2.0, 1.0, 1.0]
    assert crossing_time(down, 2.269) == pytest.approx(40 * (3.0 - 2.269) / 2.0)
    assert crossing_time(down, 5.0) is None and crossing_time(down, 3.0) is None
    step = quench(4.0, 1.0, at=10)
    assert step.at([0, 9.5, 10, 11]).tolist() == [4.0, 4.0, 1.0, 1.0]
    assert crossing_time(step, 2.0) == 10.0
    assert quench(4.0, 1.0).at([0]).tolist() == [1.0]
    up = ramp(0.5, 3.5, 30)
    assert crossing_time(up, 2.0) == pytest.approx(15.0)
    with pytest.raises(ValueError, match="duration"):
        ramp(1.0, 0.0, 0)
