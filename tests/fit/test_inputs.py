"""CSV length tables and datasets as fit input: reading, validation and its messages."""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

from coarsen.cli import main
from coarsen.fit.inputs import growth_data_from_dataset, load_growth_data, read_length_table

GOOD = """# estimator: corr_half; length_err: standard error of the mean
# lattice: square 128x64 periodic
time,length,length_err,replicas
10,3.0,0.1,8
20,4.2,0.1,8
40,6.0,0.2,8
80,8.4,0.2,8
"""


def _write(tmp_path, text, name="lengths.csv"):
    path = tmp_path / name
    path.write_text(text)
    return path


def test_reads_a_table_with_comments(tmp_path):
    data = read_length_table(_write(tmp_path, GOOD))
    assert np.array_equal(data.time, [10, 20, 40, 80])
    assert np.allclose(data.length, [3.0, 4.2, 6.0, 8.4])
    assert np.allclose(data.log_length_err, [0.1 / 3.0, 0.1 / 4.2, 0.2 / 6.0, 0.2 / 8.4])
    assert data.estimator == "corr_half"
    assert data.system_size == 64.0
    assert data.kind == "table"


def test_table_without_errors_is_fitted_with_a_scatter(tmp_path):
    data = read_length_table(_write(tmp_path, "time,length\n1,2\n2,3\n"))
    assert data.log_length_err is None
    assert "extra-scatter" in data.notes[0]


BAD_TABLES = [
    ("time,size\n1,2\n2,3\n", "no 'length' column"),
    ("length,length_err\n1,2\n2,3\n", "no 'time' column"),
    ("time,length\n1,2\n2,nan\n", r"row 2 \(line 3\), column 'length': 'nan' is not a finite"),
    ("time,length\n1,2\n2,abc\n", r"row 2 \(line 3\), column 'length': 'abc' is not a number"),
    ("time,length\n0,2\n2,3\n", r"row 1 \(line 2\), column 'time': 0.0 must be > 0"),
    ("time,length\n-1,2\n2,3\n", r"row 1 \(line 2\), column 'time': -1.0 must be > 0"),
    ("time,length\n1,2\n3,3\n3,4\n", r"row 3 \(line 4\), column 'time': 3.0 is not greater"),
    ("time,length\n1,2\n3,3\n2,4\n", r"row 3 \(line 4\), column 'time': 2.0 is not greater"),
    ("# c\ntime,length\n1,2\n2,0\n", r"row 2 \(line 4\), column 'length': 0.0 must be > 0"),
    ("time,length\n1,2\n2,-3\n", r"row 2 \(line 3\), column 'length': -3.0 must be > 0"),
    ("time,length,length_err\n1,2,0.1\n2,3,\n", r"row 2 \(line 3\), column 'length_err': empty"),
    ("time,length,length_err\n1,2,0.1\n2,3,0\n", r"row 2 \(line 3\), column 'length_err'"),
    ("time,length\n1,2\n2\n", r"row 2 \(line 3\), column 'length': missing value"),
    ("time,length\n1,2\n", "1 data rows; need at least 2"),
    ("# only comments\n", "no header row"),
    ("time,length,time\n1,2,3\n", "column 'time' appears more than once"),
]


@pytest.mark.parametrize("text, message", BAD_TABLES)
def test_bad_tables_name_the_column_or_row(tmp_path, text, message):
    with pytest.raises(ValueError, match=message):
        read_length_table(_write(tmp_path, text))


@pytest.mark.parametrize("text, message", BAD_TABLES[:10])
def test_bad_tables_exit_2_with_one_line(tmp_path, capsys, text, message):
    path = _write(tmp_path, text)
    assert main(["fit", str(path), "--no-compare"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1
    assert err.startswith("coarsen fit: length table")


def test_fewer_points_than_parameters_exit_2(tmp_path, capsys):
    path = _write(tmp_path, "time,length,length_err\n1,2,0.1\n2,3,0.1\n4,4,0.1\n8,5,0.1\n")
    assert main(["fit", str(path), "--model", "offset", "--tmin", "4", "--no-compare"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1
    assert "2 point(s) for the 3 free parameters of model 'offset'" in err
    assert "length table" in err


def test_missing_input_and_unknown_estimator(tmp_path, capsys):
    assert main(["fit", str(tmp_path / "none.csv")]) == 2
    assert "no such file" in capsys.readouterr().err
    with pytest.raises(ValueError, match="estimator: 'corr_half', but the length table"):
        load_growth_data(_write(tmp_path, GOOD.replace("corr_half", "wall")), "corr_half")


def _dataset(values, times):
    values = np.asarray(values, dtype=float)
    length = np.stack([values * f for f in (1.0, 2.0, 3.0, 4.0)])
    return xr.Dataset(
        {"length": (("estimator", "replica", "time"), length)},
        coords={"estimator": ["corr_zero", "corr_half", "sk_moment", "wall"],
                "replica": np.arange(values.shape[0]), "time": np.asarray(times, float)},
        attrs={"size": np.array([64, 32])})


def test_dataset_lengths_mean_of_logs_and_missing_values():
    values = [[1.0, 2.0, np.nan, 4.0], [2.0, 4.0, np.nan, 0.0], [4.0, 8.0, np.nan, 8.0]]
    data = growth_data_from_dataset(_dataset(values, [0, 1, 2, 3]), "corr_half")
    assert np.array_equal(data.time, [1.0, 3.0])
    assert np.allclose(data.log_length, [np.mean(np.log([4, 8, 16])), np.log(np.sqrt(8 * 16))])
    assert data.system_size == 32.0
    assert len(data.notes) == 2
    assert data.replica_log_lengths.shape == (3, 2)
    with pytest.raises(ValueError, match="estimator: 'size' is not one of"):
        growth_data_from_dataset(_dataset(values, [0, 1, 2, 3]), "size")
    with pytest.raises(ValueError, match="no finite length > 0"):
        growth_data_from_dataset(_dataset(np.full((2, 3), np.nan), [1, 2, 3]), "corr_zero")
