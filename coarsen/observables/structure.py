"""Structure factor S(k) and pair correlation C(r) by FFT, on the full grid and radially averaged.

Definitions, for a stack of configurations ``spins`` of shape ``(R, *lattice.shape)``:

* ``S(k) = |sum_j s_j exp(i k.r_j)|**2 / N`` on the wavevectors of the lattice's discrete
  Fourier grid, ``k = 2 pi (m_x / L_x) b_x + ...`` (``b`` the reciprocal basis); with a site
  mask the sum runs over present sites and N is the number of present sites.
* ``C(d) = <s_i s_(i+d)>``, the mean over the ordered pairs of present sites at
  displacement d. On a torus every site has a partner at every displacement (N pairs); with
  open edges or a mask a displacement has fewer, and the transform of the zero-padded
  (or masked) field divided by the transform-counted pairs gives the exact mean.

The geometry (|k|, |d|) is in :mod:`coarsen.observables.geometry`, the shells and bins of the
radial averages in :mod:`coarsen.observables.grid`.

Precision and cost. ``precision="single"`` (the default of :class:`MeasurementGrid`)
transforms in float32/complex64: S and C are averages of O(1) numbers, and the rounding error
of a shell or bin average is ~1e-6 of its scale, far below the statistical error of any
measurement, while memory and time halve; ``"double"`` uses float64/complex128. The power
``|F|**2`` and the shell and bin sums are accumulated in float64 by the kernels of
``coarsen/kernels/binning.py``, in a fixed order. Transforms run on one thread each
(``workers=1``, whatever ``scipy.fft.set_workers`` says); with ``threads > 1`` replicas are
transformed side by side. Replicas are transformed one at a time above 65536 sites, so
results are bitwise independent of thread settings and of how many replicas are measured
together. On a torus the transforms along x go a block of rows at a time, so the only
full-size array is the complex half spectrum: a 4096**2 configuration needs 67 MB of work
space per thread (single precision).
"""

from __future__ import annotations

import numpy as np
import scipy.fft as sfft

from coarsen.kernels.binning import gathered_bin_sums, power_shell_sums
from coarsen.lattice import Lattice
from coarsen.observables._checks import PRECISIONS, check_mask, check_precision, check_stack
from coarsen.observables._parallel import check_threads, for_each
from coarsen.observables.grid import MeasurementGrid, autocorrelation

__all__ = [
    "correlation",
    "radial_correlation",
    "radial_structure_factor",
    "structure_and_correlation",
    "structure_factor",
]

# Replicas transformed together: enough for small lattices to amortise the call overhead.
_CHUNK_SITES = 1 << 16
# Values per block of rows of the transforms along x on a torus (a float copy of the rows
# and their half spectrum, a few MB), so that no full-size float field is ever made.
_BLOCK_ELEMENTS = 1 << 17


# --------------------------------------------------------------------------------------------
# full-grid S(k) and C(d)
# --------------------------------------------------------------------------------------------
def masked_field(spins: np.ndarray, mask, dtype) -> np.ndarray:
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
    check_precision(precision)
    real, _ = PRECISIONS[precision]
    n_present = lattice.n_sites if mask is None else int(np.count_nonzero(mask))
    f = sfft.fftn(masked_field(spins, mask, real), axes=_axes(lattice), workers=1)
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
    check_precision(precision)
    real, _ = PRECISIONS[precision]
    present = np.ones(lattice.shape) if mask is None else mask.astype(np.float64)
    if lattice.periodic:
        shape, take = lattice.shape, None
    else:
        shape = tuple(sfft.next_fast_len(2 * n - 1, real=True) for n in lattice.shape)
        take = tuple(np.concatenate((np.arange(n), np.arange(m - n + 1, m)))
                     for n, m in zip(lattice.shape, shape))
    sums = autocorrelation(masked_field(spins, mask, real), shape).astype(np.float64)
    pairs = np.rint(autocorrelation(present, shape))
    if take is not None:
        sums = sums[(slice(None),) + np.ix_(*take)]
        pairs = pairs[np.ix_(*take)]
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(pairs > 0, sums / pairs, np.nan)


# --------------------------------------------------------------------------------------------
# radial averages
# --------------------------------------------------------------------------------------------
def check_grid(grid, spins) -> None:
    """Raise unless ``grid`` is a MeasurementGrid and ``spins`` a stack for its lattice."""
    if not isinstance(grid, MeasurementGrid):
        raise TypeError(f"grid: expected a MeasurementGrid, got {type(grid).__name__}")
    check_stack(spins, grid.lattice)


