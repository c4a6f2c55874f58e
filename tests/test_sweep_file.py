"""Sweep files: validation by key, grid expansion, task seeds and batches, pooled errors.

None of these start a cluster; the sweeps themselves run in tests/test_sweep.py.
"""

import numpy as np
import pytest

from coarsen.cli import main
from coarsen.spec import parse_spec
from coarsen.sweep_combine import pool_batches
from coarsen.sweep_file import SweepError, coordinate_name, parse_sweep, task_seed

BASE = """
[lattice]
kind = "square"
size = [16, 16]
[dynamics]
rule = "glauber"
[temperature]
relative = 0.5
[measure]
times = { start = 1, stop = 100, count = 5 }
[ensemble]
replicas = 5
seed = 3
"""


def _sweep_text(grid: str, head: str = 'base = "base.toml"\nseed = 7\nbatch = 2\n') -> str:
    return f"{head}[grid]\n{grid}\n"


@pytest.fixture
def folder(tmp_path):
    (tmp_path / "base.toml").write_text(BASE)
    return tmp_path


def _parse(folder, text):
    path = folder / "sweep.toml"
    path.write_text(text)
    return parse_sweep(text, str(path))


def test_product_points_batches_and_seeds(folder):
    sweep = _parse(folder, _sweep_text('"temperature.relative" = [0.3, 0.6]\n'
                                       'lattice.size = [[16, 16], [8, 8], [12, 12]]'))
    assert sweep.shape == (2, 3)
    assert sweep.points[1] == {"temperature.relative": 0.3, "lattice.size": [8, 8]}
    assert sweep.points[3] == {"temperature.relative": 0.6, "lattice.size": [16, 16]}
    # 5 replicas in batches of 2: 2, 2 and a last batch of 1
    assert [t.replicas for t in sweep.tasks[:3]] == [2, 2, 1]
    assert len(sweep.tasks) == 18
    seeds = [t.seed for t in sweep.tasks]
    assert len(set(seeds)) == len(seeds)
    task = sweep.tasks[4]  # point 1, batch 1
    assert (task.point, task.batch) == (1, 1)
    expected = int(np.random.SeedSequence([7, 1, 1]).generate_state(1, np.uint64)[0]) >> 1
    assert task.seed == expected == task_seed(7, 1, 1)
    spec = parse_spec(task.spec_text)  # the text coarsen run would be given
    assert spec.seed == task.seed and spec.replicas == 2
    assert spec.lattice.size == (8, 8) and spec.temperature.points[0][1] == pytest.approx(
        0.3 * spec.tc)


def test_zip_pairs_values(folder):
    sweep = _parse(folder, _sweep_text('"temperature.relative" = [0.3, 0.6]\n'
                                       '"dynamics.rule" = ["glauber", "kawasaki"]',
                                       head='base = "base.toml"\nseed = 7\ncombine = "zip"\n'))
    assert sweep.shape == (2,)
    assert [p["dynamics.rule"] for p in sweep.points] == ["glauber", "kawasaki"]
    assert [t.replicas for t in sweep.tasks] == [5, 5]  # no batch: one task per point


def test_temperature_form_override_replaces_the_base_form(folder):
    sweep = _parse(folder, _sweep_text('"temperature.value" = [1.0, 1.5]'))
    spec = parse_spec(sweep.tasks[0].spec_text)
    assert spec.temperature.points == ((0.0, 1.0),)


def test_inline_base_and_relative_initial_path(folder):
    np.save(folder / "start.npy", np.ones((16, 16), dtype=np.int8))
    inline = BASE.replace("[", "[base.").replace('[base.16, 16]', "[16, 16]")
    text = ('seed = 1\n' + inline + '[base.initial]\nstate = "file"\npath = "start.npy"\n'
            '[grid]\n"model.J" = [1.0, 0.5]\n')
    sweep = _parse(folder, text)
    spec = parse_spec(sweep.tasks[0].spec_text)
    assert spec.initial.parameter_dict()["path"] == str((folder / "start.npy").resolve())


def test_ramp_duration_grid_is_named_ramp_time(folder):
    base = BASE.replace("relative = 0.5",
                        "ramp = { start = 1.5, stop = 0.5, duration = 50, relative = true }")
    (folder / "base.toml").write_text(base)
    sweep = _parse(folder, _sweep_text('"temperature.ramp.duration" = [25, 50]'))
    assert sweep.coordinate_names == ("ramp_time",)
    assert coordinate_name("lattice.size") == "lattice.size"
    assert not parse_spec(sweep.tasks[0].spec_text).is_ramp_scan
    (folder / "base.toml").write_text(base.replace("duration = 50", "duration = [25, 50]"))
    with pytest.raises(SweepError, match="already lists several durations"):
        _parse(folder, _sweep_text('"temperature.ramp.duration" = [25, 50]'))


