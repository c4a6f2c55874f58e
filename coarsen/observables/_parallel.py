"""Replicas measured side by side on threads; the thread count is an explicit argument.

Each piece of work writes its results into its own replicas' slots and nothing is summed
across pieces, so the results do not depend on the number of threads. The heavy steps (the
transforms of scipy.fft and the Numba kernels, compiled with ``nogil``) release the GIL, so
threads of one process share the cores without copying any configuration.
"""

from __future__ import annotations

import operator
import threading
from concurrent.futures import ThreadPoolExecutor

import numba
import numpy as np

__all__ = ["Workspace", "WorkspacePool", "check_threads", "for_each"]

# Below this many sites per piece of work a thread costs more than it saves.
_MIN_SITES_PER_THREAD = 1 << 14
# Up to this many sites per piece a thread's workspace (at most ~20 bytes a site) is kept
# for the next call; above it the scratch arrays are freed as soon as each step is done, so
# a large lattice never holds the labelling's scratch and the transform's at once, nor
# either between measurements.
KEEP_SITES = 1 << 21


def check_threads(threads) -> int:
    """The thread count to use: ``numba.get_num_threads()`` for None, else a positive int."""
    if threads is None:
        return int(numba.get_num_threads())
    if isinstance(threads, bool):
        raise TypeError(f"threads: expected a positive int or None, got {threads!r}")
    try:
        n = operator.index(threads)
    except TypeError:
        raise TypeError(f"threads: expected a positive int or None, got {threads!r}") from None
    if n < 1:
        raise ValueError(f"threads: {threads!r} is not a positive number of threads")
    return n


class Workspace:
    """Scratch arrays of one thread, kept from one piece of work to the next of one call.

    Fresh arrays of a few MB cost page faults at every first touch (on this machine about
    1 ms per 4 MB, as long as a transform); reusing them spares that. A workspace is used by
    one thread at a time (:class:`WorkspacePool`).
    """

    def __init__(self, keep: bool = True):
        self._arrays = {}
        self.keep = keep

    def array(self, name: str, shape, dtype) -> np.ndarray:
        """An uninitialised array of this shape and dtype, the same one on every call (a
        fresh one each time for a workspace that does not ``keep``)."""
        shape = tuple(int(n) for n in shape)
        dtype = np.dtype(dtype)
        if not self.keep:
            return np.empty(shape, dtype=dtype)
        found = self._arrays.get(name)
        if found is None or found.shape != shape or found.dtype != dtype:
            found = self._arrays[name] = np.empty(shape, dtype=dtype)
        return found


class WorkspacePool:
    """Workspaces handed to the threads of successive calls; one per concurrent thread.

    A :class:`~coarsen.observables.MeasurementGrid` keeps one, so a run that measures the
    same lattice many times allocates its scratch arrays once per thread.
    """

    def __init__(self):
        self._free: list[Workspace] = []
        self._lock = threading.Lock()

    def acquire(self, sites: int = 0) -> Workspace:
        """A workspace for pieces of ``sites`` sites: a kept one up to :data:`KEEP_SITES`,
        else one that keeps nothing."""
        if sites > KEEP_SITES:
            return Workspace(keep=False)
        with self._lock:
            return self._free.pop() if self._free else Workspace()

    def release(self, workspace: Workspace) -> None:
        if not workspace.keep:
            return
        with self._lock:
            self._free.append(workspace)


def for_each(function, pieces, threads: int, sites_per_piece: int,
             workspaces: WorkspacePool | None = None) -> None:
    """Call ``function(piece, workspace)`` for every piece, on up to ``threads`` threads.

    Each thread has its own :class:`Workspace` from ``workspaces`` (a fresh pool if None),
    kept in the pool for the next call only for pieces of up to :data:`KEEP_SITES` sites.
    Pieces are taken in order by whichever thread is free; exceptions are raised in the
    caller. Small pieces (fewer than 16384 sites) all run on the calling thread.
    """
    pieces = list(pieces)
    pool = WorkspacePool() if workspaces is None else workspaces
    workers = min(threads, len(pieces))
    if workers <= 1 or sites_per_piece < _MIN_SITES_PER_THREAD:
        workspace = pool.acquire(sites_per_piece)
        try:
            for piece in pieces:
                function(piece, workspace)
        finally:
            pool.release(workspace)
        return
    local = threading.local()
    taken: list[Workspace] = []

    def call(piece):
        workspace = getattr(local, "workspace", None)
        if workspace is None:
            workspace = local.workspace = pool.acquire(sites_per_piece)
            taken.append(workspace)
        function(piece, workspace)

    try:
        with ThreadPoolExecutor(max_workers=workers,
                                thread_name_prefix="coarsen-measure") as executor:
            for _ in executor.map(call, pieces):
                pass
    finally:
        for workspace in taken:
            pool.release(workspace)
