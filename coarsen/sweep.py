"""Parameter sweeps as Dask tasks: a grid of specs times replica batches, one part file each.

:func:`run_sweep` plans the tasks of a sweep file (:mod:`coarsen.sweep_file`), skips those a
previous run of the same sweep finished, and runs the rest on Dask distributed: an existing
scheduler (an address or a scheduler file), or else a :class:`distributed.LocalCluster` with
one single-threaded worker process per core, started and shut down here. Each task parses its
own spec text, runs it with one engine thread (:func:`coarsen.simulate.simulate` with
``threads=1``, so workers do not oversubscribe the cores) and writes its dataset atomically
to ``DIR/parts/point-PPPP-batch-BBB.nc``: exactly what ``coarsen run`` writes for that spec
text. The workers write the parts, so on a cluster ``DIR`` must be on a filesystem the
workers and the client share.

The manifest ``DIR/manifest.json`` holds the grid, the tasks and which parts are finished or
failed. The client rewrites it atomically as results come in: at once for the first, then at
most once a second, and for a manifest that is slow to write at most a tenth of the time (a
sweep of thousands of tasks would otherwise spend the client's CPU rewriting it).
``resume=True`` skips the finished parts (a part on disk that the manifest does not list yet,
because the client died before writing it down, is checked against its spec text and
adopted), so a killed sweep loses at most the tasks in flight and no part is ever run twice
to completion into the sweep. A failing task is retried ``retries`` times by Dask, then
reported; the other tasks go on. :func:`coarsen.sweep_combine.open_sweep`
(``coarsen.open_sweep``) gathers the parts into one dataset; ``run_sweep`` writes it to
``DIR/combined.nc``.
"""

from __future__ import annotations

import contextlib
import json
import os
import socket
import time
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path
from typing import Callable

from coarsen.sweep_combine import MANIFEST, MANIFEST_FORMAT, PARTS, open_sweep, read_manifest
from coarsen.sweep_file import Sweep, SweepError

__all__ = ["QUIET_CLUSTER", "SweepFailed", "SweepReport", "default_workers", "open_sweep",
           "read_manifest", "run_part", "run_sweep"]

COMBINED = "combined.nc"
DEFAULT_RETRIES = 2
#: Seconds between two writes of the manifest while tasks finish (at least).
MANIFEST_INTERVAL = 1.0


class SweepFailed(RuntimeError):
    """Some tasks failed after their retries; the others are finished and recorded.

    Attributes
    ----------
    failed : dict of str to str
        Part name -> the last error.
    """

    def __init__(self, failed: dict[str, str], total: int, directory: Path):
        self.failed = dict(failed)
        first = next(iter(failed.items()))
        super().__init__(f"{len(failed)} of {total} tasks failed (first: {first[0]}: "
                         f"{first[1]}); the rest are in {str(directory)!r}, and resuming "
                         "runs the failed ones again")


@dataclass(frozen=True)
class SweepReport:
    """What a sweep did.

    Attributes
    ----------
    tasks, ran, reused : int
        Tasks in the sweep, run now, and found finished (resume).
    points : int
    seconds : float
        Wall time of the tasks run now (scheduling included).
    combined : pathlib.Path or None
        The combined dataset, if written.
    dashboard : str or None
        The Dask dashboard's address, if there was one.
    """

    tasks: int
    ran: int
    reused: int
    points: int
    seconds: float
    combined: Path | None
    dashboard: str | None


def run_part(spec_text: str, path: str) -> dict:
    """Run one task: parse its spec text, simulate with one thread, write the part atomically.

    This is the function the Dask workers run.

    Returns
    -------
    dict
        ``worker`` (host:pid) and ``seconds`` (wall time).
    """
    from coarsen.dataset import write_dataset
    from coarsen.simulate import simulate
    from coarsen.spec import parse_spec

    start = time.perf_counter()
    result = simulate(parse_spec(spec_text), threads=1)
    write_dataset(result.dataset, path)
    return {"worker": f"{socket.gethostname()}:{os.getpid()}",
            "seconds": time.perf_counter() - start}


# --------------------------------------------------------------------------------------------
# the manifest
# --------------------------------------------------------------------------------------------
def _now() -> str:
    return datetime.now(timezone.utc).replace(microsecond=0).isoformat()


