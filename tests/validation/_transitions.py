"""Exact one-sweep transition matrices of tiny lattices (at most 9 sites), from the
definitions of the moves; used by test_exact_dynamics.py. Like ``_exact.py`` this does not
call the engine.
"""

from __future__ import annotations

import math

import numpy as np

from tests.validation._exact import FORWARD, bond_pairs, bond_sums, sublattice_colours

__all__ = ["sweep_matrix"]


def _acceptance(dE: np.ndarray, temperature: float, acceptance: str) -> np.ndarray:
    """Probability of accepting a change of energy dE (REFERENCE.md Sect. 0), T > 0."""
    if acceptance == "heat-bath":
        return 1.0 / (1.0 + np.exp(dE / temperature))
    if acceptance == "metropolis":
        return np.minimum(1.0, np.exp(-dE / temperature))
    raise ValueError(acceptance)


def sweep_matrix(kind: str, size: tuple, periodic: bool, rule: str, update: str,
                 acceptance: str, temperature: float, J: float = 1.0,
                 h: float = 0.0) -> np.ndarray:
    """Exact one-sweep transition matrix P[k, k'] over the 2**N states (bit i set = spin i
    down), built from the definitions of the moves (REFERENCE.md Sect. 0, shared/DESIGN.md):

    * Glauber, one site i: heat-bath sets s_i = +1 with probability 1/(1 + exp(-2 (J f + h)/T))
      (f the neighbour sum); Metropolis flips s_i with probability min(1, exp(-dE/T)).
    * Kawasaki (local): a site a uniformly, one of its z bond directions uniformly, and the
      exchange of s_a with that neighbour accepted with the acceptance of its dE; nonlocal:
      a uniformly chosen up spin and down spin, exchanged likewise.
    * random-sequential sweep: N independent attempts, P = Q**N with Q the one-attempt
      average; sublattice sweep: the product of the site kernels, colour 0 first.

    Energies are computed from the bond lists here, not with the engine's formulas.
    """
    size = tuple(int(n) for n in size)
    n = math.prod(size)
    S = 2**n
    states = np.arange(S, dtype=np.int64)
    spins = (1 - 2 * ((states[:, None] >> np.arange(n)) & 1)).astype(np.int64)
    pairs = bond_pairs(kind, size, periodic)
    energy = -J * bond_sums(spins, pairs).sum(axis=1) - h * spins.sum(axis=1)
    neighbours = [[] for _ in range(n)]
    directed = []  # (a, b) for every site a and each of its bond directions (+ and -)
    for i, j in pairs:
        for a, b in zip(i, j):
            neighbours[a].append(b)
            neighbours[b].append(a)
    z = 2 * len(FORWARD[kind])
    for i, j in pairs:  # forward and backward offsets of every site
        directed += list(zip(i, j)) + list(zip(j, i))

    def site_kernel(i):
        P = np.zeros((S, S))
        f = spins[:, neighbours[i]].sum(axis=1)
        flipped = states ^ (1 << i)
        if acceptance == "heat-bath":
            up = 1.0 / (1.0 + np.exp(-2.0 * (J * f + h) / temperature))
            is_up = spins[:, i] > 0
            to_up = np.where(is_up, states, flipped)
            to_down = np.where(is_up, flipped, states)
            np.add.at(P, (states, to_up), up)
            np.add.at(P, (states, to_down), 1.0 - up)
        else:
            p = _acceptance(energy[flipped] - energy, temperature, "metropolis")
            np.add.at(P, (states, flipped), p)
            np.add.at(P, (states, states), 1.0 - p)
        return P

    def exchange_kernel(a, b, weight):
        P = np.zeros((S, S))
        differ = spins[:, a] != spins[:, b]
        swapped = np.where(differ, states ^ ((1 << a) | (1 << b)), states)
        p = np.where(differ, _acceptance(energy[swapped] - energy, temperature, acceptance), 0.0)
        np.add.at(P, (states, swapped), weight * p)
        np.add.at(P, (states, states), weight * (1.0 - p))
        return P

    if rule == "glauber" and update == "checkerboard":
        colours = sublattice_colours(kind, size)
        P = np.eye(S)
        for c in range(int(colours.max()) + 1):
            for i in np.flatnonzero(colours == c):
                P = P @ site_kernel(int(i))
        return P
    if update != "random":
        raise ValueError(update)
    if rule == "glauber":
        Q = sum(site_kernel(i) for i in range(n)) / n
    elif rule == "kawasaki":
        # site a (1/N) then direction (1/z); missing neighbours (open edges) do nothing
        Q = np.zeros((S, S))
        for a, b in directed:
            Q += exchange_kernel(a, b, 1.0 / (n * z))
        Q[states, states] += 1.0 - Q.sum(axis=1)
    elif rule == "kawasaki-nonlocal":
        Q = np.zeros((S, S))
        n_up = (spins > 0).sum(axis=1)
        for a in range(n):
            for b in range(n):
                if a == b:
                    continue
                # a up and b down, each chosen uniformly from its list
                pick = (spins[:, a] > 0) & (spins[:, b] < 0)
                weight = np.where(pick, 1.0 / np.maximum(n_up * (n - n_up), 1), 0.0)
                swapped = np.where(pick, states ^ ((1 << a) | (1 << b)), states)
                p = np.where(pick, _acceptance(energy[swapped] - energy, temperature,
                                               acceptance), 0.0)
                np.add.at(Q, (states, swapped), weight * p)
                np.add.at(Q, (states, states), weight * (1.0 - p))
        frozen = (n_up == 0) | (n_up == n)
        Q[states[frozen], states[frozen]] = 1.0
    else:
        raise ValueError(rule)
    return np.linalg.matrix_power(Q, n)
