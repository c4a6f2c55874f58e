"""Resource limits (slow): peak memory of a 4096**2 Glauber run, and a soak run that stays flat.

Both run ``coarsen run`` as a child process, so the figures are that process's own:
``ru_maxrss`` (peak resident set) from ``getrusage`` and ``VmRSS`` from ``/proc``. The
baseline is a child that imports the same modules and loads the kernels (a 3x3 run), so the
difference is what the lattice costs.

Bounds checked: the peak above the baseline stays below the issue's bound,
:func:`coarsen.resources.peak_memory_bound` (3x the int8 spins plus the single-precision
transform buffers of one replica, a float32 field and its complex64 half spectrum: about
11 bytes a site), and below :func:`coarsen.resources.run_memory_estimate`, the looser
estimate the spec check refuses too-large lattices with.

Costs on the project's 2-core machine: the peak test about a minute; the soak at least
10 minutes (``SOAK_SECONDS``).
"""

from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path

import pytest

from coarsen.resources import format_bytes, peak_memory_bound, run_memory_estimate

SPEC = """\
[lattice]
kind = "square"
size = [{L}, {L}]
[dynamics]
rule = "glauber"
[temperature]
relative = 0.5
[measure]
times = {times}
snapshots = {snapshots}
[ensemble]
replicas = {replicas}
seed = 5
"""

_CHILD = ("import resource, sys; from coarsen.cli import main; "
          "status = main(sys.argv[1:]); "
          "print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024); "
          "sys.exit(status)")

SOAK_SECONDS = 600


def _peak_bytes(folder: Path, name: str, **values) -> int:
    spec = folder / f"{name}.toml"
    spec.write_text(SPEC.format(**values), encoding="utf-8")
    done = subprocess.run([sys.executable, "-c", _CHILD, "run", str(spec), "-o",
                           str(folder / f"{name}.nc"), "--quiet"],
                          capture_output=True, text=True, timeout=3600)
    assert done.returncode == 0, done.stderr
    return int(done.stdout.split()[-1])


@pytest.mark.slow
def test_peak_memory_of_a_4096_squared_run(tmp_path):
    L, replicas, snapshots = 4096, 1, 1
    baseline = _peak_bytes(tmp_path, "baseline", L=3, times="[0, 1]", snapshots=0,
                           replicas=1)
    peak = _peak_bytes(tmp_path, "large", L=L, times="[0, 1, 2, 4]", snapshots=snapshots,
                       replicas=replicas)
    n = L * L
    above = peak - baseline
    estimate = run_memory_estimate(n, replicas, snapshots)
    bound = peak_memory_bound((L, L), replicas)
    print(f"4096^2 Glauber, {replicas} replica, {snapshots} snapshot: peak RSS "
          f"{format_bytes(peak)}, baseline {format_bytes(baseline)}, above baseline "
          f"{format_bytes(above)} = {above / n:.1f} bytes/site; bound "
          f"{format_bytes(bound)} = {bound / n:.1f} bytes/site; estimate "
          f"{format_bytes(estimate)}")
    assert above < bound
    assert above < estimate


def _rss_bytes(pid: int) -> int | None:
    try:
        with open(f"/proc/{pid}/status", encoding="ascii") as handle:
            for line in handle:
                if line.startswith("VmRSS:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        return None
    return None


@pytest.mark.slow
@pytest.mark.skipif(not Path("/proc/self/status").exists(), reason="needs /proc")
def test_memory_stays_flat_over_a_long_run(tmp_path):
    """A 512**2 run with a measurement every 2 sweeps and a checkpoint every second for at
    least SOAK_SECONDS: the resident memory of the second half grows by less than 5% of the
    first half's peak (no leak per measurement or per checkpoint)."""
    spec = tmp_path / "soak.toml"
    spec.write_text(SPEC.format(L=512, times="{ start = 0, stop = 40000, count = 20001, "
                                "spacing = \"linear\" }", snapshots=2, replicas=4),
                    encoding="utf-8")
    process = subprocess.Popen([sys.executable, "-m", "coarsen.cli", "run", str(spec), "-o",
                                str(tmp_path / "soak.nc"), "--quiet", "--checkpoint-every",
                                "1"], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    samples = []
    start = time.monotonic()
    try:
        while time.monotonic() - start < SOAK_SECONDS and process.poll() is None:
            rss = _rss_bytes(process.pid)
            if rss is not None:
                samples.append((time.monotonic() - start, rss))
            time.sleep(2.0)
        still_running = process.poll() is None
    finally:
        process.kill()
        process.wait(timeout=60)
        process.stderr.close()
    assert still_running, "the soak run finished early; make it longer"
    first = [rss for t, rss in samples if SOAK_SECONDS * 0.1 < t < SOAK_SECONDS / 2]
    second = [rss for t, rss in samples if t >= SOAK_SECONDS / 2]
    print(f"soak {SOAK_SECONDS} s: RSS first half max {format_bytes(max(first))}, second "
          f"half max {format_bytes(max(second))}, {len(samples)} samples")
    assert max(second) < 1.05 * max(first)
