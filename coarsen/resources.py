"""Memory of a run, estimated from the spec before anything is allocated.

A run holds the spins of every replica (int8, one byte a site), the kept snapshots, the
measurement grid and, per thread measuring side by side, one workspace of transforms and
labels. :func:`run_memory_estimate` adds these up from the lattice, the replicas and the
snapshots; :func:`check_run_memory` refuses a spec whose estimate exceeds the memory of this
machine (physical memory, or a cgroup limit where one is set), so a run too large for memory
fails at once with a message naming ``lattice.size`` instead of dying in an allocation, or
hours later in a swap storm.

The bytes per site below were measured on the project's machine (NumPy allocations traced
with :mod:`tracemalloc`, peaks with ``getrusage``) and rounded up; the estimate is meant to
be an upper bound of the peak resident memory above the interpreter's own (about 180 MB with
the kernels loaded). ``tests/validation/test_resources.py`` checks that bound on a 4096**2
Glauber run.
"""

from __future__ import annotations

import math
import os

__all__ = ["available_memory", "check_run_memory", "format_bytes", "run_memory_estimate"]

#: Bytes per site and replica: the spins (1) and the engine's per-call scratch (4).
SPIN_BYTES = 5
#: Bytes per site and kept snapshot: the kept copy, its reordered copy in the dataset, and
#: the copy the checkpoint/dataset writer makes.
SNAPSHOT_BYTES = 3
#: Bytes per site of the measurement grid: 4 kept (|k| and r bin indices), 12 at its peak
#: while it is built.
GRID_BYTES = 12
#: Bytes per site of one measurement workspace (float32 field, half spectrum, correlation,
#: domain labels, wall/bulk split); there is one per thread measuring side by side.
WORKSPACE_BYTES = 32
#: Sites measured together per chunk below which replicas are grouped
#: (:func:`coarsen.observables.structure.replica_chunks`).
_CHUNK_SITES = 1 << 16


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
                          + GRID_BYTES)
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
