"""``coarsen run``: equilibrium against exact results, determinism, checkpoints and resume."""

from __future__ import annotations

import signal

import numpy as np
import pytest
import xarray as xr

from coarsen.cli import main
from coarsen.dataset import open_dataset
from coarsen.simulate import RunInterrupted, run_spec, simulate
from coarsen.spec import parse_spec
from tests.specs import spec_text as _spec_text
from tests.validation import _exact
from tests.validation._equilibrium import check_mean

SQUARE_TC = 2.0 / np.log(1.0 + np.sqrt(2.0))


def _assert_same_data(a: xr.Dataset, b: xr.Dataset) -> None:
    """Every variable and coordinate bitwise equal (NaN equal to NaN), attrs equal except
    the creation time."""
    assert set(a.variables) == set(b.variables)
    for name in a.variables:
        x, y = a[name].values, b[name].values
        assert x.dtype == y.dtype, name
        if x.dtype.kind == "f":
            assert np.array_equal(x, y, equal_nan=True), name
            assert np.array_equal(x.view(np.uint64) if x.itemsize == 8 else x,
                                  y.view(np.uint64) if y.itemsize == 8 else y), name
        else:
            assert np.array_equal(x, y), name
    skip = {"created"}
    assert {k: str(v) for k, v in a.attrs.items() if k not in skip} == \
        {k: str(v) for k, v in b.attrs.items() if k not in skip}


# ------------------------------------------------------------------------------------------
# equilibrium through the whole stack (spec -> run -> dataset)
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("T, seed", [(2.0, 31), (2.5, 32)])
def test_run_from_ordered_state_matches_kaufman_and_yang(tmp_path, T, seed):
    """`coarsen run` from the all-up state of the 32 x 32 torus: the mean energy per site
    within 5 standard errors of Kaufman's exact finite-lattice value (Kaufman 1949), and at
    T = 2.0 < Tc the mean |m| within 5 standard errors of Yang's spontaneous magnetization
    (Yang 1952; finite-size corrections exp(-L/xi) with xi(2.0) = 2.19 are far below the
    error, see tests/validation/test_equilibrium.py). The first 1000 sweeps are dropped
    (tau_E is tens of sweeps at these temperatures); errors from blocks of 20 tau."""
    spec = tmp_path / "eq.toml"
    spec.write_text(_spec_text(size=(32, 32), temperature=f"value = {T}",
                               initial='state = "up"', snapshots=0, replicas=16, seed=seed,
                               times="times = { start = 1000, stop = 6000, count = 501, "
                                     'spacing = "linear" }'))
    out = tmp_path / "eq.nc"
    assert main(["run", str(spec), "-o", str(out), "--quiet"]) == 0
    ds = open_dataset(out)
    assert ds.sizes["time"] == 501 and ds.sizes["replica"] == 16
    assert np.all(ds["temperature"].values == T)
    energy = ds["energy"].values
    check_mean(energy, _exact.kaufman_energy(32, T), f"run 32x32 T={T} <e> vs Kaufman")
    if T < SQUARE_TC:
        m = np.abs(ds["magnetization"].values)
        check_mean(m, _exact.yang_magnetization(T), f"run 32x32 T={T} <|m|> vs Yang")


# ------------------------------------------------------------------------------------------
# determinism
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("update, replicas", [("random", 3), ("checkerboard", 3),
                                              ("checkerboard", 1)])
def test_threads_do_not_change_the_dataset(tmp_path, update, replicas):
    spec = tmp_path / "s.toml"
    spec.write_text(_spec_text(size=(24, 16), update=update, replicas=replicas))
    paths = []
    for threads in (1, 2):
        out = tmp_path / f"t{threads}.nc"
        assert main(["run", str(spec), "-o", str(out), "--threads", str(threads),
                     "--quiet"]) == 0
        paths.append(out)
    a, b = (open_dataset(p) for p in paths)
    _assert_same_data(a, b)
    assert a["snapshot"].dtype == np.int8 and a.sizes["snapshot_time"] == 2


def test_different_seeds_differ():
    a = simulate(parse_spec(_spec_text(seed=1))).dataset
    b = simulate(parse_spec(_spec_text(seed=2))).dataset
    assert not np.array_equal(a["energy"].values, b["energy"].values)


@pytest.mark.parametrize("rule, update", [("glauber", "random"), ("glauber", "checkerboard"),
                                          ("kawasaki", "random")])
