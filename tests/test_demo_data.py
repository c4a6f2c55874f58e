"""The synthetic demo lab data in data/lab/: reproduced bit for bit by data/make_demo_data.py.

The script runs the engine (a 128 x 128 Kawasaki film, 8 replicas, to 25600 sweeps: a few
seconds) once per module; the tests then image it into a temporary directory and compare the
arrays and the CSV text with the shipped files.
"""

import importlib.util
from pathlib import Path

import numpy as np
import pytest

from coarsen.fit.inputs import read_length_table
from coarsen.labdata import load_snapshots, measure_snapshots

DATA = Path(__file__).resolve().parent.parent / "data"
LAB = DATA / "lab"


def _script():
    spec = importlib.util.spec_from_file_location("make_demo_data", DATA / "make_demo_data.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def script():
    return _script()


@pytest.fixture(scope="module")
def film(script):
    """The film's imaged windows and times, from the engine (clean, before imaging)."""
    return script.simulate_film()


@pytest.fixture(scope="module")
def remade(script, film, tmp_path_factory):
    return script.write_demo_files(tmp_path_factory.mktemp("lab"), *film)


def test_shipped_files_are_the_scripts_output(script, remade):
    assert sorted(p.name for p in LAB.iterdir()) == sorted([script.NPZ_NAME, script.CSV_NAME])
    with np.load(LAB / script.NPZ_NAME) as shipped, np.load(remade["npz"]) as made:
        assert sorted(shipped.files) == sorted(made.files) == ["mask", "spins", "times"]
        for name in shipped.files:
            assert shipped[name].dtype == made[name].dtype, name
            assert shipped[name].shape == made[name].shape, name
            np.testing.assert_array_equal(shipped[name], made[name], err_msg=name)
    assert (LAB / script.CSV_NAME).read_text() == remade["csv"].read_text()


def test_shipped_files_are_small_and_labelled_synthetic(script):
    for path in LAB.iterdir():
        assert "synthetic" in path.name
        assert path.stat().st_size < 300 * 1024, path
    assert (LAB / script.CSV_NAME).read_text().startswith("# SYNTHETIC")
    assert "synthetic" in (DATA / "README.md").read_text().lower()


def test_files_read_back_with_the_lab_loaders(script):
    shots = load_snapshots(LAB / script.NPZ_NAME)
    assert shots.spins.shape == (len(script.ANNEAL_TIMES) * script.PLACES, script.VIEW_SIZE,
                                 script.VIEW_SIZE)
    assert np.unique(shots.times).tolist() == list(script.ANNEAL_TIMES)
    assert shots.mask is not None and 0 < (~shots.mask).sum() < 0.1 * shots.mask.size
    table = read_length_table(LAB / script.CSV_NAME)
    assert table.estimator == script.TABLE_ESTIMATOR
    assert table.system_size == script.VIEW_SIZE
    assert table.time.tolist() == list(script.ANNEAL_TIMES)
    assert table.log_length_err is not None


def test_detection_noise_flips_the_stated_fraction(script, film):
    windows, _ = film
    with np.load(LAB / script.NPZ_NAME) as shipped:
        spins, mask = shipped["spins"], shipped["mask"]
    clean = windows.reshape(spins.shape) == 1
    read = spins[:, mask] == 1
    flipped = (read != clean[:, mask]).mean()
    p, n = script.FLIP_PROBABILITY, read.size
    # binomial standard error of the flipped fraction; 5 of them (common practice, no source)
    assert abs(flipped - p) < 5 * np.sqrt(p * (1 - p) / n)
    assert (spins[:, ~mask] == 0).all()


def test_pixel_flips_leave_the_zero_of_the_correlation_in_place(script, film, tmp_path):
    # independent flips with probability p multiply C(r != 0) by (1 - 2p)^2 (exact in
    # expectation: each of the two spins of a pair keeps its sign with probability 1 - p),
    # so the first zero of C(r), the corr_zero length, should not move (standard algebra)
    windows, times = film
    noisy = measure_snapshots(load_snapshots(LAB / script.NPZ_NAME))
    with np.load(LAB / script.NPZ_NAME) as shipped:
        mask = shipped["mask"]
    # the same windows, mask and layout without the flips
    np.savez(tmp_path / "clean.npz", spins=windows.reshape(-1, *windows.shape[2:]),
             times=np.repeat(times, script.PLACES), mask=mask)
    clean = measure_snapshots(load_snapshots(tmp_path / "clean.npz"))
    lengths = {name: ds["length"].sel(estimator="corr_zero") for name, ds in
               (("noisy", noisy), ("clean", clean))}
    difference = (lengths["noisy"] - lengths["clean"]).values
    # the same configurations under both, so the replica scatter of the difference is its error
    mean = difference.mean(axis=0)
    error = difference.std(axis=0, ddof=1) / np.sqrt(difference.shape[0])
    assert np.all(np.abs(mean) < 4 * error + 1e-9), (mean, error)
    # while the half-height length, which the (1 - 2p)^2 factor does move, is shorter
    half = {name: ds["length"].sel(estimator="corr_half").mean("replica").values for name, ds in
            (("noisy", noisy), ("clean", clean))}
    assert np.all(half["noisy"] < half["clean"])
