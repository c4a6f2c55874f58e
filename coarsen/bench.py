"""The benchmark behind ``coarsen bench``: attempted moves per second of the dynamics engine.

Every case times :func:`coarsen.engine.advance` on one configuration of lattice, rule,
update, replicas and threads. The first call of each kernel (compilation, or loading the
compiled code from the cache) is timed on its own, before any case, and reported apart as
``compile_seconds``; each case then makes one warm-up call and reports the best of a few timed
repeats (``time.perf_counter``), every repeat starting from the same configuration.

Cases start from random configurations at T = 1.5 unless their name begins with ``late-``:
those first coarsen a random configuration at T = 1.0 for ``prepare_sweeps`` sweeps (not
timed), so that domains have grown, and time the dynamics there.

The ``late-<rule>-L<size>`` cases compare random-sequential and rejection-free
updates in the late-time regime: each starts from a *prepared* configuration whose domains
already have the size L (``domains``), a Gaussian-smoothed random field thresholded at
zero. A field smoothed with a Gaussian of width sigma has zero crossings along a line a mean
distance ``pi sqrt(2) sigma`` apart (Rice's formula for a Gaussian correlation
``exp(-r^2 / 4 sigma^2)``), so sigma = L / (pi sqrt 2) gives walls L apart; each record
reports the measured spacing as ``domain_length`` (sites per wall along x). The state then
relaxes for ``relax_sweeps`` untimed rejection-free sweeps at the case's temperature (the
thresholded walls are rough on the lattice scale), and both updates time the next stretch
from that same state. Records of the rejection-free cases carry ``speedup_over_random``,
the ratio of simulated sweeps per second to the random-sequential case of the same rule,
size and L.

Two *reference implementations*, written the way a careful user would write them without this
package, run on the same machine so that the engine's rates can be read as ratios:

``reference-numpy-glauber-checkerboard-square-1024``
    Vectorised NumPy heat-bath sweeps: neighbour sums by ``np.roll``, a boolean colour mask,
    a lookup table of probabilities and ``np.random.Generator`` uniforms.
``reference-numba-glauber-random-square-256``
    A plain Numba loop over random sites using ``np.random`` inside the jitted function
    (random-sequential heat-bath, one thread).

Case names give the nominal configuration (``-r<replicas>-t<threads>``); with ``--quick``
sizes and sweeps are smaller and every record reports the size actually run, and the
``threads`` field reports the threads actually used (capped by ``--threads`` and by the
threads Numba can use here).
"""

from __future__ import annotations

import json
import math
import sys
import time
from collections.abc import Iterable, Iterator
from dataclasses import dataclass

import numba
import numpy as np

from coarsen.engine import advance, make_streams
from coarsen.kernels import checkerboard, glauber, kawasaki, rejection_free
from coarsen.kernels._options import jit_serial
from coarsen.lattice import Lattice

__all__ = [
    "CASES",
    "CONTRACT_KEYS",
    "Case",
    "format_header",
    "format_row",
    "measure_first_calls",
    "run_benchmark",
    "run_case",
    "write_benchmark",
]

#: Keys every record carries (the ``bench --json`` contract); records may add more.
CONTRACT_KEYS = ("case", "rule", "update", "lattice", "size", "replicas", "threads",
                 "temperature", "attempts_per_second", "sweeps_per_second")

#: Implementations a case can time.
IMPLEMENTATIONS = ("engine", "reference-numpy", "reference-numba")

_SEED = 20261201
_REPEATS = {False: 5, True: 3}


