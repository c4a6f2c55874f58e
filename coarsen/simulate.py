"""One spec in, one dataset out: build the replicas, advance them, measure, checkpoint.

The run advances every replica to each measurement time of the spec, measures the
configurations there (:func:`coarsen.observables.measure`), keeps the snapshots the spec asks
for, and finally assembles the dataset (:mod:`coarsen.dataset`). With a checkpoint path it
saves its whole state at least every ``checkpoint_every`` seconds and on Ctrl-C, and
``resume=True`` continues from that file. Because the dynamics depends only on the spins, the
stream states and the clock, and the kernels give the same bits however a run is cut into
calls, a resumed run produces the same dataset, bit for bit, as an uninterrupted one, and so
does a run with a different number of threads.
"""

from __future__ import annotations

import json
import signal
import threading
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np
import xarray as xr

from coarsen.checkpoint import RunState, read_checkpoint, remove_stale_temporaries, write_checkpoint
from coarsen.dataset import build_dataset, write_dataset
from coarsen.engine import advance, make_streams
from coarsen.equilibrium import equilibrium_energy
from coarsen.initial import initial_spins
from coarsen.observables import MeasurementGrid, measure, seed_area
from coarsen.observables.interfaces import cut_coordinates, default_cuts, interface_positions
from coarsen.schedule import crossing_time
from coarsen.seeded import SEEDED_PARAMETERS, seed_sites
from coarsen.series import MeasurementSeries

__all__ = ["RunInterrupted", "RunResult", "run_spec", "simulate"]

#: Attempted moves per advance call, so that checkpoints, Ctrl-C and the progress bar
#: respond within about a second at the engine's speed.
_ATTEMPTS_PER_CALL = 2e8


class RunInterrupted(Exception):
    """The run was interrupted (Ctrl-C); its state was saved to ``checkpoint``.

    Attributes
    ----------
    checkpoint : pathlib.Path
        Where the state was written.
    clock : int
        Sweeps done when it stopped.
    """

    def __init__(self, checkpoint: Path, clock: int):
        super().__init__(f"interrupted at sweep {clock}; state saved to {str(checkpoint)!r}")
        self.checkpoint = Path(checkpoint)
        self.clock = clock


@dataclass(frozen=True)
class RunResult:
    """A finished run: its dataset and where the time went.

    Attributes
    ----------
    dataset : xarray.Dataset
    dynamics_seconds, measuring_seconds, checkpoint_seconds : float
        Wall time spent advancing, measuring and writing checkpoints in this process.
    resumed_at : int or None
        The sweep a resumed run continued from.
    """

    dataset: xr.Dataset
    dynamics_seconds: float
    measuring_seconds: float
    checkpoint_seconds: float
    resumed_at: int | None


class _InterruptFlag:
    """Turns SIGINT into a flag checked between engine calls (main thread only)."""

    def __init__(self, active: bool):
        self.active = active and threading.current_thread() is threading.main_thread()
        self.raised = False
        self._previous = None

    def __enter__(self):
        if self.active:
            self._previous = signal.signal(signal.SIGINT, self._handle)
        return self

    def _handle(self, signum, frame):
        self.raised = True

    def __exit__(self, *exc):
        if self.active:
            signal.signal(signal.SIGINT, self._previous)
        return False


def _fresh_state(spec, lattice, grid: MeasurementGrid) -> RunState:
    replicas = spec.replicas
    spins = initial_spins(spec.initial, lattice, replicas, spec.seed, rule=spec.rule,
                          order=spec.order)
    streams = make_streams(spec.seed, replicas, lattice, spec.rule, spec.update)
    series = MeasurementSeries(replicas, len(spec.times), len(grid.k), len(grid.r),
                               seeded=_seed_region(spec) is not None, cuts=len(_cuts(spec)))
    snapshots = np.zeros((len(spec.snapshot_times), replicas, *lattice.shape), dtype=np.int8)
    return RunState(clock=0, next_index=0, spins=spins, streams=streams, series=series,
                    snapshots=snapshots, moves=np.zeros(replicas, dtype=np.int64))