BAD = {
    "unknown dotted key": ('"temperature.relativ" = [0.3]', "temperature.relativ",
                           "did you mean 'relative'"),
    "unknown table": ('"lattic.size" = [[8, 8]]', "lattic.size", "unknown table"),
    "empty grid": ("", "grid", "empty"),
    "empty value list": ('"lattice.size" = []', "lattice.size", "empty list"),
    "not a list": ('"temperature.relative" = 0.3', "temperature.relative", "not a list"),
    "seed as grid key": ('"ensemble.seed" = [1, 2]', "ensemble.seed", "sweep's seed"),
    "repeated value": ('"temperature.relative" = [0.3, 0.3]', "temperature.relative",
                       "listed twice"),
    "bad value at a point": ('"lattice.size" = [[16, 16], [0, 16]]', "lattice.size",
                             "point 1"),
    "nested key of a scalar": ('"lattice.size.x" = [1]', "lattice.size.x", "no keys below"),
}


@pytest.mark.parametrize("case", sorted(BAD))
def test_bad_grid_exits_2_naming_the_key(folder, capsys, case):
    grid, key, words = BAD[case]
    path = folder / "sweep.toml"
    path.write_text(_sweep_text(grid))
    with pytest.raises(SweepError) as caught:
        parse_sweep(path.read_text(), str(path))
    assert caught.value.key == key
    assert main(["sweep", str(path), "-o", str(folder / "out")]) == 2
    message = capsys.readouterr().err
    assert message.count("\n") == 1 and key in message and words in message
    assert not (folder / "out").exists()


def test_mismatched_zip_exits_2_naming_the_key(folder, capsys):
    path = folder / "sweep.toml"
    path.write_text(_sweep_text('"temperature.relative" = [0.3, 0.6]\n'
                                '"lattice.size" = [[16, 16]]',
                                head='base = "base.toml"\nseed = 7\ncombine = "zip"\n'))
    assert main(["sweep", str(path), "-o", str(folder / "out")]) == 2
    message = capsys.readouterr().err
    assert "'temperature.relative' has 2" in message and "'lattice.size' has 1" in message


@pytest.mark.parametrize("head, key", [
    ('base = "base.toml"\n', "seed"),
    ('base = "missing.toml"\nseed = 1\n', "base"),
    ('base = "base.toml"\nseed = 1\ncombine = "outer"\n', "combine"),
    ('base = "base.toml"\nseed = 1\nbatch = 0\n', "batch"),
    ('base = "base.toml"\nseed = 1\nreplicas = 4\n', "replicas"),
])
def test_bad_top_level_keys(folder, head, key):
    with pytest.raises(SweepError, match=f"^{folder / 'sweep.toml'}: {key}") as caught:
        _parse(folder, _sweep_text('"model.J" = [1.0]', head=head))
    assert caught.value.key == key


def test_workers_with_a_scheduler_is_bad_input(folder, capsys):
    path = folder / "sweep.toml"
    path.write_text(_sweep_text('"model.J" = [1.0]'))
    status = main(["sweep", str(path), "-o", str(folder / "out"), "--scheduler",
                   "tcp://127.0.0.1:1", "--workers", "2"])
    assert status == 2 and "--workers" in capsys.readouterr().err


def test_pooled_mean_and_error_equal_those_of_all_replicas():
    # an identity of the sample mean and variance (no physics): pooling batch summaries
    # must give numpy's mean and std(ddof=1)/sqrt(N) over the concatenated replicas
    rng = np.random.default_rng(5)
    values = rng.normal(size=(7, 4, 3))
    counts = np.array([3, 3, 1])
    batches = np.split(values, np.cumsum(counts)[:-1])
    means = np.stack([b.mean(axis=0) for b in batches])
    errors = np.stack([b.std(axis=0, ddof=1) / np.sqrt(len(b)) if len(b) > 1
                       else np.full(b.shape[1:], np.nan) for b in batches])
    mean, error = pool_batches(means, errors, counts)
    np.testing.assert_allclose(mean, values.mean(axis=0), rtol=1e-12)
    np.testing.assert_allclose(error, values.std(axis=0, ddof=1) / np.sqrt(7), rtol=1e-12)


def test_example_sweep_file_is_valid():
    from pathlib import Path

    from coarsen.sweep_file import load_sweep

    example = Path(__file__).resolve().parents[1] / "data" / "sweeps" / "example.toml"
    sweep = load_sweep(example)
    assert sweep.shape == (3, 2) and len(sweep.tasks) == 12
    assert {t.replicas for t in sweep.tasks} == {8}
