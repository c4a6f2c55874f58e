"""Rejection-free updates through the whole run: checkpoint and resume, threads, protocols.

The kernel keeps nothing between sweeps but the spins and the stream (every sweep draws its
waiting time afresh, exact by the memorylessness of the exponential distribution), so a run
cut anywhere and resumed from its checkpoint must give the uninterrupted dataset bit for
bit, whatever the thread count.
"""

from __future__ import annotations

import signal

import numba
import pytest
import xarray as xr

from coarsen.simulate import RunInterrupted, run_spec, simulate
from coarsen.spec import parse_spec


def _text(rule):
    return f"""
[lattice]
kind = "square"
size = [20, 16]
[dynamics]
rule = "{rule}"
update = "rejection-free"
[temperature]
points = [[0, 3.0], [20, 1.0]]
[initial]
state = "random"
[measure]
times = {{ start = 0, stop = 40, count = 9, spacing = "linear" }}
snapshots = 3
[ensemble]
replicas = 3
seed = 404
"""


@pytest.mark.parametrize("rule", ["glauber", "kawasaki"])
def test_interrupted_and_resumed_run_equals_uninterrupted(tmp_path, rule):
    spec = parse_spec(_text(rule))
    whole = run_spec(spec, tmp_path / "whole.nc").dataset

    def interrupt(clock):
        if clock >= 17:
            signal.raise_signal(signal.SIGINT)

    out = tmp_path / "cut.nc"
    with pytest.raises(RunInterrupted) as stop:
        run_spec(spec, out, after_call=interrupt)
    assert 17 <= stop.value.clock < 40
    resumed = run_spec(spec, out, resume=True)
    assert resumed.resumed_at == stop.value.clock
    for name in ("energy", "magnetization", "snapshot", "length", "accepted_moves"):
        xr.testing.assert_identical(whole[name], resumed.dataset[name])
    assert int(whole["accepted_moves"].min()) > 50


def test_thread_count_does_not_change_the_dataset():
    spec = parse_spec(_text("glauber"))
    runs = [simulate(spec, threads=t).dataset for t in (1, numba.config.NUMBA_NUM_THREADS)]
    for name in ("energy", "snapshot", "accepted_moves"):
        xr.testing.assert_identical(runs[0][name], runs[1][name])


def test_prepared_bench_states_have_the_asked_domain_size():
    """The bench's prepared states: a Gaussian-smoothed field of width sigma crosses zero
    along a line a mean distance pi sqrt(2) sigma apart (Rice, Bell Syst. Tech. J. 24, 46
    (1945), zero crossings of a Gaussian process with correlation exp(-r^2 / 4 sigma^2)),
    so the wall spacing along x must match L within 5 standard errors over 8 replicas."""
    import numpy as np

    from coarsen.bench import prepared_domains, wall_spacing

    for length in (16, 32):
        spins = prepared_domains(np.random.default_rng(length), 8, (512, 512), length)
        spacing = np.array([wall_spacing(s) for s in spins])
        error = spacing.std(ddof=1) / np.sqrt(len(spacing))
        print(f"[prepared] L = {length}: spacing {spacing.mean():.2f} +- {error:.2f}")
        assert abs(spacing.mean() - length) < 5 * error
        assert abs(np.mean(spins)) < 0.2
