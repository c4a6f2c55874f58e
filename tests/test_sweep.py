"""Sweeps on Dask distributed: a LocalCluster, a real scheduler with two worker processes,
a client killed part-way and resumed, a failing task retried and reported.

One small sweep (4 grid points x 2 replica batches, 32^2 and 24^2 lattices) runs on the
embedded LocalCluster once per module; the other runs of the same sweep must reproduce its
parts bit for bit (reproducibility rules of the design: results depend only on the seeds).
"""

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

distributed = pytest.importorskip("distributed")

from coarsen.cli import main  # noqa: E402
from coarsen.sweep import read_manifest, run_sweep  # noqa: E402
from coarsen.sweep_file import load_sweep, task_seed  # noqa: E402
from coarsen.sweep_combine import open_sweep  # noqa: E402

BASE = """
[lattice]
kind = "square"
size = [32, 32]
[dynamics]
rule = "glauber"
[temperature]
relative = 0.5
[measure]
times = { start = 1, stop = 12000, count = 6 }
snapshots = 2
[ensemble]
replicas = 3
seed = 1
"""
SWEEP = """
base = "base.toml"
batch = 2          # 3 replicas per point: a batch of 2 and a batch of 1
seed = 11
[grid]
"temperature.relative" = [0.4, 0.7]
"lattice.size" = [[32, 32], [24, 24]]
"""
PARTS = [f"point-{p:04d}-batch-{b:03d}.nc" for p in range(4) for b in range(2)]
#: Attrs that differ between two runs of the same spec: when, and the spec file's name.
_RUN_ATTRS = ("created", "spec_file")
BIN = Path(sys.executable).parent


def _environment():
    import numba

    env = dict(os.environ, NUMBA_CACHE_DIR=str(numba.config.CACHE_DIR),
               NUMBA_NUM_THREADS="1", PYTHONUNBUFFERED="1")
    return env


def _open(path):
    ds = xr.load_dataset(path, engine="h5netcdf")
    for name in _RUN_ATTRS:
        ds.attrs.pop(name, None)
    return ds


def _assert_same_parts(one: Path, other: Path):
    for name in PARTS:
        xr.testing.assert_identical(_open(one / "parts" / name), _open(other / "parts" / name))


@pytest.fixture(scope="module")
def sweep_file(tmp_path_factory):
    folder = tmp_path_factory.mktemp("sweep-file")
    (folder / "base.toml").write_text(BASE)
    (folder / "sweep.toml").write_text(SWEEP)
    return folder / "sweep.toml"


@pytest.fixture(scope="module")
def local_sweep(sweep_file, tmp_path_factory):
    """The sweep on the embedded LocalCluster (2 worker processes), through the CLI."""
    out = tmp_path_factory.mktemp("local") / "run"
    assert main(["sweep", str(sweep_file), "-o", str(out), "--workers", "2", "--quiet"]) == 0
    return out


def test_local_cluster_sweep_combines_the_grid(local_sweep):
    assert sorted(os.listdir(local_sweep / "parts")) == PARTS
    manifest = read_manifest(local_sweep)
    assert sorted(manifest["finished"]) == PARTS and not manifest["failed"]
    ds = open_sweep(local_sweep)
    assert ds["temperature.relative"].values.tolist() == [0.4, 0.7]
    assert ds["lattice.size"].values.tolist() == ["[32, 32]", "[24, 24]"]
    assert ds.sizes["replica"] == 3
    assert ds["energy"].dims == ("temperature.relative", "lattice.size", "replica", "time")
    # replicas 0, 1 ran in batch 0, replica 2 in batch 1, each with its derived seed
    point = 2  # temperature.relative = 0.7, lattice.size = [32, 32]
    seeds = ds["task_seed"].isel({"temperature.relative": 1, "lattice.size": 0}).values
    assert seeds.tolist() == [task_seed(11, point, 0)] * 2 + [task_seed(11, point, 1)]
    # the lattice varies along the grid: its attr became a variable
    assert ds["lattice"].values[0].tolist() == ["square 32x32 periodic",
                                                "square 24x24 periodic"]
    # batches concatenated: the replica data are the parts' data, in batch order
    one = _open(local_sweep / "parts" / PARTS[2 * point])
    two = _open(local_sweep / "parts" / PARTS[2 * point + 1])
    cell = ds.isel({"temperature.relative": 1, "lattice.size": 0})
    np.testing.assert_array_equal(cell["energy"].values,
                                  np.concatenate([one["energy"].values, two["energy"].values]))
    # the replica mean over both batches (the pooled error is checked in test_sweep_file.py)
    np.testing.assert_allclose(cell["structure_factor"].sel(k=one["k"]).values,
                               (2 * one["structure_factor"] + two["structure_factor"]).values
                               / 3, rtol=1e-12)
    # the 24^2 points have fewer k shells and sites: joined outer, missing entries NaN / 0
    small = ds.isel({"temperature.relative": 0, "lattice.size": 1})
    assert np.isnan(small["correlation"].sel(r=ds["r"].values.max())).all()
    assert (small["snapshot"].sel(x=30) == 0).all()
    combined = _open(local_sweep / "combined.nc")
    ds.attrs.pop("created")
    xr.testing.assert_identical(combined, ds)