@dataclass(frozen=True)
class Case:
    """One benchmark configuration.

    Parameters
    ----------
    name : str
        Case name; ``late-`` cases time a coarsened state, ``reference-`` cases a reference
        implementation.
    rule : {"glauber", "kawasaki"}
        Dynamics rule.
    update : {"random", "checkerboard"}
        Random-sequential or sublattice updates.
    lattice : {"square", "cubic"}
        Lattice kind.
    size, quick_size : int
        Sites per axis in the full and the quick run.
    replicas, threads : int
        Replicas advanced together and the threads asked for.
    sweeps, quick_sweeps : int
        Sweeps per timed repeat in the full and the quick run.
    temperature : float, default: 1.5
        Temperature of the timed sweeps (and of the preparation of ``late-`` cases).
    prepare_sweeps, quick_prepare_sweeps : int, default: 0
        Untimed sweeps from the random state before timing (``late-`` cases).
    implementation : {"engine", "reference-numpy", "reference-numba"}, default: "engine"
        What is timed.
    domains : int, default: 0
        Start from a prepared configuration with domains of this size (``late-<rule>-L``
        cases; 0: a random or coarsened start as above).
    relax_sweeps : int, default: 0
        Untimed rejection-free sweeps of the prepared configuration before timing.
    """

    name: str
    rule: str
    update: str
    lattice: str
    size: int
    quick_size: int
    replicas: int
    threads: int
    sweeps: int
    quick_sweeps: int
    temperature: float = 1.5
    prepare_sweeps: int = 0
    quick_prepare_sweeps: int = 0
    implementation: str = "engine"
    domains: int = 0
    relax_sweeps: int = 0

    def family(self) -> tuple[str, str, str]:
        """Which compiled code the case runs: (implementation, rule, update)."""
        return (self.implementation, self.rule, self.update)


def _engine_case(rule, update, lattice, size, quick_size, replicas, threads, sweeps,
                 quick_sweeps, **extra) -> Case:
    prefix = "late-" if extra.get("prepare_sweeps") else ""
    name = f"{prefix}{rule}-{update}-{lattice}-{size}-r{replicas}-t{threads}"
    return Case(name, rule, update, lattice, size, quick_size, replicas, threads, sweeps,
                quick_sweeps, **extra)


_SQUARE_TC = 2.0 / math.log(1.0 + math.sqrt(2.0))
#: Sweeps of one rejection-free timed stretch: as long as one engine call of a run on the
#: 1024^2 lattice (a run advances in calls of at most 2e8 attempts, 190 sweeps here), so the
#: kernel's rebuild of its class lists at every call weighs as much as it does in a run.
_RUN_CALL_SWEEPS = 190
#: Late-time comparison: (rule, T / Tc, {L: (random sweeps, rejection-free sweeps)} in the
#: full run; the quick run uses a 256^2 lattice and a quarter of the sweeps (at least 1).
_LATE_COMPARISON = (
    ("glauber", 0.3, {32: (4, _RUN_CALL_SWEEPS), 64: (4, _RUN_CALL_SWEEPS),
                      128: (4, _RUN_CALL_SWEEPS)}),
    ("kawasaki", 0.5, {32: (3, _RUN_CALL_SWEEPS), 64: (3, _RUN_CALL_SWEEPS),
                       128: (3, _RUN_CALL_SWEEPS)}),
)


