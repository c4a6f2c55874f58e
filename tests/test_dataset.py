"""The dataset schema: NetCDF round trip, atomic writes, layouts, the CSV length table."""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

from coarsen.dataset import (
    ESTIMATORS,
    VARIABLES,
    build_dataset,
    engine_layout,
    lengths_table,
    open_dataset,
    snapshot_array,
    write_dataset,
    write_lengths_csv,
)
from coarsen.dataset import replica_mean_and_error
from coarsen.series import MeasurementSeries


def _arrays(rng, R=3, T=4, nk=5, nr=6):
    return {
        "energy": rng.normal(size=(R, T)),
        "magnetization": rng.normal(size=(R, T)),
        "temperature": np.linspace(2.0, 1.0, T),
        "field": np.zeros(T),
        "structure_factor": rng.random((T, nk)),
        "structure_factor_sem": rng.random((T, nk)),
        "correlation": rng.random((T, nr)),
        "correlation_sem": rng.random((T, nr)),
        "length": rng.random((len(ESTIMATORS), R, T)) * 10,
        "domain_count": rng.integers(1, 100, size=(R, T)),
        "largest_domain": rng.random((R, T)),
        "wall_energy": rng.random((R, T)),
        "bulk_energy": rng.random((R, T)),
    }


def _dataset(rng, d=2):
    arrays = _arrays(rng)
    arrays["length"][0, :, 1] = np.nan  # a length that does not exist (no zero crossing)
    shape = {1: (7,), 2: (5, 7), 3: (3, 5, 7)}[d]
    snaps = np.where(rng.random((2, 3, *shape)) < 0.5, 1, -1).astype(np.int8)
    return build_dataset(arrays, times=[0, 1, 3, 10], k=np.arange(5) * 0.1 + 0.1,
                         r=np.arange(6.0), attrs={"spec": "[lattice]\n", "seed": 7,
                                                  "lattice": "test", "rule": "glauber",
                                                  "tc": 2.269, "size": np.array([7, 5])},
                         snapshots=snaps, snapshot_times=[3, 10]), snaps


@pytest.mark.parametrize("d", [1, 2, 3])
def test_netcdf_round_trip_keeps_everything(tmp_path, d):
    ds, _ = _dataset(np.random.default_rng(d), d)
    path = write_dataset(ds, tmp_path / "a.nc")
    back = open_dataset(path)
    xr.testing.assert_identical(ds, back)
    assert back["snapshot"].dtype == np.int8
    for name in set(VARIABLES) - {"seed_area", "interface_position"}:  # seeded runs only
        assert back[name].attrs["units"] and back[name].attrs["long_name"], name


def test_snapshot_layout_is_x_y_z(tmp_path):
    ds, snaps = _dataset(np.random.default_rng(0), 3)
    # engine layout (z, y, x): site (x=6, y=1, z=2) of replica 1 at the second kept time
    assert ds["snapshot"].dims == ("snapshot_time", "replica", "x", "y", "z")
    assert ds["snapshot"].isel(snapshot_time=1, replica=1).sel(x=6, y=1, z=2).item() == \
        snaps[1, 1, 2, 1, 6]
    assert np.array_equal(engine_layout(snapshot_array(snaps), 3), snaps)


def test_attrs_that_netcdf_cannot_store_are_refused():
    rng = np.random.default_rng(1)
    with pytest.raises(TypeError, match="flag"):
        build_dataset(_arrays(rng), times=range(4), k=range(5), r=range(6),
                      attrs={"flag": True})


def test_failed_write_keeps_the_old_file_and_leaves_no_temporary(tmp_path):
    ds, _ = _dataset(np.random.default_rng(2))
    path = write_dataset(ds, tmp_path / "a.nc")
    before = path.read_bytes()
    broken = ds.copy()
    broken["bad"] = ("time", np.array([object(), 1, 2, 3], dtype=object))
    with pytest.raises(Exception):
        write_dataset(broken, path)
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.nc"]


def test_missing_directory_and_missing_file_are_named(tmp_path):
    ds, _ = _dataset(np.random.default_rng(3))
    with pytest.raises(ValueError, match="does not exist"):
        write_dataset(ds, tmp_path / "no" / "a.nc")
    with pytest.raises(ValueError, match="no such file"):
        open_dataset(tmp_path / "none.nc")
    (tmp_path / "junk.nc").write_text("not netcdf")
    with pytest.raises(ValueError, match="junk.nc"):
        open_dataset(tmp_path / "junk.nc")


def test_lengths_table_and_csv(tmp_path):
    ds, _ = _dataset(np.random.default_rng(4))
    table = lengths_table(ds, "corr_zero")
    values = ds["length"].sel(estimator="corr_zero").values
    for t in range(4):
        column = values[:, t][np.isfinite(values[:, t])]
        assert table["replicas"][t] == column.size
        if column.size == 0:
            assert np.isnan(table["length"][t]) and np.isnan(table["length_err"][t])
            continue
        assert np.isclose(table["length"][t], column.mean())
        assert np.isclose(table["length_err"][t], column.std(ddof=1) / np.sqrt(column.size))
    path = write_lengths_csv(ds, tmp_path / "l.csv", "corr_zero")
    text = path.read_text()
    assert text.startswith("# ")
    lines = [line for line in text.splitlines() if not line.startswith("#")]
    assert lines[0] == "time,length,length_err,replicas"
    written = np.array([[float(x or "nan") for x in line.split(",")] for line in lines[1:]])
    kept = table["replicas"] > 0
    assert np.array_equal(written[:, 0], table["time"][kept])
    assert np.array_equal(written[:, 1], table["length"][kept])
    with pytest.raises(ValueError, match="estimator"):
        lengths_table(ds, "radius")


def test_series_mean_and_error_ignore_missing_shots():
    values = np.array([[1.0, 2.0], [3.0, np.nan], [5.0, np.nan]])
    mean, error = replica_mean_and_error(values)
    assert mean.tolist() == [3.0, 2.0]
    assert np.isclose(error[0], 2.0 / np.sqrt(3)) and np.isnan(error[1])
    series = MeasurementSeries(3, 2, 4, 5)
    assert np.isnan(series.arrays["energy"]).all()
    assert (series.arrays["domain_count"] == -1).all()


def test_written_files_get_the_usual_permissions(tmp_path):
    import os

    ds, _ = _dataset(np.random.default_rng(5))
    path = write_dataset(ds, tmp_path / "a.nc")
    umask = os.umask(0)
    os.umask(umask)
    assert path.stat().st_mode & 0o777 == 0o666 & ~umask
