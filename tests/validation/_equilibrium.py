"""The shared driver of the equilibrium checks, and the statistics they use.

One function samples any dynamics (:func:`sample_observables`); the checks built on it are
a chi-squared test of a sampled histogram against an exact distribution
(:func:`chi_square_test`, :func:`boltzmann_check`) and a comparison of a blocked mean with an
exact value (:func:`blocked_mean`, :func:`check_mean`). Tolerances come from the run itself:

* integrated autocorrelation times from ``emcee.autocorr.integrated_time`` (Sokal's automatic
  window, c = 5; the estimate is required to come from a chain longer than 50 tau: emcee
  raises otherwise; Goodman & Weare 2010 / Foreman-Mackey et al. 2013 [M], REFERENCE.md
  Sect. 10);
* standard errors from block means, blocks of at least 20 tau within each independent
  replica (common practice);
* chi-squared p-values with bins merged until every expected count is at least 5 (common
  practice: Cochran's rule), the statistic divided by the largest measured tau of the
  energy and magnetization series, in units of the sampling interval (a correlated sample of
  n carries about n / tau independent ones; sampling intervals are chosen so that tau is
  close to 1, which keeps this correction small).
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from emcee.autocorr import integrated_time as _emcee_integrated_time
from scipy import stats

from coarsen.engine import advance, make_streams
from coarsen.lattice import Lattice
from tests.validation._exact import bond_pairs, bond_sums, staggering_signs

__all__ = [
    "DATA_DIR",
    "P_THRESHOLD",
    "Z_TOLERANCE",
    "ChiSquare",
    "Samples",
    "blocked_mean",
    "boltzmann_check",
    "check_mean",
    "chi_square_test",
    "integrated_time",
    "load_table",
    "random_spins",
    "sample_observables",
]

DATA_DIR = Path(__file__).resolve().parents[1] / "data"

#: A chi-squared test passes when its p-value exceeds this.
P_THRESHOLD = 1e-3
#: A mean passes when it lies within this many standard errors of the exact value.
Z_TOLERANCE = 5.0


# ------------------------------------------------------------------------------------------
# reference tables
# ------------------------------------------------------------------------------------------
def load_table(name: str) -> dict[str, np.ndarray]:
    """Columns of ``tests/data/<name>.csv`` (comment lines start with '#')."""
    lines = [ln for ln in (DATA_DIR / f"{name}.csv").read_text().splitlines()
             if ln.strip() and not ln.startswith("#")]
    header = lines[0].split(",")
    rows = [ln.split(",") for ln in lines[1:]]
    out = {}
    for j, col in enumerate(header):
        values = [r[j] for r in rows]
        try:
            out[col] = np.array([float(v) if v != "" else np.nan for v in values])
        except ValueError:
            out[col] = np.array(values)
    return out


# ------------------------------------------------------------------------------------------
# sampling
# ------------------------------------------------------------------------------------------
def random_spins(rng: np.random.Generator, replicas: int, lattice: Lattice,
                 n_up: int | None = None) -> np.ndarray:
    """Random configurations: independent +-1 spins, or exactly ``n_up`` up spins each."""
    n = lattice.n_sites
    if n_up is None:
        flat = np.where(rng.random((replicas, n)) < 0.5, 1, -1)
    else:
        flat = -np.ones((replicas, n), dtype=np.int64)
        for r in range(replicas):
            flat[r, rng.permutation(n)[:n_up]] = 1
    return np.ascontiguousarray(flat.reshape(replicas, *lattice.shape), dtype=np.int8)


@dataclass
class Samples:
    """Measurements of R independent replicas at n times, ``interval`` sweeps apart.

    ``bonds[r, k, j]`` is the sum of s_i s_j over the bonds of direction j
    (``lattice.forward_offsets`` order), ``magnetization`` the total M and ``staggered`` the
    total staggered M (zero array on non-bipartite lattices). Integers, computed from the
    configurations with this package's own bond lists (not the engine's energy function).
    """

    lattice: Lattice
    temperature: float
    dynamics: dict
    interval: int
    bonds: np.ndarray
    magnetization: np.ndarray
    staggered: np.ndarray
    seconds: float = 0.0
    extra: dict = field(default_factory=dict)

    @property
    def replicas(self) -> int:
        return self.bonds.shape[0]

    @property
    def count(self) -> int:
        return self.bonds.shape[1]

    @property
    def bond_total(self) -> np.ndarray:
        return self.bonds.sum(axis=2)

    def energy_per_site(self) -> np.ndarray:
        """(R, n) energy per site with the run's J and h."""
        J = self.dynamics.get("J", 1.0)
        h = self.dynamics.get("h", 0.0)
        return (-J * self.bond_total - h * self.magnetization) / self.lattice.n_sites

    def columns(self) -> np.ndarray:
        """(R * n, d + 2) int64 rows (bond sums by direction, M, staggered M): the columns of
        ``_exact.EnumeratedLattice.classes``."""
        d = self.bonds.shape[2]
        cols = np.empty((self.replicas, self.count, d + 2), dtype=np.int64)
        cols[..., :d] = self.bonds
        cols[..., d] = self.magnetization
        cols[..., d + 1] = self.staggered
        return cols.reshape(-1, d + 2)