def _timers(dask_worker):
    return {name: timer.callback_time for name, timer in dask_worker.periodic_callbacks.items()}


def test_embedded_cluster_workers_run_with_the_quiet_settings():
    # Dask's defaults: a 20 ms tick, a 100 ms memory poll, a 500 ms system monitor and a 10 ms
    # stack sampler in every worker; the embedded cluster must hand its settings to the
    # worker processes (the nanny copies the configuration at start)
    from coarsen.sweep import _client

    with _client(None, 1, dashboard=False) as client:
        (timers,) = client.run(_timers).values()
    assert "profile" not in timers
    assert timers["tick"] == 1000 and timers["memory_monitor"] == 1000
    assert timers["monitor"] == 5000


def test_manifest_writes_are_throttled_and_flushed(tmp_path):
    # the client records results in its manifest at once, but writes the file only for the
    # first and then at most once per interval; write() flushes what is left
    from coarsen.sweep import _ManifestRecorder

    manifest = {"finished": {}}
    recorder = _ManifestRecorder(manifest, tmp_path, interval=3600)

    def on_disk():
        return json.loads((tmp_path / "manifest.json").read_text())["finished"]

    manifest["finished"]["a"] = 1
    recorder.changed()
    assert on_disk() == {"a": 1}
    manifest["finished"]["b"] = 2
    recorder.changed()
    assert on_disk() == {"a": 1}
    recorder.write()
    assert on_disk() == {"a": 1, "b": 2}
    (tmp_path / "manifest.json").unlink()
    recorder.write()  # nothing new: no write
    assert not (tmp_path / "manifest.json").exists()


def test_lazy_open_reads_through_dask(local_sweep):
    eager = open_sweep(local_sweep, lazy=False)
    lazy = open_sweep(local_sweep, lazy=True)
    try:
        assert lazy["energy"].chunks is not None
        xr.testing.assert_identical(lazy.drop_attrs().load(), eager.drop_attrs())
    finally:
        lazy.close()


def test_a_part_equals_coarsen_run_of_its_spec(local_sweep, tmp_path, capsys):
    part = _open(local_sweep / "parts" / PARTS[7])  # point 3, its last (1-replica) batch
    assert part.attrs["seed"] == task_seed(11, 3, 1)
    spec = tmp_path / "task.toml"
    spec.write_text(part.attrs["spec"])
    assert main(["run", str(spec), "-o", str(tmp_path / "run.nc"), "--quiet",
                 "--threads", "2"]) == 0
    xr.testing.assert_identical(_open(tmp_path / "run.nc"), part)


def _start(args, env, log):
    return subprocess.Popen(args, env=env, stdout=log, stderr=subprocess.STDOUT,
                            start_new_session=True)


def _stop(processes):
    for process in processes:
        if process.poll() is None:
            process.send_signal(signal.SIGTERM)
    for process in processes:
        try:
            process.wait(timeout=20)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait(timeout=10)


@pytest.fixture(scope="module")
def scheduler(tmp_path_factory):
    """A ``dask scheduler`` and two ``dask worker`` processes on 127.0.0.1, stopped by pid."""
    folder = tmp_path_factory.mktemp("scheduler")
    address_file = folder / "scheduler.json"
    env = _environment()
    processes = []
    log = open(folder / "dask.log", "wb")
    try:
        processes.append(_start([str(BIN / "dask"), "scheduler", "--host", "127.0.0.1",
                                 "--port", "0", "--no-dashboard", "--scheduler-file",
                                 str(address_file)], env, log))
        deadline = time.monotonic() + 60
        while not address_file.is_file():
            assert processes[0].poll() is None and time.monotonic() < deadline, \
                (folder / "dask.log").read_text()
            time.sleep(0.1)
        for _ in range(2):
            processes.append(_start([str(BIN / "dask"), "worker", "--scheduler-file",
                                     str(address_file), "--nthreads", "1", "--host",
                                     "127.0.0.1", "--no-dashboard", "--no-nanny"], env, log))
        with distributed.Client(scheduler_file=str(address_file), timeout="60s") as client:
            client.wait_for_workers(2, timeout=120)
            address = client.scheduler.address
        yield address
    finally:
        _stop(processes)
        log.close()


def test_existing_scheduler_reproduces_the_local_cluster(local_sweep, sweep_file, scheduler,
                                                        tmp_path):
    out = tmp_path / "remote"
    assert main(["sweep", str(sweep_file), "-o", str(out), "--scheduler", scheduler,
                 "--quiet"]) == 0
    _assert_same_parts(out, local_sweep)
    workers = {entry["worker"] for entry in read_manifest(out)["finished"].values()}
    assert len(workers) == 2  # both worker processes took tasks
    a, b = _open(out / "combined.nc"), _open(local_sweep / "combined.nc")
    xr.testing.assert_identical(a, b)