def _cuts(spec):
    """The interface cuts of a run: the spec's, or the seeded state's defaults, or none."""
    if spec.cuts:
        return spec.cuts
    return default_cuts(spec.initial.state, spec.lattice, spec.initial.parameter_dict())


def _seed_region(spec):
    """The sites of a seeded initial state (before any staggering), or None."""
    state = spec.initial.state
    if state not in SEEDED_PARAMETERS or state == "file":
        return None
    return seed_sites(state, spec.lattice, spec.initial.parameter_dict())


def _check_resumed(state: RunState, spec, lattice) -> None:
    expected = (spec.replicas, *lattice.shape)
    if state.spins.shape != expected or state.next_index > len(spec.times):
        raise ValueError("checkpoint: its arrays do not match the spec; delete it to start afresh")


def _reference_energy(spec, temperature: float, field: float):
    if spec.equilibrium_energy is not None:
        return spec.equilibrium_energy
    return equilibrium_energy(spec.lattice.kind, temperature, spec.J, field)


def simulate(spec, *, threads: int | None = None, checkpoint=None,
             checkpoint_every: float = 60.0, resume: bool = False, progress: bool = False,
             notify: Callable[[str], None] | None = None,
             after_call: Callable[[int], None] | None = None) -> RunResult:
    """Run a spec and return its dataset.

    Parameters
    ----------
    spec : coarsen.spec.Spec
        What to run.
    threads : int, optional
        Numba threads for the dynamics (default: Numba's current setting). The result does
        not depend on it.
    checkpoint : path-like, optional
        Where to keep the run's state. Without it, no checkpoint is written and Ctrl-C
        raises ``KeyboardInterrupt`` as usual.
    checkpoint_every : float, default: 60.0
        Seconds between checkpoints (> 0).
    resume : bool, default: False
        Continue from ``checkpoint`` if it exists (a missing checkpoint starts afresh, and
        ``notify`` says so).
    progress : bool, default: False
        Show a progress bar on stderr.
    notify : callable, optional
        Receives one-line messages for the user (resuming, starting afresh).
    after_call : callable, optional
        Called with the clock after every engine call (tests use it to interrupt a run).

    Returns
    -------
    RunResult

    Raises
    ------
    RunInterrupted
        On Ctrl-C (SIGINT) with a checkpoint path: the state was saved first.
    ValueError
        For a checkpoint that belongs to another spec, or bad arguments.
    """
    import numba

    from coarsen._progress import progress_bar

    if not (isinstance(checkpoint_every, (int, float)) and checkpoint_every > 0):
        raise ValueError(f"checkpoint_every: {checkpoint_every!r} is not a number of seconds > 0")
    if spec.is_ramp_scan:
        if checkpoint is not None:
            raise ValueError("checkpoint: a ramp scan checkpoints each duration apart; run it "
                             "with run_spec (coarsen run)")
        from coarsen.ramp_scan import combine_ramp_datasets

        results = [simulate(spec.variant(i), threads=threads, progress=progress,
                            notify=notify, after_call=after_call)
                   for i in range(len(spec.ramp_times))]
        return RunResult(
            dataset=combine_ramp_datasets(spec, [r.dataset for r in results]),
            dynamics_seconds=sum(r.dynamics_seconds for r in results),
            measuring_seconds=sum(r.measuring_seconds for r in results),
            checkpoint_seconds=0.0, resumed_at=None)
    notify = notify or (lambda message: None)
    lattice = spec.lattice
    grid = MeasurementGrid(lattice)
    checkpoint = None if checkpoint is None else Path(checkpoint)
    resumed_at = None
    state = None
    if checkpoint is not None:
        remove_stale_temporaries(checkpoint)
        if resume and checkpoint.is_file():
            state = read_checkpoint(checkpoint, spec.text)
            _check_resumed(state, spec, lattice)
            resumed_at = state.clock
            notify(f"resuming from {str(checkpoint)!r} at sweep {state.clock}")
        elif resume:
            notify(f"no checkpoint at {str(checkpoint)!r}; starting afresh")
        elif checkpoint.is_file():
            notify(f"starting afresh; the checkpoint {str(checkpoint)!r} will be replaced "
                   "(use --resume to continue it)")
    if state is None:
        state = _fresh_state(spec, lattice, grid)

    previous_threads = numba.get_num_threads()
    if threads is not None:
        numba.set_num_threads(int(threads))
    timing = {"dynamics": 0.0, "measuring": 0.0, "checkpoint": 0.0}
    sweeps_per_call = max(1, int(_ATTEMPTS_PER_CALL // (spec.replicas * lattice.n_sites)))
    snapshot_slot = {t: i for i, t in enumerate(spec.snapshot_times)}
    seed = _seed_region(spec)
    cuts = _cuts(spec)
    staggering = lattice.staggering if spec.order == "neel" else None
    times = spec.times
    bar = progress_bar(progress, total=spec.final_time, initial=state.clock,
                       description=f"{lattice.kind} {spec.rule}")

    def save():
        start = time.perf_counter()
        write_checkpoint(state, checkpoint, spec.text)
        timing["checkpoint"] += time.perf_counter() - start

    try:
        with _InterruptFlag(checkpoint is not None) as interrupt, bar:
            last_save = time.monotonic()
            while state.next_index < len(times):
                target = times[state.next_index]
                while state.clock < target:
                    n = min(target - state.clock, sweeps_per_call)
                    temperatures = spec.temperature.sweep_values(state.clock, state.clock + n)
                    if np.all(temperatures == temperatures[0]):
                        temperatures = float(temperatures[0])
                    fields = spec.field.sweep_values(state.clock, state.clock + n)
                    if np.all(fields == fields[0]):
                        fields = float(fields[0])
                    start = time.perf_counter()
                    state.moves += advance(state.spins, state.streams, lattice, n, temperatures,
                                           rule=spec.rule, acceptance=spec.acceptance,
                                           update=spec.update, J=spec.J, h=fields)
                    timing["dynamics"] += time.perf_counter() - start
                    state.clock += n
                    bar.update(n)
                    if after_call is not None:
                        after_call(state.clock)
                    if interrupt.raised:
                        save()
                        raise RunInterrupted(checkpoint, state.clock)
                    if checkpoint is not None and time.monotonic() - last_save >= checkpoint_every:
                        save()
                        last_save = time.monotonic()
                start = time.perf_counter()
                temperature = float(spec.temperature.at([target])[0])
                field_now = float(spec.field.at([target])[0])
                measured = measure(state.spins, lattice, grid, temperature=temperature,
                                   J=spec.J, h=field_now, order=spec.order, threads=threads,
                                   equilibrium_energy=_reference_energy(spec, temperature,
                                                                        field_now))
                state.series.store(state.next_index, measured)
                if seed is not None:
                    field = state.spins if staggering is None else state.spins * staggering
                    state.series.arrays["seed_area"][:, state.next_index] = seed_area(
                        field, lattice, seed, threads=threads)
                if cuts:
                    order_field = (state.spins if staggering is None
                                   else state.spins * staggering)
                    state.series.arrays["interface_position"][:, :, state.next_index] = (
                        interface_positions(order_field, lattice, cuts, spec.cut_width))
                if target in snapshot_slot:
                    state.snapshots[snapshot_slot[target]] = state.spins
                timing["measuring"] += time.perf_counter() - start
                state.next_index += 1
    finally:
        numba.set_num_threads(previous_threads)

    dataset = _dataset(spec, grid, state)
    return RunResult(dataset=dataset, dynamics_seconds=timing["dynamics"],
                     measuring_seconds=timing["measuring"],
                     checkpoint_seconds=timing["checkpoint"], resumed_at=resumed_at)


def _dataset(spec, grid: MeasurementGrid, state: RunState) -> xr.Dataset:
    lattice = spec.lattice
    times = np.asarray(spec.times, dtype=np.float64)
    arrays = dict(state.series.arrays)
    arrays["temperature"] = spec.temperature.at(times)
    arrays["field"] = spec.field.at(times)
    attrs = {
        "spec": spec.text,
        "seed": int(spec.seed) if spec.seed < 2**63 else str(spec.seed),
        "lattice": lattice.describe(),
        "lattice_kind": lattice.kind,
        "boundary": lattice.boundary,
        "size": np.asarray(lattice.size, dtype=np.int64),
        "rule": spec.rule,
        "acceptance": spec.acceptance,
        "update": spec.update,
        "order": spec.order,
        "J": float(spec.J),
        "tc": float(lattice.tc),
        "replicas": int(spec.replicas),
        "initial_state": spec.initial.state,
    }
    crossing = crossing_time(spec.temperature, lattice.tc * abs(spec.J))
    if crossing is not None and lattice.tc > 0:
        attrs["crossing_time"] = crossing
    if len(spec.field.points) == 1:
        attrs["h"] = float(spec.field.points[0][1])
    if spec.initial.parameters:
        attrs["initial_parameters"] = json.dumps(spec.initial.parameter_dict())
    if spec.source is not None:
        attrs["spec_file"] = str(spec.source)
    if spec.equilibrium_energy is not None:
        attrs["equilibrium_energy"] = float(spec.equilibrium_energy)
    cuts = _cuts(spec)
    if cuts:
        attrs["cut_width"] = int(spec.cut_width)
    extra = {"accepted_moves": (("replica",), state.moves, "1",
                                "accepted moves per replica over the whole run")}
    return build_dataset(arrays, times=times, k=grid.k, r=grid.r, attrs=attrs,
                         snapshots=state.snapshots, snapshot_times=spec.snapshot_times,
                         extra_variables=extra,
                         extra_coords=cut_coordinates(cuts) if cuts else None)


def _same_file(a: Path, b: Path) -> bool:
    if a.exists() and b.exists():
        return a.samefile(b)
    return a.resolve() == b.resolve()


def _check_not_an_input(spec, output: Path) -> None:
    """The output, and the checkpoint beside it, must not be a file the run reads."""
    inputs = []
    if spec.source is not None:
        inputs.append(("spec file", Path(spec.source)))
    if spec.initial.state == "file":
        inputs.append(("start file (initial.path)", Path(spec.initial.parameter_dict()["path"])))
    checkpoint = output.with_name(output.name + ".checkpoint")
    for what, path in inputs:
        for written in (output, checkpoint):
            if _same_file(written, path):
                which = "its checkpoint " if written is checkpoint else ""
                raise ValueError(f"output {str(output)!r}: {which}is the input {what} "
                                 f"{str(path)!r}; write the dataset to a file of its own")


def run_spec(spec, output, *, threads: int | None = None, resume: bool = False,
             checkpoint_every: float = 60.0, progress: bool = False,
             notify: Callable[[str], None] | None = None, after_call=None) -> RunResult:
    """Run ``spec`` and write its dataset to ``output`` atomically.

    The checkpoint lives beside the output as ``<output>.checkpoint`` and is removed once the
    dataset is written. Parameters are those of :func:`simulate`.

    Raises
    ------
    ValueError
        If the output directory does not exist (checked before the run starts).
    """
    output = Path(output)
    if not output.parent.is_dir():
        raise ValueError(f"output {str(output)!r}: the directory {str(output.parent)!r} "
                         "does not exist")
    _check_not_an_input(spec, output)
    # a run killed while writing its dataset leaves a temporary beside it
    remove_stale_temporaries(output)
    if spec.is_ramp_scan:
        from coarsen.ramp_scan import run_ramp_scan

        return run_ramp_scan(spec, output, threads=threads, resume=resume,
                             checkpoint_every=checkpoint_every, progress=progress,
                             notify=notify, after_call=after_call)
    checkpoint = output.with_name(output.name + ".checkpoint")
    result = simulate(spec, threads=threads, checkpoint=checkpoint,
                      checkpoint_every=checkpoint_every, resume=resume, progress=progress,
                      notify=notify, after_call=after_call)
    write_dataset(result.dataset, output)
    checkpoint.unlink(missing_ok=True)
    return result
