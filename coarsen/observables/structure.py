"""Structure factor S(k) and pair correlation C(r) by FFT, on the full grid and radially averaged.

Definitions, for a stack of configurations ``spins`` of shape ``(R, *lattice.shape)``:

* ``S(k) = |sum_j s_j exp(i k.r_j)|**2 / N`` on the wavevectors of the lattice's discrete
  Fourier grid, ``k = 2 pi (m_x / L_x) b_x + ...`` (``b`` the reciprocal basis); with a site
  mask the sum runs over present sites and N is the number of present sites.
* ``C(d) = <s_i s_(i+d)>``, the mean over the ordered pairs of present sites at
  displacement d. On a torus every site has a partner at every displacement (N pairs); with
  open edges or a mask a displacement has fewer, and the transform of the zero-padded
  (or masked) field divided by the transform-counted pairs gives the exact mean.

Geometry. Sites sit at ``r = x a_x + y a_y + z a_z``. Chain, square and cubic lattices have
the unit vectors; the triangular lattice (stored as a sheared square grid) has
``a_x = (1, 0)`` and ``a_y = (-1/2, sqrt(3)/2)``, so all six bonds, including ``(1, 1)``,
have unit length. ``|k|`` is the length of the shortest wavevector equivalent to k (k in
the first Brillouin zone) and on a torus ``|d|`` is the shortest periodic image.

Radial averages (:class:`MeasurementGrid`). With ``extent`` the length of the shortest
periodic translation of the box (``min(size)`` for chain, square and cubic):

* S(|k|): shells of width ``dk = 2 pi / extent`` centred on ``n dk``; a grid wavevector
  belongs to shell ``floor(|k| / dk + 1/2)`` (on an edge, to the upper shell). Every grid
  wavevector belongs to one shell; nothing is left out. A shell value is the mean of S over
  its wavevectors; shells holding no wavevector are not listed.
* C(r): bins of width 1 centred on the integers 0, 1, ..., ``floor(extent / 2)``; a pair
  belongs to bin ``floor(|d| + 1/2)``; pairs farther apart than the last bin's upper edge
  are not used (past half the torus a distance has no unique meaning). A bin value is the
  mean of ``s_i s_j`` over all its pairs (each pair counts once, so bins of displacements
  with few pairs, near open edges, weigh them less). Open lattices use the same bins.
  Bins without pairs (possible with a mask) are not listed.

Precision and cost. ``precision="single"`` (the default of :class:`MeasurementGrid`)
transforms in float32/complex64: S and C are averages of O(1) numbers, and the rounding error
of a shell or bin average is ~1e-6 of its scale, far below the statistical error of any
measurement, while memory and time halve; ``"double"`` uses float64/complex128. Shell and bin
sums are accumulated in float64. Transforms run on one thread (``workers=1``, whatever
``scipy.fft.set_workers`` says), and replicas are transformed one at a time above 65536
sites, so results are bitwise independent of thread settings and of how many replicas are
measured together, and a 4096**2 configuration needs a few hundred MB of work space.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import scipy.fft as sfft

from coarsen.lattice import Lattice

__all__ = [
    "PRECISIONS",
    "MeasurementGrid",
    "correlation",
    "displacement_length",
    "radial_correlation",
    "radial_structure_factor",
    "structure_and_correlation",
    "structure_factor",
    "wavevector_magnitude",
]

#: Floating-point precisions of the transforms.
PRECISIONS = {"single": (np.float32, np.complex64), "double": (np.float64, np.complex128)}

# A length on a bin or shell edge goes to the upper bin (ties in exact arithmetic, which
# rounding would otherwise split arbitrarily).
_EDGE = 1e-9
# Replicas transformed together: enough for small lattices to amortise the call overhead.
_CHUNK_SITES = 1 << 16


# --------------------------------------------------------------------------------------------
# validation shared by the observables
# --------------------------------------------------------------------------------------------
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
    if spins.ndim != lattice.dimension + 1 or spins.shape[1:] != lattice.shape:
        raise ValueError(
            f"{name}: shape {spins.shape} is not (replicas, {', '.join(map(str, lattice.shape))})"
            f" for a {lattice.describe()} lattice"
        )
    if spins.shape[0] < 1:
        raise ValueError(f"{name}: needs at least one replica")
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


def _check_precision(precision: str) -> None:
    if precision not in PRECISIONS:
        raise ValueError(f"precision: {precision!r} is not one of "
                         f"{', '.join(map(repr, PRECISIONS))}")


# --------------------------------------------------------------------------------------------
# geometry
# --------------------------------------------------------------------------------------------
def _sheared(lattice: Lattice) -> bool:
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


def _translation_extent(lattice: Lattice) -> float:
    """Length of the shortest translation of the box by whole periods."""
    if not _sheared(lattice):
        return float(min(lattice.size))
    lx, ly = lattice.size
    lengths = [math.sqrt((i * lx) ** 2 - (i * lx) * (j * ly) + (j * ly) ** 2)
               for i in range(-2, 3) for j in range(-2, 3) if (i, j) != (0, 0)]
    return min(lengths)


def _axis_values(n: int, period: int | None) -> np.ndarray:
    """Integer coordinates 0..n-1, folded to (-period/2, period/2] when a period is given."""
    values = np.arange(n, dtype=np.float64)
    if period is not None:
        values = values - period * (values > period / 2)
    return values


def _grid_norm2(lattice: Lattice, values_xyz, periods_xyz, cross: float):
    """Squared lengths on an open grid of coordinates given per axis in (x, y, z) order."""
    d = lattice.dimension
    shaped = []
    for axis, v in enumerate(values_xyz):
        shape = [1] * d
        shape[d - 1 - axis] = len(v)  # array axes are (z, y, x)
        shaped.append(v.reshape(shape))
    if _sheared(lattice) and periods_xyz is not None:
        return _min_norm2(shaped[0], shaped[1], periods_xyz[0], periods_xyz[1], cross)
    if _sheared(lattice):
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
    fractions = [_axis_values(n, n) / n for n in lattice.size]
    if _sheared(lattice):
        norm2 = (4.0 / 3.0) * _grid_norm2(lattice, fractions, (1.0, 1.0), 1.0)
    else:
        norm2 = _grid_norm2(lattice, fractions, None, 0.0)
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
        values = [_axis_values(n, n) for n in lattice.size]
        norm2 = _grid_norm2(lattice, values, tuple(float(n) for n in lattice.size), -1.0)
        shape = lattice.shape
    else:
        values = [np.concatenate((np.arange(n), np.arange(-(n - 1), 0))).astype(np.float64)
                  for n in lattice.size]
        norm2 = _grid_norm2(lattice, values, None, -1.0)
        shape = tuple(2 * n - 1 for n in lattice.shape)
    return np.broadcast_to(np.sqrt(norm2), shape).copy()


# --------------------------------------------------------------------------------------------
# the measurement grid
# --------------------------------------------------------------------------------------------
# Bin numbers are computed a slab of rows at a time, so building the grid of a large lattice
# needs little more memory than the grid itself.
_SLAB_ELEMENTS = 1 << 20


def _half_weight(nx: int) -> np.ndarray:
    """Weights of the columns 0 .. nx // 2 of a half grid: 2 for those standing for a partner
    column -m_x as well, 1 for m_x = 0 and (even nx) the Nyquist column."""
    weight = np.full(nx // 2 + 1, 2.0)
    weight[0] = 1.0
    if nx % 2 == 0:
        weight[-1] = 1.0
    return weight


def _autocorrelation(values: np.ndarray, shape) -> np.ndarray:
    """Circular autocorrelation sum_i v_i v_(i+d) on a grid of ``shape`` (zero-padded), float64."""
    axes = tuple(range(-len(shape), 0))
    f = sfft.rfftn(values, s=shape, axes=axes, workers=1)
    return sfft.irfftn(f.real**2 + f.imag**2, s=shape, axes=axes, workers=1)


def _bin_numbers(lattice: Lattice, values_xyz, periods, cross: float, scale: float,
                 n_bins: int | None, weight):
    """Bin number ``floor(scale |v| + 1/2)`` of every point of a coordinate grid, and the
    weighted number of points per bin.

    ``values_xyz`` gives the coordinates per axis in (x, y, z) order (the grid is their outer
    product, array axes (z, y, x)); points at or beyond ``n_bins - 1/2`` get bin ``n_bins``.
    ``weight(rows)`` returns the weights of a slab of the first array axis (broadcastable).
    """
    d = lattice.dimension
    shape = tuple(len(v) for v in values_xyz[::-1])
    per_row = math.prod(shape[1:])
    index = np.empty(math.prod(shape), dtype=np.intp)
    sums = np.zeros(1)
    step = max(1, _SLAB_ELEMENTS // per_row)
    for start in range(0, shape[0], step):
        rows = slice(start, min(start + step, shape[0]))
        values = list(values_xyz)
        values[d - 1] = values[d - 1][rows]
        length = scale * np.sqrt(_grid_norm2(lattice, values, periods, cross))
        raw = np.floor(length + 0.5 + _EDGE).astype(np.intp)
        if n_bins is not None:
            raw[length >= n_bins - 0.5] = n_bins
        slab = (rows.stop - rows.start,) + shape[1:]
        raw = np.broadcast_to(raw, slab).ravel()
        index[rows.start * per_row: rows.stop * per_row] = raw
        counted = np.bincount(raw, weights=np.broadcast_to(weight(rows), slab).ravel())
        if len(counted) > len(sums):
            counted[: len(sums)] += sums
            sums = counted
        else:
            sums[: len(counted)] += counted
    return index, sums


def _compact(index: np.ndarray, sums: np.ndarray, n_raw: int):
    """Renumber the non-empty bins 0 .. n - 1 in place (others become n); (kept, their sums)."""
    sums = np.concatenate((sums, np.zeros(max(0, n_raw - len(sums)))))[:n_raw]
    kept = np.flatnonzero(sums > 0)
    lut = np.full(max(n_raw, int(index.max()) + 1) + 1, len(kept), dtype=np.intp)
    lut[kept] = np.arange(len(kept))
    for start in range(0, len(index), _SLAB_ELEMENTS):
        part = index[start: start + _SLAB_ELEMENTS]
        part[...] = lut[part]
    return kept, sums[kept]


@dataclass(frozen=True, eq=False)
class MeasurementGrid:
    """Shells in |k| and bins in r for one lattice and mask, computed once.

    Parameters
    ----------
    lattice : Lattice
        The geometry.
    mask : ndarray of shape lattice.shape and dtype bool, optional
        True where a site is present; missing sites carry no spin and no pairs. An all-True
        mask is the same as none.
    precision : {"single", "double"}, default: "single"
        Floating-point precision of the transforms (module notes).

    Attributes
    ----------
    k : ndarray of shape (n_k,), float64
        Shell centres ``n dk`` in 1/lattice spacing (non-empty shells).
    r : ndarray of shape (n_r,), float64
        Bin centres 0, 1, ... in lattice spacings (bins with pairs).
    k_spacing : float
        Shell width ``dk = 2 pi / extent``.
    r_max : float
        Half the shortest periodic translation, ``extent / 2``.
    shell_counts : ndarray of shape (n_k,), int64
        Wavevectors of the full grid in each shell.
    pair_counts : ndarray of shape (n_r,), int64
        Ordered pairs of present sites (self-pairs included) in each bin.
    n_present : int
        Present sites.

    Notes
    -----
    The grid holds one bin number (8 bytes) per wavevector of the half spectrum and per
    displacement in use (half the displacements on a torus, by the symmetry C(d) = C(-d)):
    about 8 bytes per site periodic and 12 open, e.g. 134 MB for a 4096**2 torus.
    """

    lattice: Lattice
    mask: np.ndarray | None = None
    precision: str = "single"
    k: np.ndarray = field(init=False, repr=False)
    r: np.ndarray = field(init=False, repr=False)
    k_spacing: float = field(init=False, repr=False)
    r_max: float = field(init=False, repr=False)
    shell_counts: np.ndarray = field(init=False, repr=False)
    pair_counts: np.ndarray = field(init=False, repr=False)
    n_present: int = field(init=False, repr=False)
    _k_index: np.ndarray = field(init=False, repr=False)
    _k_weight: np.ndarray = field(init=False, repr=False)
    _r_index: np.ndarray = field(init=False, repr=False)
    _r_weight: np.ndarray | None = field(init=False, repr=False)
    _padded: tuple | None = field(init=False, repr=False)
    _window: tuple | None = field(init=False, repr=False)

    def __post_init__(self):
        check_lattice(self.lattice)
        _check_precision(self.precision)
        mask = check_mask(self.mask, self.lattice)
        lat = self.lattice
        set_ = object.__setattr__
        set_(self, "mask", mask)
        set_(self, "n_present", int(lat.n_sites if mask is None else np.count_nonzero(mask)))
        extent = _translation_extent(lat)
        set_(self, "k_spacing", 2.0 * np.pi / extent)
        set_(self, "r_max", extent / 2.0)
        self._init_shells()
        if lat.periodic:
            self._init_torus_bins()
        else:
            self._init_open_bins()
        for name in ("k", "r", "shell_counts", "pair_counts", "_k_weight"):
            getattr(self, name).setflags(write=False)

    def _init_shells(self):
        """Shell of every wavevector of the half spectrum (columns m_x = 0 .. L_x / 2)."""
        lat = self.lattice
        nx = lat.size[0]
        fractions = [_axis_values(n, n) / n for n in lat.size]
        fractions[0] = fractions[0][: nx // 2 + 1]
        if _sheared(lat):  # |k|^2 = (4/3)(2 pi)^2 min (u^2 + u v + v^2)
            periods, cross, scale = (1.0, 1.0), 1.0, 2.0 * np.pi * math.sqrt(4.0 / 3.0)
        else:
            periods, cross, scale = None, 0.0, 2.0 * np.pi
        weight = _half_weight(nx)
        index, sums = _bin_numbers(lat, fractions, periods, cross, scale / self.k_spacing,
                                   None, lambda rows: weight)
        kept, counts = _compact(index, sums, len(sums))
        object.__setattr__(self, "_k_index", index)
        object.__setattr__(self, "_k_weight", weight)
        object.__setattr__(self, "k", kept * self.k_spacing)
        object.__setattr__(self, "shell_counts", np.rint(counts).astype(np.int64))

    def _n_bins(self) -> int:
        return int(math.floor(self.r_max)) + 1

    def _set_bins(self, index, sums, weight, padded, window):
        kept, pairs = _compact(index, sums, self._n_bins())
        set_ = object.__setattr__
        set_(self, "_r_index", index)
        set_(self, "_r_weight", weight)
        set_(self, "r", kept.astype(np.float64))
        set_(self, "pair_counts", np.rint(pairs).astype(np.int64))
        set_(self, "_padded", padded)
        set_(self, "_window", window)

    def _init_torus_bins(self):
        """Bins of the displacements 0 <= d_x <= L_x / 2 (shortest images); the others are
        their partners -d (weight 2), like the wavevectors of the half spectrum."""
        lat = self.lattice
        nx = lat.size[0]
        values = [_axis_values(n, n) for n in lat.size]
        values[0] = values[0][: nx // 2 + 1]
        weight = _half_weight(nx)
        if self.mask is None:
            pairs = lambda rows: lat.n_sites * weight  # noqa: E731
        else:
            full = np.rint(_autocorrelation(self.mask.astype(np.float64), lat.shape))
            half = full[..., : nx // 2 + 1] * weight
            pairs = lambda rows: half[rows]  # noqa: E731
        periods = tuple(float(n) for n in lat.size) if _sheared(lat) else None
        index, sums = _bin_numbers(lat, values, periods, -1.0, 1.0, self._n_bins(), pairs)
        self._set_bins(index, sums, weight, None, None)

    def _init_open_bins(self):
        """Bins of the displacements |d_a| <= D_a that can lie within the last bin, with pair
        counts prod_a (L_a - |d_a|) (no mask) or from the zero-padded mask autocorrelation."""
        lat = self.lattice
        edge = self._n_bins() - 0.5
        stretch = 2.0 / math.sqrt(3.0) if _sheared(lat) else 1.0  # |d|^2 >= (3/4) d_x^2
        reach = [min(n - 1, math.ceil(stretch * edge) - 1) for n in lat.size]  # (x, y, z)
        values = [np.concatenate((np.arange(r + 1), np.arange(-r, 0))).astype(np.float64)
                  for r in reach]
        padded = tuple(sfft.next_fast_len(n + r, real=True)
                       for n, r in zip(lat.shape, reach[::-1]))
        window = tuple(np.concatenate((np.arange(r + 1), np.arange(m - r, m)))
                       for r, m in zip(reach[::-1], padded))
        if self.mask is None:
            d = lat.dimension
            factors = []
            for axis, (n, v) in enumerate(zip(lat.size, values)):
                shape = [1] * d
                shape[d - 1 - axis] = len(v)
                factors.append((n - np.abs(v)).reshape(shape))
            product = math.prod(factors[:-1], start=1.0) if d > 1 else 1.0

            def pairs(rows):
                return factors[-1][rows] * product
        else:
            full = np.rint(_autocorrelation(self.mask.astype(np.float64), padded))
            windowed = full[np.ix_(*window)]
            del full

            def pairs(rows):
                return windowed[rows]
        index, sums = _bin_numbers(lat, values, None, -1.0, 1.0, self._n_bins(), pairs)
        self._set_bins(index, sums, None, padded, window)

    @property
    def _real(self):
        return PRECISIONS[self.precision][0]

    def describe(self) -> str:
        """Short text such as ``'square 64x64 periodic: 46 shells, 33 bins'``."""
        return f"{self.lattice.describe()}: {len(self.k)} shells, {len(self.r)} bins"


# --------------------------------------------------------------------------------------------
# full-grid S(k) and C(d)
# --------------------------------------------------------------------------------------------
def _masked_field(spins: np.ndarray, mask, dtype) -> np.ndarray:
    values = spins.astype(dtype)
    if mask is not None:
        values *= mask
    return values


def _axes(lattice: Lattice) -> tuple[int, ...]:
    return tuple(range(-lattice.dimension, 0))


def structure_factor(spins: np.ndarray, lattice: Lattice, mask: np.ndarray | None = None, *,
                     precision: str = "double") -> np.ndarray:
    """S(k) on the full discrete Fourier grid of each configuration.

    Parameters
    ----------
    spins : ndarray of shape (R, *lattice.shape)
        Configurations (+1/-1, or any real field).
    lattice : Lattice
    mask : ndarray of shape lattice.shape and dtype bool, optional
        True where a site is present; S is ``|sum over present sites|**2 / N_present``.
    precision : {"single", "double"}, default: "double"

    Returns
    -------
    ndarray of shape (R, *lattice.shape), float64
        Entry ``[r, m_z, m_y, m_x]`` in FFT order; :func:`wavevector_magnitude` gives |k|.
    """
    check_stack(spins, lattice)
    mask = check_mask(mask, lattice)
    _check_precision(precision)
    real, _ = PRECISIONS[precision]
    n_present = lattice.n_sites if mask is None else int(np.count_nonzero(mask))
    f = sfft.fftn(_masked_field(spins, mask, real), axes=_axes(lattice), workers=1)
    return (f.real**2 + f.imag**2).astype(np.float64) / n_present


def correlation(spins: np.ndarray, lattice: Lattice, mask: np.ndarray | None = None, *,
                precision: str = "double") -> np.ndarray:
    """C(d) = <s_i s_(i+d)> over the pairs of present sites, for every displacement d.

    Parameters
    ----------
    spins : ndarray of shape (R, *lattice.shape)
    lattice : Lattice
    mask : ndarray of shape lattice.shape and dtype bool, optional
    precision : {"single", "double"}, default: "double"

    Returns
    -------
    ndarray, float64
        Periodic lattices: shape ``(R, *lattice.shape)``, entry ``d mod L`` (FFT order), so
        ``C[:, 0, 1]`` is the displacement ``(x, y) = (1, 0)`` of a square lattice. Open
        lattices: shape ``(R, *(2 L - 1))``, entry ``d mod (2 L - 1)``. NaN where no pair of
        present sites has that displacement. :func:`displacement_length` gives |d|.
    """
    check_stack(spins, lattice)
    mask = check_mask(mask, lattice)
    _check_precision(precision)
    real, _ = PRECISIONS[precision]
    present = np.ones(lattice.shape) if mask is None else mask.astype(np.float64)
    if lattice.periodic:
        shape, take = lattice.shape, None
    else:
        shape = tuple(sfft.next_fast_len(2 * n - 1, real=True) for n in lattice.shape)
        take = tuple(np.concatenate((np.arange(n), np.arange(m - n + 1, m)))
                     for n, m in zip(lattice.shape, shape))
    sums = _autocorrelation(_masked_field(spins, mask, real), shape).astype(np.float64)
    pairs = np.rint(_autocorrelation(present, shape))
    if take is not None:
        sums = sums[(slice(None),) + np.ix_(*take)]
        pairs = pairs[np.ix_(*take)]
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(pairs > 0, sums / pairs, np.nan)


# --------------------------------------------------------------------------------------------
# radial averages
# --------------------------------------------------------------------------------------------
def _check_grid(grid, spins) -> None:
    if not isinstance(grid, MeasurementGrid):
        raise TypeError(f"grid: expected a MeasurementGrid, got {type(grid).__name__}")
    check_stack(spins, grid.lattice)


def replica_chunks(replicas: int, n_sites: int):
    """Slices of replicas measured together: one replica above 65536 sites, more below."""
    step = max(1, _CHUNK_SITES // n_sites)
    for start in range(0, replicas, step):
        yield slice(start, min(start + step, replicas))


def _power_in_place(f: np.ndarray) -> np.ndarray:
    """Overwrite a spectrum with |F|**2 (real part; imaginary part zero); return the real view.

    Working in place spares two arrays the size of the spectrum per configuration, which
    matters for the time of fresh allocations as much as for memory.
    """
    real, imag = f.real, f.imag
    np.square(real, out=real)
    np.square(imag, out=imag)
    real += imag
    imag[...] = 0
    return real


def _radial_chunk(values: np.ndarray, grid: MeasurementGrid, want_s: bool, want_c: bool):
    """Shell and bin averages of one chunk of (masked) fields."""
    lat = grid.lattice
    axes = _axes(lat)
    reps = values.shape[0]
    f = sfft.rfftn(values, axes=axes, workers=1)
    power = _power_in_place(f)
    s_out = c_out = None
    if want_s:
        s_out = np.empty((reps, len(grid.k)))
        norm = grid.n_present * grid.shell_counts
        for i in range(reps):
            weighted = power[i].astype(np.float64)  # bincount's own cast is slow
            weighted *= grid._k_weight
            s_out[i] = np.bincount(grid._k_index, weights=weighted.reshape(-1),
                                   minlength=len(grid.k) + 1)[: len(grid.k)] / norm
    if want_c:
        if grid._padded is not None:
            del f, power
            f = sfft.rfftn(values, s=grid._padded, axes=axes, workers=1)
            _power_in_place(f)
        # C(d) sums = inverse transform of |F|^2 (Wiener-Khinchin)
        sums = sfft.irfftn(f, s=grid._padded or lat.shape, axes=axes, workers=1,
                           overwrite_x=True)
        del f
        c_out = np.empty((reps, len(grid.r)))
        half = lat.size[0] // 2 + 1
        for i in range(reps):
            if grid._window is None:
                block = sums[i][..., :half].astype(np.float64)
                block *= grid._r_weight
            else:
                block = sums[i][np.ix_(*grid._window)].astype(np.float64)
            c_out[i] = np.bincount(grid._r_index, weights=block.reshape(-1),
                                   minlength=len(grid.r) + 1)[: len(grid.r)] / grid.pair_counts
    return s_out, c_out


def _radial(spins, grid: MeasurementGrid, want_s: bool, want_c: bool):
    _check_grid(grid, spins)
    reps = spins.shape[0]
    s_all = np.empty((reps, len(grid.k))) if want_s else None
    c_all = np.empty((reps, len(grid.r))) if want_c else None
    for part in replica_chunks(reps, grid.lattice.n_sites):
        values = _masked_field(spins[part], grid.mask, grid._real)
        s, c = _radial_chunk(values, grid, want_s, want_c)
        if want_s:
            s_all[part] = s
        if want_c:
            c_all[part] = c
    return s_all, c_all


def structure_and_correlation(spins: np.ndarray, grid: MeasurementGrid):
    """Radially averaged S(|k|) and C(r) of each configuration, from one transform.

    Parameters
    ----------
    spins : ndarray of shape (R, *grid.lattice.shape)
        Configurations (+1/-1, or any real field); masked sites are ignored.
    grid : MeasurementGrid

    Returns
    -------
    structure_factor : ndarray of shape (R, len(grid.k)), float64
        Mean of S(k) over each shell.
    correlation : ndarray of shape (R, len(grid.r)), float64
        Mean of ``s_i s_j`` over the pairs in each distance bin.

    Notes
    -----
    On a torus C is the inverse transform of S (Wiener-Khinchin), so one forward and one
    inverse real FFT give both. Open lattices add one zero-padded forward transform, of the
    smallest fast size that keeps the displacements in use free of wrap-around.
    Replicas are transformed a few at a time (one at a time above 65536 sites), so memory
    stays at a few times the size of one configuration in floating point.
    """
    return _radial(spins, grid, True, True)


def radial_structure_factor(spins: np.ndarray, grid: MeasurementGrid) -> np.ndarray:
    """Radially averaged S(|k|), shape (R, len(grid.k)) (see :func:`structure_and_correlation`)."""
    return _radial(spins, grid, True, False)[0]


def radial_correlation(spins: np.ndarray, grid: MeasurementGrid) -> np.ndarray:
    """Radially averaged C(r), shape (R, len(grid.r)) (see :func:`structure_and_correlation`)."""
    return _radial(spins, grid, False, True)[1]
