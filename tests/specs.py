"""Spec texts for tests that run the whole stack (no fixtures; seeds stay in the tests)."""

from __future__ import annotations

from coarsen.simulate import simulate
from coarsen.spec import parse_spec

__all__ = ["quench", "spec_text"]


def spec_text(*, kind="square", size=(16, 16), rule="glauber", update="random",
               temperature="value = 1.2", initial='state = "random"', times=None,
               snapshots=2, replicas=4, seed=11, extra=""):
    times = times or 'times = { start = 1, stop = 60, count = 8, spacing = "log" }'
    return f"""
[lattice]
kind = "{kind}"
size = {list(size)}

[dynamics]
rule = "{rule}"
update = "{update}"

[temperature]
{temperature}

[initial]
{initial}

[measure]
{times}
snapshots = {snapshots}
{extra}

[ensemble]
replicas = {replicas}
seed = {seed}
"""


def quench(*, rule, temperature, size, replicas, times, seed, update="random", kind="square"):
    """Run a quench from a random (m = 0) state on a size x size lattice; return the dataset."""
    text = spec_text(kind=kind, size=(size, size), rule=rule, update=update,
                     temperature=temperature, initial='state = "random"\nmagnetization = 0.0',
                     times=times, snapshots=0, replicas=replicas, seed=seed)
    return simulate(parse_spec(text)).dataset