def sample_observables(lattice: Lattice, temperature: float, *, replicas: int, samples: int,
                       interval: int, burn_in: int, seed: int, rule: str = "glauber",
                       update: str = "random", acceptance: str = "heat-bath", J: float = 1.0,
                       h: float = 0.0, initial: np.ndarray | None = None,
                       chunk: int = 64) -> Samples:
    """Run ``replicas`` independent chains and measure them every ``interval`` sweeps.

    Parameters
    ----------
    lattice : Lattice
    temperature : float
    replicas, samples, interval, burn_in : int
        Chains, measurements per chain, sweeps between measurements, sweeps discarded first.
    seed : int
        Seeds both the engine's streams and the random initial state.
    rule, update, acceptance, J, h
        Passed to :func:`coarsen.engine.advance`.
    initial : ndarray of shape (R, *lattice.shape), optional
        Starting configurations (copied); default independent random spins.
    """
    dynamics = dict(rule=rule, update=update, acceptance=acceptance, J=J, h=h)
    if initial is None:
        spins = random_spins(np.random.default_rng([seed, 1]), replicas, lattice)
    else:
        spins = np.ascontiguousarray(initial, dtype=np.int8).copy()
        assert spins.shape == (replicas, *lattice.shape)
    streams = make_streams(seed, replicas, lattice, rule, update)
    pairs = bond_pairs(lattice.kind, lattice.size, lattice.periodic)
    stagger = (staggering_signs(lattice.size) if lattice.bipartite
               else np.zeros(lattice.n_sites, dtype=np.int64))
    n = lattice.n_sites
    start = time.perf_counter()
    if burn_in:
        advance(spins, streams, lattice, burn_in, temperature, **dynamics)
    bonds = np.empty((replicas, samples, len(pairs)), dtype=np.int64)
    mag = np.empty((replicas, samples), dtype=np.int64)
    stag = np.empty((replicas, samples), dtype=np.int64)
    buffer = np.empty((chunk, replicas, n), dtype=np.int8)
    k = 0
    while k < samples:
        m = min(chunk, samples - k)
        for i in range(m):
            advance(spins, streams, lattice, interval, temperature, **dynamics)
            buffer[i] = spins.reshape(replicas, n)
        flat = buffer[:m].reshape(m * replicas, n)
        bonds[:, k:k + m] = bond_sums(flat, pairs).reshape(m, replicas, -1).transpose(1, 0, 2)
        s64 = flat.astype(np.int64)
        mag[:, k:k + m] = s64.sum(axis=1).reshape(m, replicas).T
        stag[:, k:k + m] = (s64 @ stagger).reshape(m, replicas).T
        k += m
    seconds = time.perf_counter() - start
    return Samples(lattice, float(temperature), dynamics, int(interval), bonds, mag, stag,
                   seconds, {"final_spins": spins})


# ------------------------------------------------------------------------------------------
# statistics
# ------------------------------------------------------------------------------------------
def integrated_time(series: np.ndarray) -> float:
    """Integrated autocorrelation time (in samples) of (R, n) replica series.

    ``emcee.autocorr.integrated_time`` with the replicas as walkers (their normalised
    autocorrelation functions are averaged), c = 5, and emcee's requirement n > 50 tau.
    Replicas whose series is constant carry no information and are left out; a series
    constant in every replica returns 1.0.
    """
    x = np.asarray(series, dtype=float)
    live = x.std(axis=1) > 0
    if not live.any():
        return 1.0
    return float(_emcee_integrated_time(x[live].T[:, :, None], c=5, tol=50)[0])


