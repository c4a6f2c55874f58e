"""Protocols through the whole stack: field schedules and ramp scans (a ``ramp_time`` dimension)."""

from __future__ import annotations

import math
import signal

import numpy as np
import pytest

from coarsen.dataset import open_dataset
from coarsen.engine import advance, make_streams
from coarsen.lattice import Lattice
from coarsen.simulate import RunInterrupted, run_spec, simulate
from coarsen.spec import parse_spec
from tests.specs import spec_text as _spec_text
from tests.test_simulate import _assert_same_data


# ------------------------------------------------------------------------------------------
# the field
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("update", ["random", "checkerboard"])
def test_field_per_sweep_equals_one_call_per_sweep(update):
    """A field given per sweep is the same dynamics as calls of one sweep each (bit for bit)."""
    lattice = Lattice("square", (16, 16))
    fields = np.linspace(0.8, -0.8, 12)
    spins = np.ones((2, 16, 16), dtype=np.int8)
    streams = make_streams(5, 2, lattice, update=update)
    one_by_one, streams_one = spins.copy(), streams.copy()
    advance(spins, streams, lattice, fields.size, 1.5, update=update, h=fields)
    for h in fields:
        advance(one_by_one, streams_one, lattice, 1, 1.5, update=update, h=float(h))
    assert np.array_equal(spins, one_by_one) and np.array_equal(streams, streams_one)


def test_field_table_value_gives_the_run_of_model_h():
    base = _spec_text(temperature="value = 1.5", replicas=2)
    with_model = parse_spec(base.replace("[dynamics]", "[model]\nh = 0.3\n\n[dynamics]"))
    with_table = parse_spec(base + "\n[field]\nvalue = 0.3\n")
    a, b = simulate(with_model).dataset, simulate(with_table).dataset
    for name in ("energy", "magnetization", "field", "length"):
        assert np.array_equal(a[name].values, b[name].values, equal_nan=True), name
    assert a.attrs["h"] == b.attrs["h"] == 0.3


def _chain_magnetization(T: float, h: float, J: float = 1.0) -> float:
    """Equilibrium magnetization per site of the infinite Ising chain in a field: m =
    sinh(h/T) / sqrt(sinh(h/T)**2 + exp(-4 J/T)) (the transfer-matrix solution, Ising 1925;
    e.g. Baxter, Exactly Solved Models in Statistical Mechanics (1982), ch. 2; recalled from
    memory)."""
    s = math.sinh(h / T)
    return s / math.sqrt(s * s + math.exp(-4.0 * J / T))


def test_field_schedule_drives_the_chain_to_its_exact_magnetization():
    """A field switched on at t = 50 by a [field] points schedule: before it m ~ 0, after it the
    chain relaxes to the exact m(h, T); the error is the replica scatter of time averages."""
    T, h = 1.0, 0.15
    text = _spec_text(kind="chain", size=(4096,), temperature=f"value = {T}",
                      times='times = { start = 0, stop = 600, count = 31, spacing = "linear" }',
                      snapshots=0, replicas=8, seed=41)
    spec = parse_spec(text + f"\n[field]\npoints = [[0, 0.0], [50, 0.0], [50, {h}]]\n")
    ds = simulate(spec).dataset
    field = ds["field"].values
    times = ds["time"].values
    assert np.all(field[times < 50] == 0.0) and np.all(field[times >= 50] == h)
    m = ds["magnetization"].values
    late = m[:, times >= 200].mean(axis=1)
    mean, error = late.mean(), late.std(ddof=1) / math.sqrt(late.size)
    exact = _chain_magnetization(T, h)
    assert abs(mean - exact) < 4 * error, (mean, error, exact)
    early = m[:, (times >= 20) & (times < 50)].mean(axis=1)
    assert abs(early.mean()) < 4 * early.std(ddof=1) / math.sqrt(early.size) + 0.01


# ------------------------------------------------------------------------------------------
# ramp scans
# ------------------------------------------------------------------------------------------
def _scan_text(durations="[16, 64]", hold=80):
    return _spec_text(size=(16, 16), update="checkerboard", replicas=3, snapshots=2,
                      temperature=f"ramp = {{ start = 1.5, stop = 0.5, duration = {durations}, "
                                  f"hold = {hold}, relative = true }}",
                      times='times = { start = 0, stop = 96, count = 7, spacing = "linear" }')


def test_ramp_scan_stacks_one_run_per_duration():
    spec = parse_spec(_scan_text())
    ds = simulate(spec).dataset
    assert ds["ramp_time"].values.tolist() == [16.0, 64.0]
    assert ds["ramp_time"].attrs["units"] == "sweeps"
    assert ds["energy"].dims == ("ramp_time", "replica", "time")
    assert ds["temperature"].dims == ("ramp_time", "time")
    # linear from 1.5 Tc to 0.5 Tc: Tc is passed halfway through each ramp
    assert np.allclose(ds["crossing_time"].values, [8.0, 32.0])
    for index in range(2):
        alone = simulate(spec.variant(index)).dataset
        for name in ("energy", "magnetization", "temperature", "length", "correlation",
                     "snapshot"):
            assert np.array_equal(ds[name].isel(ramp_time=index).values, alone[name].values,
                                  equal_nan=True), name
    assert ds.attrs["seed"] == spec.seed and ds.attrs["spec"] == spec.text


def test_ramp_scan_resumes_after_an_interruption_in_a_later_duration(tmp_path):
    spec = parse_spec(_scan_text())
    whole = run_spec(spec, tmp_path / "whole.nc").dataset
    out = tmp_path / "cut.nc"
    calls = []

    def interrupt(clock):
        calls.append(clock)
        if len(calls) > 1 and clock >= 50 and (tmp_path / "cut.nc.ramp-0.part").exists():
            signal.raise_signal(signal.SIGINT)

    with pytest.raises(RunInterrupted):
        run_spec(spec, out, after_call=interrupt, checkpoint_every=1e9)
    assert (tmp_path / "cut.nc.ramp-0.part").is_file() and not out.exists()
    messages = []
    resumed = run_spec(spec, out, resume=True, notify=messages.append)
    assert any("reusing" in m for m in messages) and any("resuming" in m for m in messages)
    assert not list(tmp_path.glob("cut.nc.ramp-*"))
    _assert_same_data(whole, open_dataset(out))
    _assert_same_data(whole, resumed.dataset)


def test_ramp_scan_refuses_a_checkpoint_in_simulate(tmp_path):
    with pytest.raises(ValueError, match="run_spec"):
        simulate(parse_spec(_scan_text()), checkpoint=tmp_path / "c")