def _new_manifest(sweep: Sweep) -> dict:
    return {
        "format": MANIFEST_FORMAT,
        "sweep_digest": sweep.digest,
        "sweep_file": sweep.source,
        "sweep_text": sweep.text,
        "base_text": sweep.base_text,
        "seed": sweep.seed,
        "batch": sweep.batch,
        "combine": sweep.combine,
        "keys": list(sweep.keys),
        "coordinates": list(sweep.coordinate_names),
        "values": {key: sweep.values[key] for key in sweep.keys},
        "shape": list(sweep.shape),
        "points": [dict(point) for point in sweep.points],
        "tasks": [{"point": t.point, "batch": t.batch, "replicas": t.replicas, "seed": t.seed,
                   "part": t.part, "spec_sha256": t.digest} for t in sweep.tasks],
        "finished": {},
        "failed": {},
    }


def _write_manifest(manifest: dict, directory: Path) -> None:
    from coarsen.dataset import write_text_atomically

    write_text_atomically(json.dumps(manifest, indent=1) + "\n", directory / MANIFEST)


class _ManifestRecorder:
    """Writes the manifest after task results, throttled.

    The first result is written at once; later ones at most every ``interval`` seconds, and
    never more than a tenth of the time (the pause after a write is at least nine times the
    write). A result not yet on disk when the client is killed is not lost: its part is on
    disk, and resuming adopts it.
    """

    def __init__(self, manifest: dict, directory: Path, interval: float = MANIFEST_INTERVAL):
        self.manifest, self.directory, self.interval = manifest, directory, interval
        self.unwritten = False
        self.next_write = 0.0

    def changed(self) -> None:
        self.unwritten = True
        if time.monotonic() >= self.next_write:
            self.write()

    def write(self) -> None:
        if not self.unwritten:
            return
        start = time.monotonic()
        _write_manifest(self.manifest, self.directory)
        end = time.monotonic()
        self.unwritten = False
        self.next_write = end + max(self.interval, 9 * (end - start))


def _prepare(sweep: Sweep, directory: Path, resume: bool, notify) -> dict:
    """Create or check the sweep directory; return its manifest."""
    if not directory.parent.is_dir():
        raise SweepError(f"output {str(directory)!r}: the directory {str(directory.parent)!r} "
                         "does not exist", key="output")
    if directory.exists() and not directory.is_dir():
        raise SweepError(f"output {str(directory)!r}: is a file, not a directory", key="output")
    manifest_path = directory / MANIFEST
    if manifest_path.is_file():
        manifest = read_manifest(directory)
        if manifest.get("sweep_digest") != sweep.digest:
            raise SweepError(f"output {str(directory)!r}: holds another sweep (its manifest "
                             "lists different tasks); give a new directory", key="output")
        if not resume:
            raise SweepError(f"output {str(directory)!r}: already holds this sweep; add "
                             "--resume to continue it", key="output")
        return manifest
    if directory.is_dir() and any(directory.iterdir()):
        raise SweepError(f"output {str(directory)!r}: is not empty and holds no sweep "
                         "manifest; give a new or empty directory", key="output")
    if resume:
        notify(f"no manifest in {str(directory)!r}; starting afresh")
    (directory / PARTS).mkdir(parents=True, exist_ok=True)
    manifest = _new_manifest(sweep)
    _write_manifest(manifest, directory)
    return manifest


def _matches(path: Path, spec_text: str) -> bool:
    """True when ``path`` is a readable part whose spec text is ``spec_text``."""
    import xarray as xr

    try:
        with xr.open_dataset(path, engine="h5netcdf") as ds:
            return ds.attrs.get("spec") == spec_text
    except (OSError, ValueError):
        return False


def _pending(sweep: Sweep, manifest: dict, directory: Path, notify) -> list:
    """The tasks still to run; adopts parts on disk that the manifest does not list yet."""
    parts = directory / PARTS
    for stale in parts.glob(".*.tmp"):  # a write cut short by a kill
        stale.unlink(missing_ok=True)
    pending, adopted = [], 0
    for task in sweep.tasks:
        path = parts / task.part
        finished = task.part in manifest["finished"]
        if finished and path.is_file():
            continue
        if not finished and path.is_file() and _matches(path, task.spec_text):
            manifest["finished"][task.part] = {"worker": "adopted", "seconds": None,
                                               "finished": _now()}
            adopted += 1
            continue
        manifest["finished"].pop(task.part, None)
        path.unlink(missing_ok=True)
        pending.append(task)
    if adopted:
        notify(f"adopted {adopted} part{'s' if adopted > 1 else ''} written before the "
               "previous client stopped")
        _write_manifest(manifest, directory)
    return pending


