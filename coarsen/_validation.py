"""Small checks shared by the spec layer, the schedules and the initial states.

Each check takes the value and the ``name`` to report (a parameter name, or a dotted spec key
such as ``"ensemble.replicas"``), and returns the value in its canonical Python type. A failed
check raises :class:`ParameterError` (a ``ValueError``) or :class:`ParameterTypeError` (also a
``TypeError``); both carry the name, the bad value and the allowed values, so that
:mod:`coarsen.spec` can re-raise them as a :class:`coarsen.spec.SpecError` without parsing the
message. Messages are one line: ``name: <bad value>!r <what is wrong>; <what is allowed>``.
"""

from __future__ import annotations

import difflib
import math
from collections.abc import Iterable

import numpy as np

__all__ = [
    "ParameterError",
    "ParameterTypeError",
    "check_bool",
    "check_choice",
    "check_integer",
    "check_number",
    "check_spins",
    "check_stack_shape",
    "finite_float",
    "did_you_mean",
    "is_integer",
    "is_number",
]


class ParameterError(ValueError):
    """A bad value: carries ``.name``, ``.value`` and ``.allowed`` (a tuple, or None)."""

    def __init__(self, message: str, *, name: str, value=None, allowed=None):
        super().__init__(message)
        self.name = name
        self.value = value
        self.allowed = None if allowed is None else tuple(allowed)


class ParameterTypeError(ParameterError, TypeError):
    """A value of the wrong type; a ``ParameterError`` that is also a ``TypeError``."""


def did_you_mean(word, candidates: Iterable[str]) -> str:
    """``" (did you mean 'x'?)"`` for the closest candidate to ``word``, or ``""``.

    Uses :func:`difflib.get_close_matches` with its default cutoff (0.6).
    """
    if not isinstance(word, str):
        return ""
    matches = difflib.get_close_matches(word, list(candidates), n=1)
    return f" (did you mean {matches[0]!r}?)" if matches else ""


def _article(word: str) -> str:
    return "an" if word[:1] in "aeiou" else "a"


def _listing(allowed) -> str:
    return ", ".join(map(repr, allowed))


def is_integer(value) -> bool:
    """True for Python and NumPy integers, False for bool."""
    return isinstance(value, (int, np.integer)) and not isinstance(value, (bool, np.bool_))


def is_number(value) -> bool:
    """True for real numbers (int, float and their NumPy kinds), False for bool."""
    return (isinstance(value, (int, float, np.integer, np.floating))
            and not isinstance(value, (bool, np.bool_)))


def check_choice(value, allowed, name: str, what: str = "value") -> str:
    """Return ``value`` if it is one of the strings ``allowed``.

    Parameters
    ----------
    value : object
        The value to check.
    allowed : sequence of str
        The allowed values, in the order the message lists them.
    name : str
        Name in the message.
    what : str, default: "value"
        What kind of thing the value is, for the message (``"rule"``, ``"lattice kind"``).

    Raises
    ------
    ParameterTypeError
        If ``value`` is not a string.
    ParameterError
        If it is not one of ``allowed``; the message suggests the closest allowed value.
    """
    allowed = tuple(allowed)
    if not isinstance(value, str):
        raise ParameterTypeError(
            f"{name}: {value!r} is not a string; choose one of {_listing(allowed)}",
            name=name, value=value, allowed=allowed)
    if value not in allowed:
        raise ParameterError(
            f"{name}: {value!r} is not {_article(what)} {what}; choose one of {_listing(allowed)}"
            f"{did_you_mean(value, allowed)}",
            name=name, value=value, allowed=allowed)
    return value


def _bounds_text(minimum, maximum, strict_minimum) -> str:
    low = None if minimum is None else (f"> {minimum!r}" if strict_minimum else f">= {minimum!r}")
    high = None if maximum is None else f"<= {maximum!r}"
    return " and ".join(part for part in (low, high) if part)


def check_integer(value, name: str, *, minimum: int | None = None,
                  maximum: int | None = None, what: str = "whole number") -> int:
    """Return ``value`` as an int if it is an integer (not a bool) within the bounds.

    Raises
    ------
    ParameterTypeError
        If ``value`` is not an integer (floats such as ``8.0`` and booleans are refused).
    ParameterError
        If it lies outside ``[minimum, maximum]``.
    """
    bounds = _bounds_text(minimum, maximum, False)
    wanted = f"{_article(what)} {what}" + (f" {bounds}" if bounds else "")
    if not is_integer(value):
        raise ParameterTypeError(f"{name}: {value!r} is not an integer; give {wanted}",
                                 name=name, value=value)
    value = int(value)
    if (minimum is not None and value < minimum) or (maximum is not None and value > maximum):
        raise ParameterError(f"{name}: {value!r} is out of range; give {wanted}",
                             name=name, value=value)
    return value