def _late_cases() -> tuple[Case, ...]:
    cases = []
    for rule, fraction, sizes in _LATE_COMPARISON:
        for length, stretches in sizes.items():
            for update, sweeps in zip(("random", "rejection-free"), stretches):
                cases.append(Case(f"late-{rule}-L{length}", rule, update, "square",
                                  1024, 256, 1, 1, sweeps, max(1, sweeps // 4),
                                  temperature=round(fraction * _SQUARE_TC, 4),
                                  domains=length, relax_sweeps=20))
    return tuple(cases)


#: The benchmark cases, in the order they run: references first, so that engine cases of
#: the same configuration can report their ratio to them.
CASES: tuple[Case, ...] = (
    Case("reference-numpy-glauber-checkerboard-square-1024", "glauber", "checkerboard",
         "square", 1024, 256, 1, 1, 20, 15, implementation="reference-numpy"),
    Case("reference-numba-glauber-random-square-256", "glauber", "random", "square", 256, 128,
         1, 1, 200, 60, implementation="reference-numba"),
    _engine_case("glauber", "checkerboard", "square", 1024, 256, 1, 1, 400, 200),
    _engine_case("glauber", "checkerboard", "square", 1024, 256, 1, 2, 400, 100),
    _engine_case("glauber", "checkerboard", "square", 1024, 256, 8, 2, 80, 20),
    _engine_case("glauber", "random", "square", 256, 128, 1, 1, 800, 200),
    _engine_case("glauber", "random", "square", 256, 128, 8, 2, 200, 20),
    _engine_case("glauber", "random", "square", 4096, 1024, 1, 1, 4, 2),
    _engine_case("kawasaki", "random", "square", 256, 128, 1, 1, 400, 100),
    _engine_case("kawasaki", "random", "square", 256, 128, 8, 2, 80, 10),
    _engine_case("glauber", "checkerboard", "cubic", 128, 32, 1, 2, 40, 40),
    _engine_case("glauber", "random", "square", 256, 128, 1, 1, 800, 150, temperature=1.0,
                 prepare_sweeps=1000, quick_prepare_sweeps=200),
    _engine_case("kawasaki", "random", "square", 256, 128, 1, 1, 400, 150, temperature=1.0,
                 prepare_sweeps=3000, quick_prepare_sweeps=300),
    *_late_cases(),
)


# --------------------------------------------------------------------------------------------
# reference implementations (not part of the engine: they exist to be compared with)
# --------------------------------------------------------------------------------------------
def _heat_bath_up(temperature: float, dtype=np.float64) -> np.ndarray:
    """P(new spin up | neighbour sum f) for f = -4..4 on the square lattice."""
    fields = np.arange(-4, 5)
    return (1.0 / (1.0 + np.exp(-2.0 * fields / temperature))).astype(dtype)


def _reference_numpy_sweeps(spins: np.ndarray, rng: np.random.Generator, temperature: float,
                            sweeps: int) -> None:
    """Checkerboard heat-bath sweeps of one square configuration, vectorised with NumPy."""
    up = _heat_bath_up(temperature, np.float32)
    colour = (np.indices(spins.shape).sum(axis=0) % 2).astype(bool)
    masks = (~colour, colour)
    for _ in range(sweeps):
        for mask in masks:
            field = (np.roll(spins, 1, axis=0) + np.roll(spins, -1, axis=0)
                     + np.roll(spins, 1, axis=1) + np.roll(spins, -1, axis=1))
            uniforms = rng.random(spins.shape, dtype=np.float32)
            new = np.where(uniforms < up[field + 4], np.int8(1), np.int8(-1))
            np.copyto(spins, new, where=mask)


def _reference_numba_loop(spins, up, sweeps, seed):
    """Random-sequential heat-bath sweeps with ``np.random`` inside the jitted loop."""
    np.random.seed(seed)
    ny, nx = spins.shape
    for _ in range(sweeps * nx * ny):
        y = np.random.randint(0, ny)
        x = np.random.randint(0, nx)
        field = (spins[(y + 1) % ny, x] + spins[(y - 1) % ny, x]
                 + spins[y, (x + 1) % nx] + spins[y, (x - 1) % nx])
        spins[y, x] = 1 if np.random.random() < up[field + 4] else -1


# A user's loop compiled with the package's serial options (so it is cached like the kernels).
_reference_numba = jit_serial(_reference_numba_loop)


# --------------------------------------------------------------------------------------------
# running one case
# --------------------------------------------------------------------------------------------
def _random_spins(rng: np.random.Generator, replicas: int, shape) -> np.ndarray:
    return np.where(rng.random((replicas, *shape)) < 0.5, np.int8(1), np.int8(-1))


def prepared_domains(rng: np.random.Generator, replicas: int, shape, length: float) -> np.ndarray:
    """Configurations with domains of size ``length``: a periodic Gaussian-smoothed white
    noise field (width ``length / (pi sqrt 2)``, smoothed in Fourier space) thresholded at 0.
    """
    from scipy import ndimage

    sigma = length / (math.pi * math.sqrt(2.0))
    out = np.empty((replicas, *shape), dtype=np.int8)
    for r in range(replicas):
        noise = np.fft.rfftn(rng.standard_normal(shape))  # last axis halved
        axes = tuple(range(len(shape)))
        smooth = np.fft.irfftn(ndimage.fourier_gaussian(noise, sigma, n=shape[-1]), s=shape,
                               axes=axes)
        out[r] = np.where(smooth >= 0, np.int8(1), np.int8(-1))
    return out


def wall_spacing(spins: np.ndarray) -> float:
    """Mean distance between domain walls along x: sites per unlike bond in x."""
    unlike = np.count_nonzero(spins != np.roll(spins, 1, axis=-1))
    return spins.size / unlike if unlike else math.inf


_PREPARED: dict = {}


def _prepared_start(case: Case, lattice: Lattice, seed: int) -> np.ndarray:
    """The relaxed prepared state of a ``domains`` case, shared by both updates."""
    key = (case.rule, case.domains, lattice.size, case.replicas, case.temperature,
           case.relax_sweeps, seed)
    if key not in _PREPARED:
        _PREPARED.clear()
        spins = prepared_domains(np.random.default_rng(seed), case.replicas, lattice.shape,
                                 case.domains)
        if case.relax_sweeps:
            streams = make_streams(seed + 1, case.replicas, lattice, case.rule,
                                   "rejection-free")
            advance(spins, streams, lattice, case.relax_sweeps, case.temperature,
                    rule=case.rule, update="rejection-free")
        _PREPARED[key] = spins
    return _PREPARED[key].copy()


def _runner(case: Case, lattice: Lattice, spins: np.ndarray, seed: int):
    """A function ``run(sweeps)`` advancing ``spins`` in place with the case's implementation."""
    if case.implementation == "engine":
        streams = make_streams(seed, spins.shape[0], lattice, case.rule, case.update)

        def run(sweeps):
            advance(spins, streams, lattice, sweeps, case.temperature, rule=case.rule,
                    update=case.update)
    elif case.implementation == "reference-numpy":
        rng = np.random.default_rng(seed)

        def run(sweeps):
            for replica in spins:
                _reference_numpy_sweeps(replica, rng, case.temperature, sweeps)
    else:
        up = _heat_bath_up(case.temperature)

        def run(sweeps):
            for replica in spins:
                _reference_numba(replica, up, sweeps, seed)
    return run


def _dispatchers(family) -> list:
    implementation, rule, update = family
    if implementation == "reference-numba":
        return [_reference_numba]
    if implementation == "reference-numpy":
        return []
    if update == "rejection-free":
        return [rejection_free.glauber_rejection_free if rule == "glauber"
                else rejection_free.kawasaki_rejection_free]
    if rule == "kawasaki":
        return [kawasaki.kawasaki_local]
    if update == "checkerboard":
        return [checkerboard.split_colours, checkerboard.glauber_checkerboard_bipartite,
                checkerboard.merge_colours]
    return [glauber.glauber_random_sequential]


def measure_first_calls(cases: Iterable[Case]) -> dict[tuple[str, str, str], dict]:
    """Time the first call of every kernel the cases use, on a tiny lattice.

    The first call compiles the kernel, or loads it from Numba's cache; its time is kept
    apart from the rates, which come from warm calls.

    Returns
    -------
    dict
        ``{case.family(): {"seconds": float, "cached": bool}}``; ``cached`` is True when
        every kernel of the family was loaded from the cache rather than compiled.
    """
    results = {}
    for case in cases:
        family = case.family()
        if family in results:
            continue
        kind = case.lattice
        lattice = Lattice(kind, 4)
        spins = _random_spins(np.random.default_rng(_SEED), 1, lattice.shape)
        run = _runner(case, lattice, spins, _SEED)
        dispatchers = _dispatchers(family)
        hits_before = [sum(d.stats.cache_hits.values()) for d in dispatchers]
        start = time.perf_counter()
        run(1)
        seconds = time.perf_counter() - start
        cached = all(sum(d.stats.cache_hits.values()) > before
                     for d, before in zip(dispatchers, hits_before))
        results[family] = {"seconds": seconds, "cached": bool(dispatchers) and cached}
    return results


def _available_threads() -> int:
    return int(numba.config.NUMBA_NUM_THREADS)


def _check_threads(threads) -> int:
    available = _available_threads()
    if threads is None:
        return available
    if isinstance(threads, bool) or not isinstance(threads, (int, np.integer)):
        raise TypeError(f"threads: {threads!r} is not a whole number")
    if threads < 1:
        raise ValueError(f"threads: {threads!r} must be at least 1")
    if threads > available:
        raise ValueError(
            f"threads: {threads!r} is more than the {available} threads Numba can use here "
            "(NUMBA_NUM_THREADS)"
        )
    return int(threads)


def run_case(case: Case, *, quick: bool = False, max_threads: int | None = None,
             repeats: int | None = None, seed: int = _SEED) -> dict:
    """Time one case and return its record.

    Parameters
    ----------
    case : Case
        The configuration.
    quick : bool, default: False
        Use the case's quick size and sweeps.
    max_threads : int, optional
        Cap on the threads (default: all Numba can use).
    repeats : int, optional
        Timed repeats, the best is reported (default: 5, or 3 when quick).
    seed : int
        Seed of the random initial state and the streams.

    Returns
    -------
    dict
        The contract keys (:data:`CONTRACT_KEYS`) plus ``implementation``, ``sweeps`` (per
        repeat), ``seconds`` (best repeat), ``repeats``, ``prepare_sweeps`` and ``quick``.
    """
    max_threads = _check_threads(max_threads)
    repeats = _REPEATS[bool(quick)] if repeats is None else int(repeats)
    if repeats < 1:
        raise ValueError(f"repeats: {repeats!r} must be at least 1")
    size = case.quick_size if quick else case.size
    sweeps = case.quick_sweeps if quick else case.sweeps
    prepare = case.quick_prepare_sweeps if quick else case.prepare_sweeps
    threads = 1 if case.implementation != "engine" else min(case.threads, max_threads)
    lattice = Lattice(case.lattice, size)
    if case.domains:
        spins = _prepared_start(case, lattice, seed)
    else:
        spins = _random_spins(np.random.default_rng(seed), case.replicas, lattice.shape)
    domain_length = wall_spacing(spins)
    run = _runner(case, lattice, spins, seed)
    previous = numba.get_num_threads()
    numba.set_num_threads(threads)
    try:
        if prepare:
            run(prepare)
        start_state = spins.copy()
        run(1)  # warm-up: thread pool, caches, page faults
        best = math.inf
        for _ in range(repeats):
            np.copyto(spins, start_state)
            start = time.perf_counter()
            run(sweeps)
            best = min(best, time.perf_counter() - start)
    finally:
        numba.set_num_threads(previous)
    attempts = case.replicas * lattice.n_sites * sweeps
    record = {
        "case": case.name,
        "rule": case.rule,
        "update": case.update,
        "lattice": case.lattice,
        "size": size,
        "replicas": case.replicas,
        "threads": threads,
        "temperature": case.temperature,
        "attempts_per_second": attempts / best,
        "sweeps_per_second": sweeps / best,
        "implementation": case.implementation,
        "sweeps": sweeps,
        "seconds": best,
        "repeats": repeats,
        "prepare_sweeps": prepare,
        "quick": bool(quick),
    }
    if case.domains:
        record["domains"] = case.domains
        record["domain_length"] = domain_length
    return record


def _reference_for(record: dict, references: dict) -> dict | None:
    key = (record["rule"], record["update"], record["lattice"], record["size"])
    return references.get(key)


def run_benchmark(*, quick: bool = False, threads: int | None = None,
                  cases: Iterable[Case] | None = None,
                  repeats: int | None = None) -> Iterator[dict]:
    """Run the benchmark, yielding one record per case as soon as it is measured.

    Parameters
    ----------
    quick : bool, default: False
        Smaller sizes and fewer sweeps (well under a minute after compilation).
    threads : int, optional
        Cap on the threads of every case (default: all that Numba can use here).
    cases : iterable of Case, optional
        The cases to run (default: :data:`CASES`).
    repeats : int, optional
        Timed repeats per case (default: 5, or 3 when quick).

    Yields
    ------
    dict
        A record of :func:`run_case` plus ``compile_seconds`` and ``compile_cached`` (the
        first call of the case's kernels, see :func:`measure_first_calls`) and, for an engine
        case of the same rule, update, lattice and size as a reference case run before it,
        ``reference_case`` and ``speedup_over_reference`` (ratio of attempts per second).

    Raises
    ------
    ValueError, TypeError
        For a bad ``threads`` or ``repeats``.
    """
    max_threads = _check_threads(threads)
    if repeats is not None and (isinstance(repeats, bool) or not isinstance(repeats, int)
                                or repeats < 1):
        raise ValueError(f"repeats: {repeats!r} is not a whole number >= 1")
    cases = list(CASES if cases is None else cases)
    return _records(cases, quick, max_threads, repeats)


def _records(cases: list[Case], quick: bool, max_threads: int,
             repeats: int | None) -> Iterator[dict]:
    first_calls = measure_first_calls(cases)
    references: dict = {}
    random_late: dict = {}
    for case in cases:
        record = run_case(case, quick=quick, max_threads=max_threads, repeats=repeats)
        first = first_calls[case.family()]
        record["compile_seconds"] = first["seconds"]
        record["compile_cached"] = first["cached"]
        if case.domains:
            key = (case.rule, case.domains, record["size"], case.replicas)
            if case.update == "random":
                random_late[key] = record
            elif key in random_late:
                record["random_case"] = random_late[key]["case"]
                record["speedup_over_random"] = (record["sweeps_per_second"]
                                                 / random_late[key]["sweeps_per_second"])
        elif case.implementation != "engine" and not record["prepare_sweeps"]:
            references[(record["rule"], record["update"], record["lattice"],
                        record["size"])] = record
        else:
            reference = _reference_for(record, references)
            if reference is not None and not record["prepare_sweeps"]:
                record["reference_case"] = reference["case"]
                record["speedup_over_reference"] = (record["attempts_per_second"]
                                                    / reference["attempts_per_second"])
        yield record


# --------------------------------------------------------------------------------------------
# output
# --------------------------------------------------------------------------------------------
_COLUMNS = (("case", 48, "<"), ("size", 8, ">"), ("R", 3, ">"), ("thr", 3, ">"),
            ("T", 4, ">"), ("sweeps", 6, ">"), ("best s", 7, ">"), ("Matt/s", 8, ">"),
            ("sweeps/s", 9, ">"), ("x ref", 6, ">"), ("first s", 8, ">"))


def format_header() -> str:
    """The header line of the text table."""
    return "  ".join(f"{title:{align}{width}}" for title, width, align in _COLUMNS).rstrip()


def format_row(record: dict) -> str:
    """One aligned line of the text table for a record of :func:`run_benchmark`."""
    dims = {"chain": 1, "square": 2, "triangular": 2, "cubic": 3}[record["lattice"]]
    ratio = record.get("speedup_over_reference", record.get("speedup_over_random"))
    first = record.get("compile_seconds")
    if first is not None and record.get("compile_cached"):
        first_text = f"{first:.2f}c"
    elif first is not None:
        first_text = f"{first:.2f}"
    else:
        first_text = "-"
    values = (
        record["case"],
        f"{record['size']}^{dims}",
        str(record["replicas"]),
        str(record["threads"]),
        f"{record['temperature']:g}",
        str(record.get("sweeps", "")),
        f"{record['seconds']:.3f}" if "seconds" in record else "-",
        f"{record['attempts_per_second'] / 1e6:.1f}",
        f"{record['sweeps_per_second']:.1f}",
        f"{ratio:.1f}" if ratio is not None else "-",
        first_text,
    )
    return "  ".join(f"{v:{align}{width}}"
                     for v, (_, width, align) in zip(values, _COLUMNS)).rstrip()


_TABLE_NOTES = (
    "Matt/s: millions of attempted moves per second, all replicas together; best of the timed "
    "repeats.",
    "x ref: ratio of Matt/s to the reference implementation of the same rule, update and "
    "size; for late-*-rejection-free cases, ratio of sweeps/s to the random-sequential case "
    "of the same rule and L.",
    "first s: seconds of the first call of the case's kernels (compilation, or a cache load "
    "when marked c), not included in the rates.",
)


def write_benchmark(*, quick: bool = False, as_json: bool = False, threads: int | None = None,
                    cases: Iterable[Case] | None = None, repeats: int | None = None,
                    file=None) -> int:
    """Run the benchmark and print it: JSON lines, or an aligned table.

    Parameters
    ----------
    quick, threads, cases, repeats
        As for :func:`run_benchmark`.
    as_json : bool, default: False
        One JSON object per line instead of the table.
    file : file-like, optional
        Where to write (default: ``sys.stdout`` at call time).

    Returns
    -------
    int
        Number of cases run.
    """
    out = sys.stdout if file is None else file
    records = run_benchmark(quick=quick, threads=threads, cases=cases, repeats=repeats)
    count = 0
    if not as_json:
        print(format_header(), file=out, flush=True)
    for record in records:
        if as_json:
            print(json.dumps(record), file=out, flush=True)
        else:
            print(format_row(record), file=out, flush=True)
        count += 1
    if not as_json:
        print("", file=out)
        for note in _TABLE_NOTES:
            print(note, file=out)
        out.flush()
    return count