def test_failed_tasks_are_retried_reported_and_resumed(scheduler, tmp_path, capsys):
    (tmp_path / "base.toml").write_text(BASE.replace("[32, 32]", "[16, 16]").replace(
        "[measure]", '[initial]\nstate = "file"\npath = "good.npy"\n[measure]'))
    rng = np.random.default_rng(2)
    for name in ("good.npy", "gone.npy"):
        np.save(tmp_path / name, np.where(rng.random((16, 16)) < 0.5, 1, -1).astype(np.int8))
    (tmp_path / "sweep.toml").write_text(
        'base = "base.toml"\nseed = 3\ncombine = "zip"\n[grid]\n'
        '"initial.path" = ["good.npy", "gone.npy"]\n"model.J" = [1.0, 0.8]\n')
    sweep = load_sweep(tmp_path / "sweep.toml")  # validated while gone.npy exists
    (tmp_path / "gone.npy").rename(tmp_path / "kept.npy")
    with distributed.Client(scheduler, timeout="30s") as client:
        with pytest.raises(Exception, match="1 of 2 tasks failed") as caught:
            run_sweep(sweep, tmp_path / "out", client=client, retries=1)
        assert list(caught.value.failed) == ["point-0001-batch-000.nc"]
        assert "gone.npy" in caught.value.failed["point-0001-batch-000.nc"]
        manifest = read_manifest(tmp_path / "out")
        assert list(manifest["finished"]) == ["point-0000-batch-000.nc"]
        (tmp_path / "kept.npy").rename(tmp_path / "gone.npy")
        report = run_sweep(sweep, tmp_path / "out", client=client, resume=True)
    assert (report.ran, report.reused) == (1, 1)
    assert sorted(read_manifest(tmp_path / "out")["finished"]) == [
        "point-0000-batch-000.nc", "point-0001-batch-000.nc"]
    assert not read_manifest(tmp_path / "out")["failed"]
    ds = open_sweep(tmp_path / "out")  # zip: one point dimension, the keys along it
    assert ds["energy"].dims == ("point", "replica", "time")
    assert ds["model.J"].dims == ("point",) and ds["model.J"].values.tolist() == [1.0, 0.8]
    assert ds["initial.path"].values.tolist() == ["good.npy", "gone.npy"]
    assert ds["J"].values.tolist() == [1.0, 0.8]  # the runs' attr, now along the grid


def _descendants(pid):
    import psutil

    try:
        return psutil.Process(pid).children(recursive=True)
    except psutil.NoSuchProcess:
        return []


def test_killed_sweep_resumes_to_the_same_result(local_sweep, sweep_file, tmp_path):
    import psutil

    out = tmp_path / "killed"
    client = subprocess.Popen([str(BIN / "coarsen"), "sweep", str(sweep_file), "-o", str(out),
                               "--workers", "2", "--quiet"], env=_environment(),
                              stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    children = []
    try:
        deadline = time.monotonic() + 180
        finished = {}
        while time.monotonic() < deadline and client.poll() is None:
            children = _descendants(client.pid) or children
            try:
                finished = json.loads((out / "manifest.json").read_text())["finished"]
            except (OSError, ValueError):
                finished = {}
            if finished:
                break
            time.sleep(0.02)
        assert finished, client.stderr.read().decode() if client.poll() is not None else ""
        client.send_signal(signal.SIGKILL)
        client.wait(timeout=30)
    finally:
        if client.poll() is None:
            client.kill()
            client.wait(timeout=30)
        # the workers exit when their parent goes; anything left is stopped by its pid
        gone, alive = psutil.wait_procs(children, timeout=30)
        for process in alive:
            process.kill()
        client.stderr.close()
    done_at_kill = sorted(read_manifest(out)["finished"])
    assert 1 <= len(done_at_kill) < len(PARTS), "the kill came too late to test a resume"
    before = {name: os.stat(out / "parts" / name) for name in done_at_kill}
    assert main(["sweep", str(sweep_file), "-o", str(out), "--workers", "2", "--resume",
                 "--quiet"]) == 0
    assert sorted(os.listdir(out / "parts")) == PARTS  # each part once, no leftovers
    assert sorted(read_manifest(out)["finished"]) == PARTS
    for name, stat in before.items():  # finished parts were not run again
        after = os.stat(out / "parts" / name)
        assert (after.st_ino, after.st_mtime_ns) == (stat.st_ino, stat.st_mtime_ns)
    _assert_same_parts(out, local_sweep)
    xr.testing.assert_identical(_open(out / "combined.nc"), _open(local_sweep / "combined.nc"))


def test_resume_of_another_sweep_is_refused(local_sweep, tmp_path, capsys):
    (tmp_path / "base.toml").write_text(BASE)
    other = tmp_path / "other.toml"
    other.write_text(SWEEP.replace("seed = 11", "seed = 12"))
    assert main(["sweep", str(other), "-o", str(local_sweep), "--resume"]) == 2
    assert "holds another sweep" in capsys.readouterr().err
    assert main(["sweep", str(other), "-o", str(tmp_path)]) == 2
    assert "not empty" in capsys.readouterr().err