# --------------------------------------------------------------------------------------------
# the cluster
# --------------------------------------------------------------------------------------------
#: Dask settings of the embedded LocalCluster. Dask's defaults wake every process many times a
#: second: a 20 ms tick, a 100 ms memory poll, a 500 ms system monitor and, in each worker, a
#: 10 ms stack sampler. On a 2-core machine those take the cores the engine threads need: with
#: them, sweep tasks of 256² quenches were off the CPU for 8% of their wall time, and a 6-task
#: sweep finished 10-16% later (three interleaved pairs; DEVELOPERS.md, "Sweep speed"). A
#: coarsen task is one long call into a compiled kernel, so the sampled profile says little.
QUIET_CLUSTER = {
    "distributed.admin.tick.interval": "1s",
    "distributed.admin.system-monitor.interval": "5s",
    "distributed.worker.memory.monitor-interval": "1s",
    "distributed.worker.profile.enabled": False,
}


def default_workers() -> int:
    """One worker per core this process may use."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # not on Linux
        return os.cpu_count() or 1


@contextlib.contextmanager
def _client(scheduler, workers, dashboard: bool):
    """A distributed Client: on ``scheduler`` if given, else on a LocalCluster started here."""
    import logging

    from distributed import Client, LocalCluster

    if scheduler is not None:
        try:
            if os.path.isfile(scheduler):
                client = Client(scheduler_file=scheduler, timeout="20s")
            else:
                client = Client(scheduler, timeout="20s")
        except (OSError, ValueError, TypeError) as error:
            raise SweepError(f"--scheduler {scheduler!r}: cannot connect ({error})",
                             key="scheduler") from None
        with client:
            yield client
        return
    import dask

    address = "127.0.0.1:0" if dashboard else None
    with dask.config.set(QUIET_CLUSTER), \
            LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                         dashboard_address=address, silence_logs=logging.ERROR) as cluster, \
            Client(cluster) as client:
        yield client


def _dashboard(client) -> str | None:
    """The dashboard's address, or None when the scheduler serves none (no bokeh)."""
    try:
        services = client.scheduler_info().get("services", {})
        if "dashboard" not in services:
            return None
        return client.dashboard_link or None
    except Exception:  # noqa: BLE001 - no dashboard is not an error
        return None


