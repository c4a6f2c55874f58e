"""Memory of a run, estimated from the spec before anything is allocated.

A run holds the spins of every replica (int8, one byte a site), the kept snapshots, the
measurement grid and, while it measures, per thread one workspace of labels and transforms.
:func:`run_memory_estimate` adds these up from the lattice, the replicas and the snapshots;
:func:`check_run_memory` refuses a spec whose estimate exceeds the memory of this machine
(physical memory, or a cgroup limit where one is set), so a run too large for memory fails
at once with a message naming ``lattice.size`` instead of dying in an allocation, or hours
later in a swap storm.

The bytes per site below were measured on the project's machine (peak resident memory per
step of a 4096**2 Glauber run, from ``VmHWM`` reset before each step) and rounded up; the
estimate is meant to be an upper bound of the peak resident memory above the interpreter's
own (about 260 MB with the kernels loaded). :func:`peak_memory_bound` is the tighter bound
of the hardening issue, 3x the spins plus the transform buffers of one replica, which a
run of one replica keeps; ``tests/validation/test_resources.py`` checks both on a 4096**2
Glauber run with measurements (measured: a peak 163 MB above the warmed-up interpreter's
resident memory, 130 MB above the peak of a baseline process; the bound is 185 MB).
"""

from __future__ import annotations

import math
import os

__all__ = ["available_memory", "check_run_memory", "format_bytes", "peak_memory_bound",
           "run_memory_estimate"]

#: Bytes per site and replica: the spins (1) and the engine's check of their values (2, the
#: temporaries of ``abs(spins) == 1`` at every call).
SPIN_BYTES = 3
#: Bytes per site while the initial state is drawn, one replica at a time (32-bit random
#: words and the up/down flags: 6.7 measured).
INITIAL_BYTES = 7
#: Bytes per site and kept snapshot: the kept copy, its reordered copy in the dataset, and
#: the copy the checkpoint/dataset writer makes.
SNAPSHOT_BYTES = 3
#: Bytes per site of the measurement grid: 2 kept (uint16 |k| and r bin numbers of the half
#: grids), under 4 at its peak while it is built (int32 and 4 kept only for grids with more
#: than 65534 shells, i.e. chains of more than 2**17 sites).
GRID_BYTES = 4
#: Bytes per site of one measurement workspace: the domain labelling's runs (13 bytes a run,
#: at most one run a site; 6.5 a site for a random configuration), the complex64 half
#: spectrum (4) and the per-chunk int8 and bool temporaries (3). There is one per thread
#: measuring side by side; above 2**21 sites the labelling's and the transform's scratch are
#: freed after each step, so they never add up (the sum is the bound for kept workspaces).
WORKSPACE_BYTES = 20
#: Sites measured together per chunk below which replicas are grouped
#: (:func:`coarsen.observables.structure.replica_chunks`).
_CHUNK_SITES = 1 << 16


def peak_memory_bound(size, replicas: int = 1) -> int:
    """The documented peak-memory bound of a run: 3x the spins plus one replica's transforms.

    ``3 N R`` bytes (the int8 spins, a snapshot and a temporary of the same size) plus the
    buffers of one single-precision real transform of one configuration: the float32 field
    (``4 N``) and its complex64 half spectrum (``8 (N / n_x) (n_x // 2 + 1)``).

    Parameters
    ----------
    size : sequence of int
        Sites per axis (x first), as ``lattice.size``.
    replicas : int, default: 1

    Returns
    -------
    int
        Bytes above the interpreter's own memory; a run of one replica with measurements
        and one snapshot stays below it (``tests/validation/test_resources.py``).
    """
    n = math.prod(int(v) for v in size)
    nx = int(size[0])
    return 3 * n * int(replicas) + 4 * n + 8 * (n // nx) * (nx // 2 + 1)


def run_memory_estimate(n_sites: int, replicas: int, snapshots: int = 0,
                        threads: int | None = None) -> int:
    """Upper estimate of the memory (bytes) a run needs at its peak.

    Parameters
    ----------
    n_sites : int
        Sites of the lattice.
    replicas : int
    snapshots : int, default: 0
        Configurations kept (each holds every replica).
    threads : int, optional
        Threads measuring side by side (default: the machine's cores).

    Returns
    -------
    int
        Bytes above the interpreter's own memory.
    """
    threads = threads or os.cpu_count() or 1
    per_chunk = max(1, _CHUNK_SITES // n_sites)
    chunks = math.ceil(replicas / per_chunk)
    chunk_sites = n_sites * min(per_chunk, replicas)
    workspaces = min(threads, chunks)
    return int(n_sites * (SPIN_BYTES * replicas + SNAPSHOT_BYTES * snapshots * replicas
                          + GRID_BYTES + INITIAL_BYTES)
               + WORKSPACE_BYTES * chunk_sites * workspaces)


def available_memory() -> int | None:
    """Memory this process may use: physical memory, or a smaller cgroup limit (bytes)."""
    limits = []
    try:
        limits.append(os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES"))
    except (ValueError, OSError, AttributeError):
        pass
    for path in ("/sys/fs/cgroup/memory.max", "/sys/fs/cgroup/memory/memory.limit_in_bytes"):
        try:
            with open(path, encoding="ascii") as handle:
                text = handle.read().strip()
        except OSError:
            continue
        if text.isdigit() and int(text) < 2**60:
            limits.append(int(text))
    return min(limits) if limits else None


def format_bytes(count: float) -> str:
    """``"1.5 GB"``: bytes in decimal units."""
    for unit in ("B", "kB", "MB", "GB", "TB", "PB"):
        if abs(count) < 1000 or unit == "PB":
            return f"{count:.3g} {unit}" if unit != "B" else f"{int(count)} B"
        count /= 1000.0
    raise AssertionError("unreachable")


def check_run_memory(lattice, replicas: int, snapshots: int = 0, *,
                     name: str = "lattice.size", limit: int | None = None) -> int:
    """Refuse a run whose estimated memory exceeds what this machine has.

    Parameters
    ----------
    lattice : coarsen.lattice.Lattice
    replicas, snapshots : int
    name : str, default: "lattice.size"
        The key named in the message.
    limit : int, optional
        Bytes allowed (default: :func:`available_memory`; no check when unknown).

    Returns
    -------
    int
        The estimate in bytes.

    Raises
    ------
    coarsen._validation.ParameterError
        Naming ``name``, the estimate and the limit.
    """
    from coarsen._validation import ParameterError

    estimate = run_memory_estimate(lattice.n_sites, replicas, snapshots)
    limit = available_memory() if limit is None else limit
    if limit is not None and estimate > limit:
        size = list(lattice.size)
        raise ParameterError(
            f"{name}: {size!r} with {replicas} replica{'s' if replicas != 1 else ''} and "
            f"{snapshots} snapshot{'s' if snapshots != 1 else ''} needs about "
            f"{format_bytes(estimate)} of memory (estimated before allocating), more than the "
            f"{format_bytes(limit)} this machine has; use a smaller lattice, fewer replicas or "
            "fewer snapshots", name=name, value=size)
    return estimate
