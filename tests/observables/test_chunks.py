"""Large stacks are measured in chunks: the same bits as measured at once, bounded memory.

:func:`coarsen.observables.measure` takes the replicas a chunk at a time (several replicas
below ``structure._CHUNK_SITES`` sites, one above), and on a torus transforms each
configuration a block of rows at a time (``structure._BLOCK_ELEMENTS``). Both sizes are
module settings; here they are made small, so that a small stack goes through many chunks and
blocks, and the results must equal those of one chunk and one block bit for bit. The memory
test checks that measuring more replicas costs no more than their results: the transforms
and labels of one chunk are reused, never made for the whole stack.
"""

from __future__ import annotations

import tracemalloc

import numpy as np
import pytest

from coarsen.lattice import Lattice
from coarsen.observables import MeasurementGrid, measure, structure
from tests.helpers import random_spins

FIELDS = ("energy", "magnetization", "structure_factor", "correlation", "length",
          "domain_count", "largest_domain", "wall_energy", "bulk_energy")

CASES = [("chain", (40,), "periodic"), ("square", (12, 10), "periodic"),
         ("square", (12, 10), "open"), ("triangular", (9, 12), "periodic"),
         ("cubic", (4, 6, 5), "periodic")]


def _measure_all(spins, lattice, grid, order, threads):
    m = measure(spins, lattice, grid, temperature=1.1, order=order, threads=threads)
    return {name: getattr(m, name) for name in FIELDS}


@pytest.mark.parametrize("masked", [False, True])
@pytest.mark.parametrize("kind,size,boundary", CASES)
def test_a_stack_in_many_chunks_and_blocks_equals_one_chunk(kind, size, boundary, masked,
                                                            monkeypatch):
    rng = np.random.default_rng(71)
    lattice = Lattice(kind, size, boundary)
    mask = rng.random(lattice.shape) > 0.15 if masked else None
    grid = MeasurementGrid(lattice, mask)
    spins = random_spins(rng, 11, lattice, up_fraction=0.55)
    order = "neel" if lattice.bipartite and masked else "ferro"
    # defaults: every replica in one chunk (11 * N < 65536 sites), every row in one block
    assert len(structure.replica_chunks(11, lattice.n_sites)) == 1
    whole = _measure_all(spins, lattice, grid, order, threads=1)
    # a chunk of 2 replicas (the last one alone), one row per block, on 1 and 2 threads
    monkeypatch.setattr(structure, "_CHUNK_SITES", 2 * lattice.n_sites)
    monkeypatch.setattr(structure, "_BLOCK_ELEMENTS", 1)
    assert len(structure.replica_chunks(11, lattice.n_sites)) == 6
    for threads in (1, 2):
        chunked = _measure_all(spins, lattice, grid, order, threads)
        for name in FIELDS:
            np.testing.assert_array_equal(chunked[name], whole[name],
                                          err_msg=f"{name}, {threads} thread(s)")


def _traced_peak(function) -> int:
    tracemalloc.start()
    try:
        function()
        return tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


def test_memory_of_a_stack_does_not_grow_with_its_size():
    """Peak traced memory (NumPy registers its arrays with tracemalloc) of measuring 12
    replicas minus that of 2: below one float32 field of one configuration. Measuring the
    stack at once would need at least 10 more such fields (and their spectra)."""
    rng = np.random.default_rng(72)
    lattice = Lattice("square", (512, 256))  # above 65536 sites: one replica per chunk
    grid = MeasurementGrid(lattice)
    spins = random_spins(rng, 12, lattice)
    measure(spins[:2], lattice, grid, temperature=1.0, threads=1)  # keeps the workspace
    small = _traced_peak(lambda: measure(spins[:2], lattice, grid, temperature=1.0,
                                         threads=1))
    large = _traced_peak(lambda: measure(spins, lattice, grid, temperature=1.0, threads=1))
    one_field = 4 * lattice.n_sites
    assert large - small < one_field, (small, large)