@dataclass(frozen=True)
class Mean:
    """A blocked mean with its standard error, and the numbers behind it."""

    mean: float
    error: float
    tau: float
    block: int
    blocks: int

    def z(self, exact: float) -> float:
        return (self.mean - exact) / self.error

    def __str__(self) -> str:
        return (f"{self.mean:.6f} +- {self.error:.2e} (tau = {self.tau:.2f} samples, "
                f"{self.blocks} blocks of {self.block})")


def blocked_mean(series: np.ndarray, tau: float | None = None) -> Mean:
    """Mean of (R, n) replica series and its standard error from block means.

    Each replica is cut into blocks of ``ceil(20 tau)`` samples (at least 4 blocks per
    replica); the standard error is the spread of all block means over sqrt(their number).
    Blocks of 20 tau are nearly independent (common practice).
    """
    x = np.asarray(series, dtype=float)
    if tau is None:
        tau = integrated_time(x)
    R, n = x.shape
    block = max(1, min(math.ceil(20 * tau), n // 4))
    nb = n // block
    means = x[:, : nb * block].reshape(R, nb, block).mean(axis=2).ravel()
    if means.size < 2:
        raise ValueError("blocked_mean: fewer than two blocks")
    return Mean(float(x.mean()), float(means.std(ddof=1) / math.sqrt(means.size)), tau,
                block, means.size)


def check_mean(series: np.ndarray, exact: float, label: str, tau: float | None = None,
               k: float = Z_TOLERANCE) -> Mean:
    """Assert that the blocked mean of ``series`` is within k standard errors of ``exact``."""
    est = blocked_mean(series, tau)
    z = est.z(exact)
    print(f"[mean] {label}: {est} vs exact {exact:.10f}: z = {z:+.2f}")
    assert abs(z) < k, f"{label}: {est} differs from the exact {exact:.10f} by z = {z:+.2f}"
    return est


@dataclass(frozen=True)
class ChiSquare:
    """Result of a chi-squared goodness-of-fit test."""

    statistic: float
    dof: int
    p_value: float
    inflation: float
    n: int
    bins: int
    unexpected: int

    def __str__(self) -> str:
        return (f"chi2/dof = {self.statistic:.1f}/{self.dof} = "
                f"{self.statistic / max(self.dof, 1):.3f} (after dividing by tau = "
                f"{self.inflation:.2f}), p = {self.p_value:.3g}, n = {self.n}, "
                f"{self.bins} categories")


def _merge_groups(expected: np.ndarray, min_expected: float) -> np.ndarray:
    """Group index of every category: categories are taken in order of increasing expected
    count and merged until each group expects at least ``min_expected``; a short remainder
    joins the last group. The partition depends on the exact distribution only."""
    order = np.argsort(expected, kind="stable")
    group = np.empty(len(expected), dtype=np.int64)
    g, acc = 0, 0.0
    for idx in order:
        group[idx] = g
        acc += expected[idx]
        if acc >= min_expected:
            g, acc = g + 1, 0.0
    if acc > 0 and g > 0:  # leftover below the minimum: fold into the previous group
        group[group == g] = g - 1
    return group


def chi_square_test(observed_keys: np.ndarray, exact_keys: np.ndarray,
                    exact_probabilities: np.ndarray, inflation: float = 1.0,
                    min_expected: float = 5.0) -> ChiSquare:
    """Chi-squared test of sampled categories against an exact distribution.

    Parameters
    ----------
    observed_keys : (n, k) int array
        One category per sample.
    exact_keys, exact_probabilities : (K, k) int array, (K,) float
        The exact distribution (every category with p > 0).
    inflation : float
        The statistic is divided by this (>= 1): the integrated autocorrelation time of the
        samples, so that n / inflation effectively independent samples are tested.
    """
    obs = np.asarray(observed_keys, dtype=np.int64).reshape(len(observed_keys), -1)
    keys = np.asarray(exact_keys, dtype=np.int64).reshape(len(exact_keys), -1)
    both = np.concatenate([keys, obs])
    _, inverse = np.unique(both, axis=0, return_inverse=True)
    inverse = inverse.ravel()
    exact_id = inverse[: len(keys)]
    lookup = np.full(inverse.max() + 1, -1, dtype=np.int64)
    lookup[exact_id] = np.arange(len(keys))
    cat = lookup[inverse[len(keys):]]
    unexpected = int(np.count_nonzero(cat < 0))
    n = len(obs)
    counts = np.bincount(cat[cat >= 0], minlength=len(keys)).astype(float)
    expected = n * np.asarray(exact_probabilities, dtype=float)
    group = _merge_groups(expected, min_expected)
    o = np.bincount(group, weights=counts)
    e = np.bincount(group, weights=expected)
    inflation = max(1.0, float(inflation))
    statistic = float(np.sum((o - e) ** 2 / e)) / inflation
    dof = len(o) - 1
    p = float(stats.chi2.sf(statistic, dof)) if dof > 0 else 1.0
    return ChiSquare(statistic, dof, p, inflation, n, len(o), unexpected)


# Keys: functions of the columns (bond sum per direction ..., M, staggered M) shared by
# ``Samples.columns()`` and ``EnumeratedLattice.classes``.
def key_bonds(cols):
    """Total bond sum (the energy -E/J in zero field)."""
    return cols[:, :-2].sum(axis=1, keepdims=True)


def key_bonds_m(cols):
    """(total bond sum, M): the joint (E, M) histogram."""
    return np.column_stack([cols[:, :-2].sum(axis=1), cols[:, -2]])


def key_directions_m(cols):
    """(bond sum of each direction, M): resolves anisotropy between bond directions."""
    return cols[:, :-1]


def key_bonds_absm(cols):
    """(total bond sum, |M|)."""
    return np.column_stack([cols[:, :-2].sum(axis=1), np.abs(cols[:, -2])])


def key_bonds_staggered(cols):
    """(total bond sum, staggered M)."""
    return np.column_stack([cols[:, :-2].sum(axis=1), cols[:, -1]])


KEYS = {"E": key_bonds, "EM": key_bonds_m, "E|M|": key_bonds_absm,
        "directions": key_directions_m, "E_staggered": key_bonds_staggered}

#: The series whose autocorrelation time limits each key (see ``sample_tau``).
KEY_SERIES = {"E": ("E",), "EM": ("E", "M"), "E|M|": ("E", "|M|"),
              "directions": ("E", "M", "directions"), "E_staggered": ("E", "Ms")}


def sample_tau(samples: Samples, name: str) -> float:
    """Integrated autocorrelation time (in samples) of one series of ``samples``, cached:
    "E" (bond sum), "M", "|M|", "Ms" (staggered M) or "directions" (the largest over the
    bond sums of the single directions)."""
    cache = samples.extra.setdefault("tau", {})
    if name not in cache:
        if name == "E":
            cache[name] = integrated_time(samples.bond_total)
        elif name == "M":
            cache[name] = integrated_time(samples.magnetization)
        elif name == "|M|":
            cache[name] = integrated_time(np.abs(samples.magnetization))
        elif name == "Ms":
            cache[name] = integrated_time(samples.staggered)
        elif name == "directions":
            cache[name] = max(integrated_time(samples.bonds[:, :, j])
                              for j in range(samples.bonds.shape[2]))
        else:
            raise ValueError(name)
    return cache[name]


def boltzmann_check(samples: Samples, exact_classes: np.ndarray, exact_probabilities: np.ndarray,
                    key: str, label: str, assert_pass: bool = True) -> ChiSquare:
    """Chi-squared test of the histogram of ``KEYS[key]`` against the exact distribution.

    ``exact_classes`` are rows of (bond sums by direction, M, staggered M) with their exact
    probabilities ``exact_probabilities`` (from ``_exact``). The statistic is divided by the
    largest integrated autocorrelation time of the series the key depends on
    (``KEY_SERIES``: energy, and M, |M|, staggered M or the bond sums per direction). Asserts
    (unless ``assert_pass`` is False) that no sample falls outside the exact support and that
    p > ``P_THRESHOLD``.
    """
    f = KEYS[key]
    ekeys = f(exact_classes)
    uniq, inverse = np.unique(ekeys, axis=0, return_inverse=True)
    prob = np.bincount(inverse.ravel(), weights=exact_probabilities, minlength=len(uniq))
    keep = prob > 0
    taus = {name: sample_tau(samples, name) for name in KEY_SERIES[key]}
    inflation = max(taus.values())
    result = chi_square_test(f(samples.columns()), uniq[keep], prob[keep], inflation)
    tau_text = ", ".join(f"{k} {v:.2f}" for k, v in taus.items())
    print(f"[chi2] {label} [{key}]: {result}; tau (samples of {samples.interval} sweeps): "
          f"{tau_text}; {samples.seconds:.2f} s sampling")
    if assert_pass:
        assert result.unexpected == 0, (
            f"{label}: {result.unexpected} samples in states of zero exact probability")
        assert result.p_value > P_THRESHOLD, f"{label} [{key}]: {result}"
    return result