def check_number(value, name: str, *, minimum: float | None = None,
                 maximum: float | None = None, strict_minimum: bool = False,
                 what: str = "number") -> float:
    """Return ``value`` as a finite float within the bounds.

    Parameters
    ----------
    value : object
        An int or float (not a bool).
    name : str
        Name in the message.
    minimum, maximum : float or None
        Bounds (inclusive, except the minimum with ``strict_minimum``).
    strict_minimum : bool, default: False
        Require ``value > minimum``.
    what : str, default: "number"
        What the value is, for the message.

    Raises
    ------
    ParameterTypeError
        If ``value`` is not a real number.
    ParameterError
        If it is not finite or lies outside the bounds.
    """
    bounds = _bounds_text(minimum, maximum, strict_minimum)
    wanted = f"a finite {what}" + (f" {bounds}" if bounds else "")
    if not is_number(value):
        raise ParameterTypeError(f"{name}: {value!r} is not a number; give {wanted}",
                                 name=name, value=value)
    number = float(value)
    if not math.isfinite(number):
        raise ParameterError(f"{name}: {value!r} is not finite; give {wanted}",
                             name=name, value=value)
    too_low = minimum is not None and (number <= minimum if strict_minimum else number < minimum)
    if too_low or (maximum is not None and number > maximum):
        raise ParameterError(f"{name}: {value!r} is out of range; give {wanted}",
                             name=name, value=value)
    return number


def check_bool(value, name: str) -> bool:
    """Return ``value`` if it is a bool (``true`` / ``false`` in TOML).

    Raises
    ------
    ParameterTypeError
        For anything else (including 0 and 1).
    """
    if not isinstance(value, (bool, np.bool_)):
        raise ParameterTypeError(f"{name}: {value!r} is not true or false",
                                 name=name, value=value, allowed=(True, False))
    return bool(value)


def finite_float(value, name: str) -> float:
    """``float(value)`` if it is finite; bools are refused.

    Unlike :func:`check_number` this accepts anything ``float`` converts (NumPy 0-d arrays,
    for example), for the array-facing functions that have always taken those.

    Raises
    ------
    TypeError
        For a bool or a value ``float`` cannot convert.
    ValueError
        For NaN or infinity.
    """
    if isinstance(value, bool):
        raise TypeError(f"{name}: {value!r} is not a number")
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise TypeError(f"{name}: {value!r} is not a number") from None
    if not math.isfinite(number):
        raise ValueError(f"{name}: {value!r} is not finite")
    return number


def check_stack_shape(array: np.ndarray, lattice, name: str = "spins") -> None:
    """Check that ``array`` has shape (R >= 1, *lattice.shape).

    Raises
    ------
    ValueError
        For another shape or no replica; the message names ``name``.
    """
    if array.ndim != lattice.dimension + 1 or array.shape[1:] != lattice.shape:
        raise ValueError(
            f"{name}: shape {array.shape} is not (replicas, {', '.join(map(str, lattice.shape))})"
            f" for a {lattice.describe()} lattice"
        )
    if array.shape[0] < 1:
        raise ValueError(f"{name}: needs at least one replica")


def check_spins(spins, lattice, name: str = "spins", *, writeable: bool = False) -> None:
    """Check a stack of configurations: an int8 ndarray of shape (R >= 1, *lattice.shape).

    With ``writeable`` it must also be C-contiguous and writeable (the engine advances it in
    place). Values are not checked here.

    Raises
    ------
    TypeError
        For a non-array or a dtype other than int8.
    ValueError
        For a wrong shape, no replica, or (with ``writeable``) a read-only or
        non-contiguous array.
    """
    if not isinstance(spins, np.ndarray):
        raise TypeError(f"{name}: expected an int8 ndarray, got {type(spins).__name__}")
    if spins.dtype != np.int8:
        raise TypeError(f"{name}: dtype is {spins.dtype}, expected int8 spins of +1 and -1")
    check_stack_shape(spins, lattice, name)
    if writeable and not (spins.flags.c_contiguous and spins.flags.writeable):
        raise ValueError(f"{name}: must be a C-contiguous, writeable array")