def replica_chunks(replicas: int, n_sites: int) -> list[slice]:
    """Slices of replicas measured together: one replica above 65536 sites, more below."""
    step = max(1, _CHUNK_SITES // n_sites)
    return [slice(start, min(start + step, replicas)) for start in range(0, replicas, step)]


def radial_into(values: np.ndarray, grid: MeasurementGrid, s_out, c_out, workspace) -> None:
    """Shell and bin averages of a chunk of (masked) fields, written into ``s_out`` and
    ``c_out`` (arrays of shape (chunk, n_k) and (chunk, n_r), or None for not wanted).

    ``values`` is any real array (int8 spins, or a float field) and is left unchanged. On a
    torus the only full-size array is the complex half spectrum (``workspace``): the real
    transform along x fills it a block of rows at a time from float copies of those rows,
    the transforms along the other axes work in place (``overwrite_x``), the power and its
    shell sums in place (kernel), and the inverse along x is again taken a block of rows at
    a time, each block's bin sums added in row order. Transforms of a block of rows are
    bitwise those of the whole array (row by row), and the sums run in the same order, so
    the results are the same bits as with whole-array transforms.
    """
    lat = grid.lattice
    d = lat.dimension
    reps = values.shape[0]
    real, complex_ = PRECISIONS[grid.precision]
    nx = lat.size[0]
    half = nx // 2 + 1
    n_k, n_r = len(grid.k), len(grid.r)
    leading = tuple(range(-d, -1))  # the array axes other than x
    if grid._padded is not None:  # open edges: whole-array transforms of a float field
        f = sfft.rfft(values.astype(real), axis=-1, workers=1, overwrite_x=True)
    else:
        rows = values.reshape(reps, -1, nx)
        n_rows = rows.shape[1]
        step = _rows_per_block(reps, nx, n_rows)
        f = workspace.array("spectrum", (reps, *lat.shape[:-1], half), complex_)
        f_rows = f.reshape(reps, n_rows, half)
        for a in range(0, n_rows, step):
            b = min(a + step, n_rows)
            f_rows[:, a:b] = sfft.rfft(rows[:, a:b].astype(real), axis=-1, workers=1,
                                       overwrite_x=True)
    if leading:
        f = sfft.fftn(f, axes=leading, workers=1, overwrite_x=True)
    pairs = f.view(real).reshape(reps, -1, 2 * half)  # (real, imaginary) per column
    shell_norm = grid.n_present * grid.shell_counts
    for i in range(reps):  # |F|^2 in place, and its shell sums
        sums = np.zeros(n_k + 1)
        power_shell_sums(pairs[i], grid._k_index, grid._k_weight, sums)
        if s_out is not None:
            s_out[i] = sums[:n_k] / shell_norm
    if c_out is None:
        return
    # C(d) sums = inverse transform of |F|^2 (Wiener-Khinchin)
    sums = np.zeros((reps, n_r + 1))
    if grid._padded is None:
        if leading:
            f = sfft.ifftn(f, axes=leading, workers=1, overwrite_x=True)
        f_rows = f.reshape(reps, n_rows, half)
        block = workspace.array("correlation rows", (reps, step, nx), real)
        starts = np.arange(step, dtype=np.int64) * nx  # the window holds every row
        for a in range(0, n_rows, step):
            b = min(a + step, n_rows)
            part = block[:, : b - a]
            np.fft.irfft(f_rows[:, a:b], n=nx, axis=-1, out=part)
            for i in range(reps):
                gathered_bin_sums(part[i].reshape(-1), starts[: b - a], grid._r_columns,
                                  grid._r_weight, grid._r_index[a * half: b * half], sums[i])
    else:  # open edges: the zero-padded transform
        del f, pairs
        axes = tuple(range(-d, 0))
        f = sfft.rfftn(values.astype(real), s=grid._padded, axes=axes, workers=1)
        _power_in_place(f)
        flat = sfft.irfftn(f, s=grid._padded, axes=axes, workers=1,
                           overwrite_x=True).reshape(reps, -1)
        del f
        for i in range(reps):
            gathered_bin_sums(flat[i], grid._r_rows, grid._r_columns, grid._r_weight,
                              grid._r_index, sums[i])
    for i in range(reps):
        c_out[i] = sums[i, :n_r] / grid.pair_counts


def _rows_per_block(reps: int, nx: int, n_rows: int) -> int:
    """Rows transformed together along x: about _BLOCK_ELEMENTS values per block."""
    return max(1, min(n_rows, _BLOCK_ELEMENTS // (reps * nx)))


def _power_in_place(f: np.ndarray) -> None:
    """Overwrite a spectrum with |F|**2 (real part; imaginary part zero)."""
    real, imag = f.real, f.imag
    np.square(real, out=real)
    np.square(imag, out=imag)
    real += imag
    imag[...] = 0


def _radial(spins, grid: MeasurementGrid, want_s: bool, want_c: bool, threads):
    check_grid(grid, spins)
    threads = check_threads(threads)
    reps = spins.shape[0]
    s_all = np.empty((reps, len(grid.k))) if want_s else None
    c_all = np.empty((reps, len(grid.r))) if want_c else None

    def one_chunk(part, workspace):
        values = masked_field(spins[part], grid.mask, grid._real)
        radial_into(values, grid, None if s_all is None else s_all[part],
                    None if c_all is None else c_all[part], workspace)

    chunks = replica_chunks(reps, grid.lattice.n_sites)
    for_each(one_chunk, chunks, threads,
             grid.lattice.n_sites * (chunks[0].stop - chunks[0].start), grid._workspaces)
    return s_all, c_all


def structure_and_correlation(spins: np.ndarray, grid: MeasurementGrid, *,
                              threads: int | None = None):
    """Radially averaged S(|k|) and C(r) of each configuration, from one transform.

    Parameters
    ----------
    spins : ndarray of shape (R, *grid.lattice.shape)
        Configurations (+1/-1, or any real field); masked sites are ignored.
    grid : MeasurementGrid
    threads : int, optional
        Replicas transformed side by side; default ``numba.get_num_threads()``. The results
        do not depend on it.

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
    stays at a few times the size of one configuration in floating point per thread.
    """
    return _radial(spins, grid, True, True, threads)


def radial_structure_factor(spins: np.ndarray, grid: MeasurementGrid, *,
                            threads: int | None = None) -> np.ndarray:
    """Radially averaged S(|k|), shape (R, len(grid.k)) (see :func:`structure_and_correlation`)."""
    return _radial(spins, grid, True, False, threads)[0]


def radial_correlation(spins: np.ndarray, grid: MeasurementGrid, *,
                       threads: int | None = None) -> np.ndarray:
    """Radially averaged C(r), shape (R, len(grid.r)) (see :func:`structure_and_correlation`)."""
    return _radial(spins, grid, False, True, threads)[1]