# --------------------------------------------------------------------------------------------
# running
# --------------------------------------------------------------------------------------------
def run_sweep(sweep: Sweep, directory, *, client=None, scheduler: str | None = None,
              workers: int | None = None, resume: bool = False,
              retries: int = DEFAULT_RETRIES, combine: bool = True, progress: bool = False,
              dashboard: bool = True, notify: Callable[[str], None] | None = None,
              after_task: Callable[[str], None] | None = None) -> SweepReport:
    """Run the tasks of a sweep that are not finished yet and combine the parts.

    Parameters
    ----------
    sweep : coarsen.sweep_file.Sweep
        From :func:`coarsen.sweep_file.load_sweep`.
    directory : path-like
        The sweep directory (created if missing; its parent must exist).
    client : distributed.Client, optional
        Run on this client (neither ``scheduler`` nor ``workers`` may then be given).
    scheduler : str, optional
        Address (``tcp://host:port``) or scheduler file of a running Dask scheduler. Without
        it (and without ``client``) a LocalCluster is started and shut down here.
    workers : int, optional
        LocalCluster worker processes (default: one per core), one thread each.
    resume : bool, default: False
        Continue the sweep already in ``directory``.
    retries : int, default: 2
        Extra attempts Dask makes for a failing task before it is reported.
    combine : bool, default: True
        Write the combined dataset to ``DIR/combined.nc`` once every task is finished.
    progress : bool, default: False
        Show a progress bar of the tasks on stderr.
    dashboard : bool, default: True
        Serve the Dask dashboard of a LocalCluster (needs bokeh).
    notify : callable, optional
        Receives one-line messages (the dashboard address, resuming, adopted parts).
    after_task : callable, optional
        Called with the part name after each finished task is recorded (in the manifest the
        client holds; the file follows within a second or so).

    Returns
    -------
    SweepReport

    Raises
    ------
    SweepError
        For a directory that holds something else, or a scheduler that cannot be reached.
    SweepFailed
        If tasks failed after their retries (the finished ones are recorded).
    """
    notify = notify or (lambda message: None)
    directory = Path(directory).resolve()
    if client is not None and (scheduler is not None or workers is not None):
        raise ValueError("client: give either a client or scheduler/workers, not both")
    if scheduler is not None and workers is not None:
        raise SweepError("--workers: applies to the embedded LocalCluster only; the workers "
                         "of a scheduler are started with it (dask worker)", key="workers")
    if workers is not None and (not isinstance(workers, int) or workers < 1):
        raise SweepError(f"--workers: {workers!r} is not a whole number >= 1", key="workers")
    if not isinstance(retries, int) or retries < 0:
        raise SweepError(f"--retries: {retries!r} is not a whole number >= 0", key="retries")
    manifest = _prepare(sweep, directory, resume, notify)
    pending = _pending(sweep, manifest, directory, notify)
    reused = len(sweep.tasks) - len(pending)
    if reused and resume:
        notify(f"resuming: {reused} of {len(sweep.tasks)} tasks already finished")
    link = None
    start = time.perf_counter()
    if pending:
        with contextlib.ExitStack() as stack:
            if client is None:
                client = stack.enter_context(
                    _client(scheduler, workers or default_workers(), dashboard))
            link = _dashboard(client)
            notify(f"dashboard at {link}" if link else
                   "no dashboard (the Dask dashboard needs bokeh >= 3.1)")
            _run_tasks(client, pending, manifest, directory, len(sweep.tasks), retries,
                       progress, after_task)
    seconds = time.perf_counter() - start
    if manifest["failed"]:
        raise SweepFailed(manifest["failed"], len(sweep.tasks), directory)
    combined = None
    if combine:
        from coarsen.dataset import write_dataset

        ds = open_sweep(directory)
        try:
            combined = write_dataset(ds, directory / COMBINED)
        finally:
            ds.close()
    return SweepReport(tasks=len(sweep.tasks), ran=len(pending), reused=reused,
                       points=len(sweep.points), seconds=seconds, combined=combined,
                       dashboard=link)


def _task_key(task, directory: Path) -> str:
    # unique per sweep directory and spec text: identical keys would be computed only once
    import hashlib

    where = hashlib.sha256(f"{directory}\0{task.spec_text}".encode()).hexdigest()[:16]
    return f"coarsen-part-p{task.point}-b{task.batch}-{where}"


def _run_tasks(client, pending, manifest, directory: Path, total: int, retries: int,
               progress: bool, after_task) -> None:
    from distributed import as_completed

    from coarsen._progress import progress_bar

    parts = directory / PARTS
    futures = {}
    for task in pending:
        manifest["failed"].pop(task.part, None)
        future = client.submit(run_part, task.spec_text, str(parts / task.part),
                               key=_task_key(task, directory), retries=retries, pure=False)
        futures[future] = task
    bar = progress_bar(progress, total=total, initial=total - len(pending),
                       description="sweep", unit="task")
    recorder = _ManifestRecorder(manifest, directory)
    try:
        with bar:
            for future in as_completed(futures):
                task = futures[future]
                if future.status == "finished":
                    info = future.result()
                    if not (parts / task.part).is_file():
                        manifest["failed"][task.part] = (
                            f"the part was written by {info['worker']} but is not visible "
                            f"here: {str(directory)!r} must be on a filesystem the workers "
                            "and the client share")
                    else:
                        manifest["finished"][task.part] = {
                            "worker": info["worker"], "seconds": round(info["seconds"], 3),
                            "finished": _now()}
                else:
                    error = future.exception() if future.status == "error" else None
                    text = (" ".join(f"{type(error).__name__}: {error}".split())
                            if error is not None else future.status)
                    manifest["failed"][task.part] = text
                recorder.changed()
                bar.update(1)
                if after_task is not None and task.part in manifest["finished"]:
                    after_task(task.part)
                future.release()
    except BaseException:
        for future in futures:
            future.cancel()
        with contextlib.suppress(OSError):  # keep what finished; the error is the one raised
            recorder.write()
        raise
    recorder.write()
