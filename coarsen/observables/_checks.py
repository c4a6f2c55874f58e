"""Input checks shared by the observables: lattices, stacks of configurations, site masks."""

from __future__ import annotations

import numpy as np

from coarsen._validation import check_stack_shape
from coarsen.lattice import Lattice

__all__ = ["PRECISIONS", "check_lattice", "check_mask", "check_precision", "check_stack"]

#: Floating-point precisions of the transforms: (real dtype, complex dtype).
PRECISIONS = {"single": (np.float32, np.complex64), "double": (np.float64, np.complex128)}


def check_lattice(lattice) -> None:
    """Raise TypeError unless ``lattice`` is a :class:`coarsen.lattice.Lattice`."""
    if not isinstance(lattice, Lattice):
        raise TypeError(f"lattice: expected a coarsen.Lattice, got {type(lattice).__name__}")


def check_stack(spins, lattice: Lattice, name: str = "spins") -> np.ndarray:
    """Check a stack of real-valued configurations of shape ``(R, *lattice.shape)``."""
    check_lattice(lattice)
    if not isinstance(spins, np.ndarray):
        raise TypeError(f"{name}: expected an ndarray, got {type(spins).__name__}")
    if spins.dtype == bool or not (np.issubdtype(spins.dtype, np.integer)
                                   or np.issubdtype(spins.dtype, np.floating)):
        raise TypeError(f"{name}: dtype is {spins.dtype}, expected int8 spins of +1 and -1")
    check_stack_shape(spins, lattice, name)
    return spins


def check_mask(mask, lattice: Lattice) -> np.ndarray | None:
    """Validate a site mask (True = site present); an all-True mask becomes None."""
    if mask is None:
        return None
    if not isinstance(mask, np.ndarray):
        raise TypeError(f"mask: expected a boolean ndarray, got {type(mask).__name__}")
    if mask.dtype != bool:
        raise TypeError(f"mask: dtype is {mask.dtype}, expected bool (True = site present)")
    if mask.shape != lattice.shape:
        raise ValueError(f"mask: shape {mask.shape} is not the lattice shape {lattice.shape} "
                         f"of a {lattice.describe()} lattice")
    if not mask.any():
        raise ValueError("mask: no site is present (every entry is False)")
    if mask.all():
        return None
    if mask.flags.writeable:  # keep a private, read-only copy
        mask = mask.copy()
        mask.setflags(write=False)
    return mask


def check_precision(precision: str) -> None:
    if precision not in PRECISIONS:
        raise ValueError(f"precision: {precision!r} is not one of "
                         f"{', '.join(map(repr, PRECISIONS))}")

