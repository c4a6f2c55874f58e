"""Shell and bin sums of a half spectrum and of a correlation grid, in float64.

The grids are seen as rows of equal length (all array axes but the last flattened). Every
entry has a precomputed bin number (int32, row-major); entries whose number equals the number
of bins are not used. Sums run over the entries in row-major order, so results depend on
nothing but the inputs.
"""

from coarsen.kernels._options import jit_serial

__all__: list[str] = []


@jit_serial
def power_shell_sums(spectrum, shells, column_weight, sums):
    """Overwrite a half spectrum with its power and add the power into shells.

    Parameters
    ----------
    spectrum : ndarray of shape (rows, 2 * columns), float32 or float64
        A complex half spectrum viewed as (real, imaginary) pairs; on return each pair is
        ``(|F|**2, 0)``, the power as a complex array (input of the inverse transform).
    shells : ndarray of shape (rows * columns,), int32
        Shell number of each wavevector.
    column_weight : ndarray of shape (columns,), float64
        How many wavevectors of the full grid each column stands for (1 or 2).
    sums : ndarray of shape (n_shells + 1,), float64
        Zeroed by the caller; receives ``sum weight * |F|**2`` per shell (the last entry
        collects the unused wavevectors).
    """
    rows = spectrum.shape[0]
    columns = column_weight.shape[0]
    for row in range(rows):
        for c in range(columns):
            re = float(spectrum[row, 2 * c])
            im = float(spectrum[row, 2 * c + 1])
            power = re * re + im * im
            sums[shells[row * columns + c]] += column_weight[c] * power
            spectrum[row, 2 * c] = power
            spectrum[row, 2 * c + 1] = 0.0


@jit_serial
def gathered_bin_sums(values, row_starts, columns, column_weight, bins, sums):
    """Add the entries of a window of a grid into bins.

    Parameters
    ----------
    values : ndarray of shape (n,), float32 or float64
        The grid, flattened.
    row_starts : ndarray of shape (rows,), int64
        Flat index of column 0 of each row of the window.
    columns : ndarray of shape (n_columns,), int64
        Column offsets of the window within a row.
    column_weight : ndarray of shape (n_columns,), float64
        Weight of each column.
    bins : ndarray of shape (rows * n_columns,), int32
        Bin number of each entry of the window.
    sums : ndarray of shape (n_bins + 1,), float64
        Zeroed by the caller; receives ``sum weight * value`` per bin.
    """
    n_columns = columns.shape[0]
    for row in range(row_starts.shape[0]):
        start = row_starts[row]
        for c in range(n_columns):
            sums[bins[row * n_columns + c]] += column_weight[c] * float(values[start + columns[c]])
