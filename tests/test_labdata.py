"""Lab snapshots: reading, validation, grouping by time, and `coarsen measure`."""

from __future__ import annotations

import numpy as np
import pytest

from coarsen.cli import main
from coarsen.dataset import open_dataset
from coarsen.labdata import load_snapshots, measure_snapshots
from coarsen.simulate import simulate
from coarsen.spec import parse_spec


def _shots(rng, shots=5, shape=(12, 10), values=(0, 1)):
    return rng.choice(np.array(values, dtype=np.int8), size=(shots, *shape))


def test_zero_one_snapshots_become_spins_in_engine_layout(tmp_path):
    shots = _shots(np.random.default_rng(0))
    path = tmp_path / "s.npy"
    np.save(path, shots)
    snaps = load_snapshots(path)
    assert snaps.lattice.kind == "square" and snaps.lattice.boundary == "open"
    assert snaps.lattice.size == (12, 10)  # axes after the shot axis are (x, y)
    assert snaps.spins.shape == (5, 10, 12)
    assert np.array_equal(snaps.spins, np.where(shots == 1, 1, -1).transpose(0, 2, 1))
    assert np.array_equal(snaps.times, np.zeros(5)) and snaps.mask is None


def test_npz_with_times_and_mask_groups_shots_by_time(tmp_path):
    rng = np.random.default_rng(1)
    shots = _shots(rng, values=(-1, 1))
    mask = np.ones((12, 10), dtype=bool)
    mask[3:5, 2:7] = False
    shots[:, 3, 4] = 7  # a masked site may hold anything
    path = tmp_path / "s.npz"
    np.savez(path, spins=shots, times=np.array([5.0, 5.0, 1.0, 1.0, 1.0]), mask=mask)
    ds = measure_snapshots(load_snapshots(path))
    assert ds["time"].values.tolist() == [1.0, 5.0]
    assert ds["shots"].values.tolist() == [3, 2]
    assert ds.sizes["replica"] == 3
    assert np.isnan(ds["energy"].values[2, 1]) and np.isfinite(ds["energy"].values[:, 0]).all()
    assert ds.attrs["source_file"] == str(path) and ds.attrs["masked_sites"] == 10
    assert np.isnan(ds["temperature"].values).all()


def test_measured_run_snapshots_reproduce_the_run(tmp_path):
    """A run's snapshots, measured again as periodic lab data, give the run's own numbers."""
    spec = parse_spec("""
[lattice]
kind = "square"
size = [20, 12]
[dynamics]
rule = "glauber"
[temperature]
value = 1.0
[measure]
times = [0, 3, 10, 30]
snapshots = 4
[ensemble]
replicas = 3
seed = 4
""")
    run = simulate(spec).dataset
    path = tmp_path / "run.nc"
    from coarsen.dataset import write_dataset

    write_dataset(run, path)
    lab = measure_snapshots(load_snapshots(path, boundary="periodic"))
    assert lab["time"].values.tolist() == [0.0, 3.0, 10.0, 30.0]
    for name in ("energy", "magnetization", "domain_count", "largest_domain",
                 "structure_factor", "correlation"):
        assert np.array_equal(lab[name].values, run[name].values, equal_nan=True), name
    # the wall length differs on purpose: lab data measures against the ground state
    for estimator in ("corr_zero", "corr_half", "sk_moment"):
        assert np.array_equal(lab["length"].sel(estimator=estimator).values,
                              run["length"].sel(estimator=estimator).values,
                              equal_nan=True), estimator


