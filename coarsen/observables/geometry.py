"""Geometry of the measurement grids: |k| of the Fourier grid, |d| of the displacements.

Sites sit at ``r = x a_x + y a_y + z a_z``. Chain, square and cubic lattices have the unit
vectors; the triangular lattice (stored as a sheared square grid) has ``a_x = (1, 0)`` and
``a_y = (-1/2, sqrt(3)/2)``, so all six bonds, including ``(1, 1)``, have unit length.
``|k|`` is the length of the shortest wavevector equivalent to k (k in the first Brillouin
zone) and on a torus ``|d|`` is the shortest periodic image.
"""

from __future__ import annotations

import math

import numpy as np

from coarsen.lattice import Lattice
from coarsen.observables._checks import check_lattice

__all__ = [
    "axis_values",
    "displacement_length",
    "grid_norm2",
    "sheared",
    "translation_extent",
    "wavevector_magnitude",
]


def sheared(lattice: Lattice) -> bool:
    """True for the triangular lattice, stored as a sheared square grid."""
    return lattice.kind == "triangular"


def _min_norm2(x, y, period_x, period_y, cross: float):
    """min over images of ``x**2 + cross x y + y**2``, x mod period_x, y mod period_y.

    For each image of y the best image of x is the one nearest ``-cross y / 2``; images of y
    beyond ``1 + period_x // period_y`` periods cannot win for |cross| <= 1.
    """
    best = None
    reach = 1 + int(period_x // period_y)
    y0 = y - period_y * np.round(y / period_y)
    for j in range(-reach, reach + 1):
        yj = y0 + j * period_y
        xj = x - period_x * np.round((x + 0.5 * cross * yj) / period_x)
        value = xj * xj + cross * xj * yj + yj * yj
        best = value if best is None else np.minimum(best, value)
    return best


def translation_extent(lattice: Lattice) -> float:
    """Length of the shortest translation of the box by whole periods."""
    if not sheared(lattice):
        return float(min(lattice.size))
    lx, ly = lattice.size
    lengths = [math.sqrt((i * lx) ** 2 - (i * lx) * (j * ly) + (j * ly) ** 2)
               for i in range(-2, 3) for j in range(-2, 3) if (i, j) != (0, 0)]
    return min(lengths)


def axis_values(n: int, period: int | None) -> np.ndarray:
    """Integer coordinates 0..n-1, folded to (-period/2, period/2] when a period is given."""
    values = np.arange(n, dtype=np.float64)
    if period is not None:
        values = values - period * (values > period / 2)
    return values


def grid_norm2(lattice: Lattice, values_xyz, periods_xyz, cross: float):
    """Squared lengths on an open grid of coordinates given per axis in (x, y, z) order."""
    d = lattice.dimension
    shaped = []
    for axis, v in enumerate(values_xyz):
        shape = [1] * d
        shape[d - 1 - axis] = len(v)  # array axes are (z, y, x)
        shaped.append(v.reshape(shape))
    if sheared(lattice) and periods_xyz is not None:
        return _min_norm2(shaped[0], shaped[1], periods_xyz[0], periods_xyz[1], cross)
    if sheared(lattice):
        x, y = shaped
        return x * x + cross * x * y + y * y
    total = 0.0
    for v in shaped:
        total = total + v * v
    return total


def wavevector_magnitude(lattice: Lattice) -> np.ndarray:
    """|k| of every wavevector of the discrete Fourier grid, in the first Brillouin zone.

    Returns
    -------
    ndarray of shape lattice.shape, float64
        Entry ``[m_z, m_y, m_x]`` in FFT order (``numpy.fft.fftfreq``), in 1/lattice spacing.
        On the triangular lattice ``|k|**2 = (4/3) (2 pi)**2 (u**2 + u v + v**2)``,
        ``u = m_x / L_x``, ``v = m_y / L_y``, minimised over the reciprocal lattice.
    """
    check_lattice(lattice)
    fractions = [axis_values(n, n) / n for n in lattice.size]
    if sheared(lattice):
        norm2 = (4.0 / 3.0) * grid_norm2(lattice, fractions, (1.0, 1.0), 1.0)
    else:
        norm2 = grid_norm2(lattice, fractions, None, 0.0)
    out = 2.0 * np.pi * np.sqrt(norm2)
    return np.broadcast_to(out, lattice.shape).copy()


def displacement_length(lattice: Lattice) -> np.ndarray:
    """|d| of every displacement of the full correlation grid (:func:`correlation`).

    Returns
    -------
    ndarray, float64
        Periodic lattices: shape ``lattice.shape``, entry ``[d_z, d_y, d_x]`` for the
        displacement ``d mod L`` (FFT order), shortest image. Open lattices: shape
        ``(2 L - 1)`` per axis, entry ``d mod (2 L - 1)`` for ``-(L - 1) <= d <= L - 1``.
    """
    check_lattice(lattice)
    if lattice.periodic:
        values = [axis_values(n, n) for n in lattice.size]
        norm2 = grid_norm2(lattice, values, tuple(float(n) for n in lattice.size), -1.0)
        shape = lattice.shape
    else:
        values = [np.concatenate((np.arange(n), np.arange(-(n - 1), 0))).astype(np.float64)
                  for n in lattice.size]
        norm2 = grid_norm2(lattice, values, None, -1.0)
        shape = tuple(2 * n - 1 for n in lattice.shape)
    return np.broadcast_to(np.sqrt(norm2), shape).copy()