def test_interrupted_and_resumed_run_equals_uninterrupted(tmp_path, rule, update):
    """Ctrl-C (SIGINT) mid-run writes a checkpoint; --resume continues from it and gives the
    dataset of an uninterrupted run, bit for bit."""
    text = _spec_text(size=(16, 16), rule=rule, update=update,
                      times='times = { start = 0, stop = 40, count = 9, spacing = "linear" }',
                      temperature="points = [[0, 3.0], [20, 1.0]]", snapshots=3)
    spec = parse_spec(text)
    whole = run_spec(spec, tmp_path / "whole.nc").dataset

    out = tmp_path / "cut.nc"

    def interrupt(clock):
        if clock >= 17:
            signal.raise_signal(signal.SIGINT)

    with pytest.raises(RunInterrupted) as stop:
        run_spec(spec, out, after_call=interrupt)
    assert stop.value.clock >= 17
    assert stop.value.checkpoint.is_file() and not out.exists()
    messages = []
    resumed = run_spec(spec, out, resume=True, notify=messages.append)
    assert resumed.resumed_at == stop.value.clock
    assert any("resuming" in m for m in messages)
    assert not stop.value.checkpoint.exists()
    _assert_same_data(whole, open_dataset(out))
    _assert_same_data(whole, resumed.dataset)


def test_periodic_checkpoints_and_resume(tmp_path):
    """A checkpoint written on the timer (every call here) resumes to the same result."""
    spec = parse_spec(_spec_text())
    whole = simulate(spec).dataset
    checkpoint = tmp_path / "run.checkpoint"
    calls = []

    def stop_after_three(clock):
        calls.append(clock)
        if len(calls) == 3:
            raise KeyboardInterrupt  # an abrupt stop: only the timer's checkpoint survives

    with pytest.raises(KeyboardInterrupt):
        simulate(spec, checkpoint=checkpoint, checkpoint_every=1e-9,
                 after_call=stop_after_three)
    assert checkpoint.is_file()
    resumed = simulate(spec, checkpoint=checkpoint, resume=True)
    assert resumed.resumed_at == calls[1]  # saved after the second call, before the third
    _assert_same_data(whole, resumed.dataset)


def test_resume_without_checkpoint_starts_afresh(tmp_path):
    spec = parse_spec(_spec_text())
    messages = []
    result = run_spec(spec, tmp_path / "a.nc", resume=True, notify=messages.append)
    assert result.resumed_at is None
    assert any("starting afresh" in m for m in messages)


def test_temporary_of_a_killed_dataset_write_is_removed(tmp_path):
    """A run killed while writing its dataset leaves ``.out.nc.<random>.tmp``; the next run
    (resumed or not) removes it (found by the SIGKILL trials of test_crash_safety)."""
    stale = tmp_path / ".out.nc.k1ll3d.tmp"
    stale.write_bytes(b"half a NetCDF file")
    other = tmp_path / ".other.nc.k1ll3d.tmp"
    other.write_bytes(b"not ours")
    run_spec(parse_spec(_spec_text(replicas=1, snapshots=0)), tmp_path / "out.nc", resume=True)
    assert not stale.exists() and other.exists()
    assert (tmp_path / "out.nc").is_file()


def test_checkpoint_of_another_spec_is_refused(tmp_path):
    spec = parse_spec(_spec_text(seed=5))
    checkpoint = tmp_path / "x.checkpoint"
    simulate(spec, checkpoint=checkpoint, checkpoint_every=1e-9, after_call=None)
    assert checkpoint.is_file()
    other = parse_spec(_spec_text(seed=6))
    with pytest.raises(ValueError, match="different spec"):
        simulate(other, checkpoint=checkpoint, resume=True)