@pytest.mark.parametrize("content, message", [
    (lambda rng: _shots(rng, values=(0, 2)), "values \\[2\\]"),
    (lambda rng: np.concatenate([_shots(rng, 2, values=(0, 1)), _shots(rng, 2, values=(-1, 1))]),
     "mix the conventions"),
    (lambda rng: _shots(rng)[0, 0], "shape"),
    (lambda rng: _shots(rng, shape=(2, 2, 2, 2)), "shape"),
    (lambda rng: np.array([["up", "down"], ["down", "up"]]), "dtype"),
])
def test_bad_snapshot_files_name_the_file_and_the_problem(tmp_path, content, message):
    path = tmp_path / "bad.npy"
    np.save(path, content(np.random.default_rng(2)))
    with pytest.raises(ValueError, match=message) as error:
        load_snapshots(path)
    assert "bad.npy" in str(error.value)


def test_pickled_objects_are_refused(tmp_path):
    path = tmp_path / "objects.npy"
    np.save(path, np.array([{"a": 1}, None], dtype=object), allow_pickle=True)
    with pytest.raises(ValueError, match="never loaded"):
        load_snapshots(path)


def test_npz_problems_are_named(tmp_path):
    rng = np.random.default_rng(3)
    path = tmp_path / "s.npz"
    np.savez(path, images=_shots(rng))
    with pytest.raises(ValueError, match="no array named 'spins'"):
        load_snapshots(path)
    np.savez(path, spins=_shots(rng), extra=np.zeros(3))
    with pytest.raises(ValueError, match="unexpected arrays"):
        load_snapshots(path)
    np.savez(path, spins=_shots(rng), mask=np.ones((3, 3), dtype=bool))
    with pytest.raises(ValueError, match="mask has shape"):
        load_snapshots(path)
    np.savez(path, spins=_shots(rng), times=np.arange(3.0))
    with pytest.raises(ValueError, match="3 times given for 5 shots"):
        load_snapshots(path)
    (tmp_path / "s.txt").write_text("1 0 1")
    with pytest.raises(ValueError, match="unsupported file type"):
        load_snapshots(tmp_path / "s.txt")
    with pytest.raises(ValueError, match="no such file"):
        load_snapshots(tmp_path / "none.npy")


def test_measure_command(tmp_path, capsys):
    rng = np.random.default_rng(5)
    path = tmp_path / "s.npz"
    np.savez(path, spins=_shots(rng, shots=4))
    out, table = tmp_path / "m.nc", tmp_path / "m.csv"
    assert main(["measure", str(path), "-o", str(out), "--times", "1", "1", "4", "4",
                 "--lengths-csv", str(table)]) == 0
    assert capsys.readouterr().out.startswith("wrote ")
    ds = open_dataset(out)
    assert ds["time"].values.tolist() == [1.0, 4.0] and ds.sizes["replica"] == 2
    assert table.read_text().count("\n") > 3
    assert main(["measure", str(tmp_path / "none.npz"), "-o", str(out)]) == 2
    assert "none.npz" in capsys.readouterr().err
    assert main(["measure", str(path), "-o", str(out), "--order", "neel", "--lattice",
                 "triangular"]) == 2
    assert "neel" in capsys.readouterr().err.lower()


def test_neel_lab_data_measures_against_the_antiferromagnet(tmp_path):
    """A checkerboard snapshot with one flipped site: in Neel order it has an
    excess energy of 2 z |J| / N (the flipped site breaks its z = 4 bonds; e = -J sum / N),
    and the staggered field has two domains."""
    n = 16
    x, y = np.meshgrid(np.arange(n), np.arange(n), indexing="ij")
    shot = np.where((x + y) % 2 == 0, 1, -1).astype(np.int8)
    shot[3, 5] *= -1
    path = tmp_path / "neel.npy"
    np.save(path, shot[None])
    ds = measure_snapshots(load_snapshots(path, boundary="periodic"), order="neel")
    assert ds.attrs["J"] == -1.0
    excess = ds["energy"].values[0, 0] - (-2.0)
    assert np.isclose(excess, 2 * 4 / n**2)
    assert np.isclose(ds["length"].sel(estimator="wall").values[0, 0], n**2 / 8)
    assert ds["domain_count"].values[0, 0] == 2  # the staggered field: a background and a dot
