"""Crash safety: a killed run resumes to the same dataset; a failing write loses nothing.

* ``coarsen run`` is started as a real process and killed with SIGKILL (no handler runs) at
  random moments, some of them while a checkpoint is being written (the temporary file beside
  the checkpoint exists); ``coarsen run --resume`` then finishes it, and the dataset must be
  identical, bit for bit, to the uninterrupted run's (the ``created`` time aside).
* A write that fails as on a full disk (``ENOSPC`` from the NetCDF writer, after it has put
  some bytes into its temporary file) leaves the previous checkpoint and any existing output
  exactly as they were, leaves no temporary file, is reported on one line with exit status 1,
  and the run resumes from the surviving checkpoint to the same dataset.
"""

from __future__ import annotations

import errno
import hashlib
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

from coarsen.checkpoint import CHECKPOINT_KIND
from coarsen.cli import main
from coarsen.dataset import open_dataset

SPEC = """\
[lattice]
kind = "square"
size = [24, 24]
[dynamics]
rule = "glauber"
[temperature]
relative = 0.5
[measure]
times = { start = 0, stop = 300, count = 31, spacing = "linear" }
snapshots = 3
[ensemble]
replicas = 3
seed = 11
"""

#: (trials killed at a random moment after the first checkpoint, trials killed while a
#: checkpoint is being written)
RANDOM_TRIALS, DURING_WRITE_TRIALS = 7, 4


def _comparable(ds: xr.Dataset) -> xr.Dataset:
    ds = ds.copy()
    ds.attrs.pop("created")
    ds.attrs.pop("spec_file")  # each trial has its own folder
    return ds


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    folder = tmp_path_factory.mktemp("reference")
    spec = folder / "crash.toml"
    spec.write_text(SPEC, encoding="utf-8")
    assert main(["run", str(spec), "-o", str(folder / "reference.nc"), "--quiet"]) == 0
    return _comparable(open_dataset(folder / "reference.nc"))


def _temporaries(folder: Path) -> list[Path]:
    return sorted(folder.glob(".*.tmp"))


def _wait_for(condition, process, timeout=120.0) -> bool:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if condition():
            return True
        if process.poll() is not None:
            return False
        time.sleep(0.001)
    raise AssertionError("the run made no checkpoint in time")


def test_sigkill_at_random_moments_then_resume(reference, tmp_path):
    rng = np.random.default_rng(20261210)
    env = dict(os.environ)
    interrupted = during_write = 0
    for trial in range(RANDOM_TRIALS + DURING_WRITE_TRIALS):
        folder = tmp_path / f"trial{trial}"
        folder.mkdir()
        spec, output = folder / "crash.toml", folder / "out.nc"
        spec.write_text(SPEC, encoding="utf-8")
        checkpoint = folder / "out.nc.checkpoint"
        process = subprocess.Popen(
            [sys.executable, "-m", "coarsen.cli", "run", str(spec), "-o", str(output),
             "--quiet", "--checkpoint-every", "0.001"],
            env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
        try:
            if trial < RANDOM_TRIALS:
                started = _wait_for(checkpoint.is_file, process)
                time.sleep(rng.uniform(0.0, 1.5))
            else:  # while the checkpoint's temporary file is open for writing
                started = _wait_for(lambda: bool(_temporaries(folder)), process)
            writing = bool(_temporaries(folder))
            process.send_signal(signal.SIGKILL)
        finally:
            process.wait(timeout=60)
            process.stderr.close()
        if started and process.returncode == -signal.SIGKILL:
            interrupted += 1
            during_write += writing
        assert main(["run", str(spec), "-o", str(output), "--resume", "--quiet"]) == 0
        xr.testing.assert_identical(_comparable(open_dataset(output)), reference)
        assert not checkpoint.exists()
        assert _temporaries(folder) == []
    print(f"crash trials: {interrupted} killed mid-run, {during_write} during a checkpoint "
          "write; all resumed to the identical dataset")
    # the trials really interrupted runs, several of them in the middle of a checkpoint write
    assert interrupted >= RANDOM_TRIALS + DURING_WRITE_TRIALS - 2
    assert during_write >= DURING_WRITE_TRIALS // 2


def _full_disk_after(monkeypatch, good_writes: int, *, final: bool):
    """Make the NetCDF writer fail with ENOSPC: after ``good_writes`` checkpoints, or (with
    ``final``) only when the finished dataset is written."""
    original = xr.Dataset.to_netcdf
    calls = {"checkpoints": 0}

    def to_netcdf(self, path=None, *args, **kwargs):
        is_checkpoint = self.attrs.get("kind") == CHECKPOINT_KIND
        if is_checkpoint:
            calls["checkpoints"] += 1
        failing = (not is_checkpoint) if final else calls["checkpoints"] > good_writes
        if failing:
            with open(path, "wb") as handle:  # a half-written temporary file
                handle.write(b"\x89HDF\r\n\x1a\n" + b"\0" * 1000)
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(path))
        return original(self, path, *args, **kwargs)

    monkeypatch.setattr(xr.Dataset, "to_netcdf", to_netcdf)
    return calls


@pytest.mark.parametrize("final", [False, True], ids=["checkpoint-write", "final-write"])
def test_full_disk_keeps_checkpoint_and_output(reference, tmp_path, monkeypatch, capsys,
                                               final):
    spec, output = tmp_path / "crash.toml", tmp_path / "out.nc"
    spec.write_text(SPEC, encoding="utf-8")
    checkpoint = tmp_path / "out.nc.checkpoint"
    output.write_bytes(b"an earlier result that must survive")
    before = _digest(output)
    with monkeypatch.context() as patch:
        calls = _full_disk_after(patch, 3, final=final)
        status = main(["run", str(spec), "-o", str(output), "--quiet",
                       "--checkpoint-every", "0.000001"])
    err = capsys.readouterr().err
    assert status == 1
    assert len(err.strip().splitlines()) == 1 and "No space left on device" in err
    assert _digest(output) == before
    assert _temporaries(tmp_path) == []
    saved = xr.load_dataset(checkpoint, engine="h5netcdf")
    assert saved.attrs["kind"] == CHECKPOINT_KIND
    last_time = int(reference["time"].values[-1])
    if final:
        assert saved.attrs["clock"] == last_time  # the whole run survives in the checkpoint
    else:
        assert calls["checkpoints"] == 4 and 0 < saved.attrs["clock"] < last_time
    assert main(["run", str(spec), "-o", str(output), "--resume", "--quiet"]) == 0
    xr.testing.assert_identical(_comparable(open_dataset(output)), reference)
    assert not checkpoint.exists()
