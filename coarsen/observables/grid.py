"""The measurement grid: |k| shells and distance bins of one lattice and mask, built once.

Radial averages. With ``extent`` the length of the shortest periodic translation of the box
(``min(size)`` for chain, square and cubic):

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

The grid keeps, for the transforms of :mod:`coarsen.observables.structure`, the shell number
of every wavevector of the half spectrum and the bin number of every displacement in use
(uint16, or int32 when there are more than 65534 bins), with the rows and columns of the
correlation grid that hold those displacements.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import scipy.fft as sfft

from coarsen.lattice import Lattice
from coarsen.observables._checks import (
    PRECISIONS,
    check_lattice,
    check_mask,
    check_precision,
)
from coarsen.observables._parallel import WorkspacePool
from coarsen.observables.geometry import (
    axis_values,
    grid_norm2,
    sheared,
    translation_extent,
)

__all__ = ["MeasurementGrid"]

# A length on a bin or shell edge goes to the upper bin (ties in exact arithmetic, which
# rounding would otherwise split arbitrarily).
_EDGE = 1e-9
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


def autocorrelation(values: np.ndarray, shape) -> np.ndarray:
    """Circular autocorrelation sum_i v_i v_(i+d) on a grid of ``shape`` (zero-padded), float64."""
    axes = tuple(range(-len(shape), 0))
    f = sfft.rfftn(values, s=shape, axes=axes, workers=1)
    return sfft.irfftn(f.real**2 + f.imag**2, s=shape, axes=axes, workers=1)


def _index_dtype(n_bins: int | None, scale: float, values_xyz):
    """uint16 when every bin number fits (they are at most ``n_bins``, or at most
    ``scale * |v|`` for a grid of |v| <= sqrt(sum of the largest squares) with a cross term
    of at most that size), else int32: half the memory of the grid for lattices up to a few
    ten thousand sites per axis."""
    if n_bins is None:
        largest = sum(float(np.max(np.abs(v))) ** 2 for v in values_xyz)
        n_bins = math.ceil(scale * math.sqrt(2.0 * largest)) + 2
    return np.uint16 if n_bins < np.iinfo(np.uint16).max else np.int32


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
    index = np.empty(math.prod(shape), dtype=_index_dtype(n_bins, scale, values_xyz))
    sums = np.zeros(1)
    step = max(1, _SLAB_ELEMENTS // per_row)
    for start in range(0, shape[0], step):
        rows = slice(start, min(start + step, shape[0]))
        values = list(values_xyz)
        values[d - 1] = values[d - 1][rows]
        length = scale * np.sqrt(grid_norm2(lattice, values, periods, cross))
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
    lut = np.full(max(n_raw, int(index.max()) + 1) + 1, len(kept), dtype=index.dtype)
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
    The grid holds one bin number (2 bytes, uint16, while the bins fit; else 4, int32) per
    wavevector of the half spectrum and per displacement in use (half the displacements on
    a torus, by the symmetry C(d) = C(-d)): about 2 bytes per site periodic and 3 open,
    e.g. 34 MB for a 4096**2 torus. Each thread that has measured on a grid of up to 2**21
    sites keeps its scratch arrays there for the next call: the complex half spectrum
    (4 bytes per site in single precision) and, for the domain labelling, 13 bytes per run
    of equal spins along x. Larger lattices free them after each step.
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
    # shell of each wavevector of the half spectrum, and the weight of each of its columns
    _k_index: np.ndarray = field(init=False, repr=False)
    _k_weight: np.ndarray = field(init=False, repr=False)
    # bin of each displacement in use, and where those sit in the correlation grid:
    # flat start of each row, column offsets within a row and their weights
    _r_index: np.ndarray = field(init=False, repr=False)
    _r_rows: np.ndarray = field(init=False, repr=False)
    _r_columns: np.ndarray = field(init=False, repr=False)
    _r_weight: np.ndarray = field(init=False, repr=False)
    # open lattices: the zero-padded transform shape
    _padded: tuple | None = field(init=False, repr=False)
    # scratch arrays of the threads that measure on this grid, kept between calls
    _workspaces: WorkspacePool = field(init=False, repr=False)

    def __post_init__(self):
        check_lattice(self.lattice)
        check_precision(self.precision)
        mask = check_mask(self.mask, self.lattice)
        lat = self.lattice
        set_ = object.__setattr__
        set_(self, "mask", mask)
        set_(self, "_workspaces", WorkspacePool())
        set_(self, "n_present", int(lat.n_sites if mask is None else np.count_nonzero(mask)))
        extent = translation_extent(lat)
        set_(self, "k_spacing", 2.0 * np.pi / extent)
        set_(self, "r_max", extent / 2.0)
        self._init_shells()
        if lat.periodic:
            self._init_torus_bins()
        else:
            self._init_open_bins()
        for name in ("k", "r", "shell_counts", "pair_counts", "_k_index", "_k_weight",
                     "_r_index", "_r_rows", "_r_columns", "_r_weight"):
            getattr(self, name).setflags(write=False)

    def _init_shells(self):
        """Shell of every wavevector of the half spectrum (columns m_x = 0 .. L_x / 2)."""
        lat = self.lattice
        nx = lat.size[0]
        fractions = [axis_values(n, n) / n for n in lat.size]
        fractions[0] = fractions[0][: nx // 2 + 1]
        if sheared(lat):  # |k|^2 = (4/3)(2 pi)^2 min (u^2 + u v + v^2)
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

    def _set_bins(self, index, sums, padded, window, weight):
        """Store the bins; ``window`` lists per array axis the indices in use of the grid
        of the inverse transform (shape ``padded`` or the lattice shape)."""
        kept, pairs = _compact(index, sums, self._n_bins())
        shape = padded or self.lattice.shape
        strides = [math.prod(shape[a + 1:]) for a in range(len(shape))]
        starts = np.zeros(1, dtype=np.int64)
        for w, stride in zip(window[:-1], strides[:-1]):
            starts = (starts[:, None] + np.asarray(w, dtype=np.int64)[None, :] * stride).ravel()
        set_ = object.__setattr__
        set_(self, "_r_index", index)
        set_(self, "_r_rows", starts)
        set_(self, "_r_columns", np.asarray(window[-1], dtype=np.int64))
        set_(self, "_r_weight", np.ascontiguousarray(weight, dtype=np.float64))
        set_(self, "r", kept.astype(np.float64))
        set_(self, "pair_counts", np.rint(pairs).astype(np.int64))
        set_(self, "_padded", padded)

    def _init_torus_bins(self):
        """Bins of the displacements 0 <= d_x <= L_x / 2 (shortest images); the others are
        their partners -d (weight 2), like the wavevectors of the half spectrum."""
        lat = self.lattice
        nx = lat.size[0]
        values = [axis_values(n, n) for n in lat.size]
        values[0] = values[0][: nx // 2 + 1]
        weight = _half_weight(nx)
        if self.mask is None:
            pairs = lambda rows: lat.n_sites * weight  # noqa: E731
        else:
            full = np.rint(autocorrelation(self.mask.astype(np.float64), lat.shape))
            half = full[..., : nx // 2 + 1] * weight
            pairs = lambda rows: half[rows]  # noqa: E731
        periods = tuple(float(n) for n in lat.size) if sheared(lat) else None
        index, sums = _bin_numbers(lat, values, periods, -1.0, 1.0, self._n_bins(), pairs)
        window = [np.arange(n) for n in lat.shape[:-1]] + [np.arange(nx // 2 + 1)]
        self._set_bins(index, sums, None, window, weight)

    def _init_open_bins(self):
        """Bins of the displacements |d_a| <= D_a that can lie within the last bin, with pair
        counts prod_a (L_a - |d_a|) (no mask) or from the zero-padded mask autocorrelation."""
        lat = self.lattice
        edge = self._n_bins() - 0.5
        stretch = 2.0 / math.sqrt(3.0) if sheared(lat) else 1.0  # |d|^2 >= (3/4) d_x^2
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
            full = np.rint(autocorrelation(self.mask.astype(np.float64), padded))
            windowed = full[np.ix_(*window)]
            del full

            def pairs(rows):
                return windowed[rows]
        index, sums = _bin_numbers(lat, values, None, -1.0, 1.0, self._n_bins(), pairs)
        self._set_bins(index, sums, padded, window, np.ones(len(window[-1])))

    @property
    def _real(self):
        return PRECISIONS[self.precision][0]

    @property
    def _full_width(self) -> int:
        """Length of the last axis of the grid of the inverse transform."""
        return (self._padded or self.lattice.shape)[-1]

    def describe(self) -> str:
        """Short text such as ``'square 64x64 periodic: 46 shells, 33 bins'``."""
        return f"{self.lattice.describe()}: {len(self.k)} shells, {len(self.r)} bins"