# ------------------------------------------------------------------------------------------
# contents of a run's dataset
# ------------------------------------------------------------------------------------------
def test_dataset_contents_follow_the_contract():
    spec = parse_spec(_spec_text(temperature="points = [[0, 2.0], [60, 1.0]]"))
    ds = simulate(spec).dataset
    times = ds["time"].values
    assert np.array_equal(times, np.asarray(spec.times, dtype=float))
    assert np.allclose(ds["temperature"].values, 2.0 - times / 60.0)
    assert list(ds["estimator"].values) == ["corr_zero", "corr_half", "sk_moment", "wall"]
    for name in ("energy", "magnetization", "temperature", "field", "structure_factor",
                 "structure_factor_sem", "correlation", "correlation_sem", "length",
                 "domain_count", "largest_domain", "snapshot"):
        assert "units" in ds[name].attrs and "long_name" in ds[name].attrs, name
    assert ds["length"].dims == ("estimator", "replica", "time")
    assert ds["snapshot"].dims == ("snapshot_time", "replica", "x", "y")
    assert ds.sizes["x"] == 16 and ds.sizes["y"] == 16
    for key in ("coarsen_version", "spec", "seed", "created", "lattice", "rule", "tc"):
        assert key in ds.attrs, key
    assert ds.attrs["spec"] == spec.text and ds.attrs["seed"] == 11
    # the energy recorded at the last snapshot equals the energy of that snapshot
    from coarsen import Lattice, energy_per_site
    from coarsen.dataset import engine_layout

    last = engine_layout(ds["snapshot"].values[-1], 2)
    t_last = ds["snapshot_time"].values[-1]
    assert np.array_equal(energy_per_site(last, Lattice("square", (16, 16))),
                          ds["energy"].sel(time=t_last).values)


def test_kawasaki_run_conserves_magnetization_exactly():
    spec = parse_spec(_spec_text(rule="kawasaki", initial='state = "random"\nmagnetization = 0.0'))
    ds = simulate(spec).dataset
    assert np.all(ds["magnetization"].values == 0.0)


# ------------------------------------------------------------------------------------------
# the command line
# ------------------------------------------------------------------------------------------
def test_run_writes_lengths_csv(tmp_path):
    spec = tmp_path / "s.toml"
    spec.write_text(_spec_text())
    out, table = tmp_path / "o.nc", tmp_path / "l.csv"
    assert main(["run", str(spec), "-o", str(out), "--lengths-csv", str(table),
                 "--quiet"]) == 0
    lines = [line for line in table.read_text().splitlines() if not line.startswith("#")]
    assert lines[0] == "time,length,length_err,replicas"
    ds = open_dataset(out)
    expected = ds["length"].sel(estimator="corr_half").mean("replica").values
    got = np.array([float(line.split(",")[1]) for line in lines[1:]])
    assert np.allclose(got, expected[np.isfinite(expected)], rtol=1e-12)


def test_run_reports_bad_input_in_one_line(tmp_path, capsys):
    spec = tmp_path / "bad.toml"
    spec.write_text(_spec_text().replace('rule = "glauber"', 'rule = "glaubr"'))
    assert main(["run", str(spec), "-o", str(tmp_path / "o.nc")]) == 2
    err = capsys.readouterr().err.strip()
    assert "dynamics.rule" in err and "\n" not in err
    assert main(["run", str(tmp_path / "missing.toml"), "-o", str(tmp_path / "o.nc")]) == 2
    assert "missing.toml" in capsys.readouterr().err
    good = tmp_path / "good.toml"
    good.write_text(_spec_text())
    assert main(["run", str(good), "-o", str(tmp_path / "nowhere" / "o.nc")]) == 2
    assert "does not exist" in capsys.readouterr().err
    assert main(["run", str(good), "-o", str(tmp_path / "o.nc"), "--checkpoint-every",
                 "0"]) == 2
    assert not (tmp_path / "o.nc").exists()


def test_run_prints_a_summary_without_a_progress_bar_when_not_a_terminal(tmp_path, capsys):
    spec = tmp_path / "s.toml"
    spec.write_text(_spec_text())
    assert main(["run", str(spec), "-o", str(tmp_path / "o.nc")]) == 0
    captured = capsys.readouterr()
    assert captured.out.startswith("wrote ") and "measurements" in captured.out
    assert captured.err == ""


def test_ramp_run_records_the_protocol_and_its_crossing_of_tc():
    text = _spec_text(temperature="ramp = { start = 1.5, stop = 0.5, duration = 40, "
                                  "relative = true }",
                      times='times = { start = 0, stop = 60, count = 7, spacing = "linear" }')
    ds = simulate(parse_spec(text)).dataset
    assert np.allclose(ds["temperature"].values,
                       SQUARE_TC * np.clip(1.5 - ds["time"].values / 40, 0.5, None))
    assert ds.attrs["crossing_time"] == pytest.approx(20.0)
