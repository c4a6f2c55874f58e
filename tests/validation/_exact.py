"""Exact results computed from their published formulas, for the validation tests.

Nothing here calls the engine: the bond lists, enumerations and closed forms are written
from the definitions (``shared/REFERENCE.md``, ``shared/DESIGN.md``) so that a wrong
neighbour rule or energy in the engine cannot leak into the expected values.

Contents
--------
* Bond lists of the four lattice kinds (periodic or open) and exhaustive enumeration of
  small lattices, summarised as a table of (bond sum per direction, M, staggered M) classes
  with their multiplicities; Boltzmann probabilities of any function of those.
* The 3x3x3 simple-cubic torus (2**27 states) by a layer decomposition.
* Onsager's energy and Yang's magnetization of the infinite square lattice; Kaufman's exact
  partition function of the L x L torus; Houtappel's triangular-lattice energy.
* Glauber's exact chain dynamics (closed forms and, as an independent check, the ODE
  hierarchy).

Exact one-sweep transition matrices of tiny lattices are in ``_transitions.py``.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from scipy import integrate, special

__all__ = [
    "EnumeratedLattice",
    "bond_pairs",
    "bond_sums",
    "cubic333_counts",
    "enumerate_lattice",
    "glauber_autocorrelation",
    "glauber_correlation",
    "glauber_correlation_ode",
    "glauber_wall_density",
    "houtappel_triangular_energy",
    "kaufman_energy",
    "kaufman_specific_heat",
    "onsager_energy",
    "ring_energy",
    "staggering_signs",
    "state_columns",
    "sublattice_sweep_class",
    "yang_magnetization",
]

# Forward bond offsets in (x, y, z) order: each bond once (REFERENCE.md Sect. 8; the
# triangular lattice as a sheared square grid with the extra diagonal (1, 1)).
FORWARD = {
    "chain": ((1,),),
    "square": ((1, 0), (0, 1)),
    "triangular": ((1, 0), (0, 1), (1, 1)),
    "cubic": ((1, 0, 0), (0, 1, 0), (0, 0, 1)),
}


# ------------------------------------------------------------------------------------------
# bonds and enumeration
# ------------------------------------------------------------------------------------------
def _site_coordinates(size):
    """(N, d) integer coordinates in (x, y, z) order of the flat C-order sites of shape
    ``size[::-1]`` (x fastest), the layout of ``spins[r, z, y, x]``."""
    d = len(size)
    n = math.prod(size)
    flat = np.arange(n)
    coords = np.empty((n, d), dtype=np.int64)
    rest = flat
    for axis in range(d):
        coords[:, axis] = rest % size[axis]
        rest = rest // size[axis]
    return coords


def bond_pairs(kind: str, size, periodic: bool = True):
    """The bonds of a lattice, grouped by direction.

    Returns
    -------
    list of (i, j) arrays
        One pair of int64 arrays of flat site indices per forward direction; each bond
        appears once. Open boundaries drop bonds leaving the box.
    """
    size = tuple(int(n) for n in size)
    coords = _site_coordinates(size)
    strides = np.cumprod((1,) + size[:-1])
    out = []
    for off in FORWARD[kind]:
        target = coords + np.array(off)
        if periodic:
            keep = np.ones(len(coords), dtype=bool)
            target = target % np.array(size)
        else:
            keep = np.all(target < np.array(size), axis=1)
        i = np.flatnonzero(keep)
        j = (target[keep] * strides).sum(axis=1)
        out.append((i.astype(np.int64), j.astype(np.int64)))
    return out


def staggering_signs(size) -> np.ndarray:
    """(-1)**(x + y + z) of every flat site, int64 (the Neel sign field)."""
    return 1 - 2 * (_site_coordinates(tuple(size)).sum(axis=1) % 2)


def bond_sums(spins_flat: np.ndarray, pairs) -> np.ndarray:
    """Sum of s_i s_j over the bonds of each direction: int64 of shape (n, directions)."""
    s = spins_flat.astype(np.int64)
    return np.stack([(s[:, i] * s[:, j]).sum(axis=1) for i, j in pairs], axis=1)


@dataclass(frozen=True)
class EnumeratedLattice:
    """All 2**N states of a small lattice, grouped into classes.

    ``classes`` has columns (bond sum of direction 0, ..., direction d-1, M, staggered M);
    ``multiplicity[c]`` is the number of states in class c. Energies are
    ``E = -J * sum(bonds) - h * M`` (REFERENCE.md Sect. 0).
    """

    kind: str
    size: tuple
    periodic: bool
    classes: np.ndarray
    multiplicity: np.ndarray

    @property
    def n_sites(self) -> int:
        return math.prod(self.size)

    @property
    def directions(self) -> int:
        return self.classes.shape[1] - 2

    def bond_total(self) -> np.ndarray:
        return self.classes[:, : self.directions].sum(axis=1)

    def magnetization(self) -> np.ndarray:
        return self.classes[:, self.directions]

    def staggered(self) -> np.ndarray:
        return self.classes[:, self.directions + 1]

    def energy(self, J=1.0, h=0.0) -> np.ndarray:
        """Total energy of each class."""
        return -J * self.bond_total() - h * self.magnetization()

    def log_weights(self, temperature, J=1.0, h=0.0, mask=None) -> np.ndarray:
        """ln(multiplicity * exp(-E/T)) of each class (-inf outside ``mask``)."""
        lw = np.log(self.multiplicity.astype(float)) - self.energy(J, h) / temperature
        if mask is not None:
            lw = np.where(mask, lw, -np.inf)
        return lw

    def probabilities(self, temperature, J=1.0, h=0.0, mask=None) -> np.ndarray:
        """Boltzmann probability of each class (restricted to ``mask``, renormalised)."""
        lw = self.log_weights(temperature, J, h, mask)
        lw = lw - lw.max()
        w = np.exp(lw)
        return w / w.sum()

    def distribution(self, key, temperature, J=1.0, h=0.0, mask=None):
        """Exact distribution of ``key(self)``: (unique keys (K, k) int64, probabilities (K,)).

        ``key`` maps the enumeration to an int64 array of shape (classes, k); the same key
        function applied to sampled configurations gives the observed categories.
        """
        p = self.probabilities(temperature, J, h, mask)
        keys = np.asarray(key(self), dtype=np.int64).reshape(len(p), -1)
        uniq, inverse = np.unique(keys, axis=0, return_inverse=True)
        prob = np.bincount(inverse.ravel(), weights=p, minlength=len(uniq))
        keep = prob > 0
        return uniq[keep], prob[keep]

    def mean(self, values, temperature, J=1.0, h=0.0, mask=None) -> float:
        """Exact Boltzmann average of a per-class quantity."""
        return float(np.dot(self.probabilities(temperature, J, h, mask), values))


@functools.lru_cache(maxsize=None)
def state_columns(kind: str, size: tuple, periodic: bool = True) -> np.ndarray:
    """Per-state rows (bond sum of each direction, M, staggered M) of all 2**N states.

    State ``k`` has spin ``s_i = 1 - 2 * ((k >> i) & 1)`` at flat site i (bit set = down), so
    ``k = 0`` is all up. Brute force, at most 20 sites.
    """
    size = tuple(int(n) for n in size)
    n = math.prod(size)
    if n > 20:
        raise ValueError(f"state_columns: {n} sites is too many for brute force")
    states = np.arange(2**n, dtype=np.int64)
    spins = (1 - 2 * ((states[:, None] >> np.arange(n)) & 1)).astype(np.int8)
    bonds = bond_sums(spins, bond_pairs(kind, size, periodic))
    m = spins.sum(axis=1, dtype=np.int64)
    ms = (spins.astype(np.int64) * staggering_signs(size)).sum(axis=1)
    table = np.column_stack([bonds, m, ms])
    table.setflags(write=False)
    return table


def sublattice_colours(kind: str, size) -> np.ndarray:
    """Colour of every flat site in a sublattice sweep: (x + y + z) mod 2, or (x + y) mod 3 on
    the triangular lattice (the colouring of shared/DESIGN.md / coarsen's sublattice update)."""
    coords = _site_coordinates(tuple(size))
    return coords.sum(axis=1) % (3 if kind == "triangular" else 2)


@functools.lru_cache(maxsize=None)
def sublattice_sweep_class(kind: str, size: tuple, periodic: bool, acceptance: str,
                           start: int = 0, J: float = 1.0, h: float = 0.0) -> np.ndarray:
    """The states reachable from state ``start`` by sublattice sweeps (colour 0, then 1, then 2).

    A sweep moves with positive probability between the states reachable by flipping, at
    each site in the sweep order, either nothing or (if its flip probability is positive)
    the spin; a flip has probability 1 when it is forced (Metropolis with dE <= 0). Every
    state is recurrent (the Boltzmann distribution is stationary and positive everywhere),
    so the reachable set is the closed class of ``start``. For 0 < T < inf the class does
    not depend on T: heat-bath probabilities lie strictly in (0, 1), Metropolis ones are 1
    for dE <= 0 and in (0, 1) otherwise. Returns a boolean mask over the 2**N states.
    """
    size = tuple(int(n) for n in size)
    n = math.prod(size)
    S = 2**n
    states = np.arange(S, dtype=np.int64)
    spins = 1 - 2 * ((states[:, None] >> np.arange(n)) & 1)
    neighbours = [[] for _ in range(n)]
    for i, j in bond_pairs(kind, size, periodic):
        for a, b in zip(i, j):
            neighbours[a].append(b)
            neighbours[b].append(a)
    colours = sublattice_colours(kind, size)
    order = [i for c in range(int(colours.max()) + 1) for i in range(n) if colours[i] == c]
    forced = np.zeros((n, S), dtype=bool)  # the flip happens with probability 1
    for i in range(n):
        dE = 2 * spins[:, i] * (J * spins[:, neighbours[i]].sum(axis=1) + h)
        if acceptance == "metropolis":
            forced[i] = dE <= 0
        elif acceptance != "heat-bath":
            raise ValueError(acceptance)

    def sweep(mask):
        for i in order:
            flipped = np.zeros(S, dtype=bool)
            flipped[states[mask] ^ (1 << i)] = True
            mask = (mask & ~forced[i]) | flipped
        return mask

    reach = np.zeros(S, dtype=bool)
    reach[start] = True
    frontier = reach.copy()
    while frontier.any():
        new = sweep(frontier) & ~reach
        reach |= new
        frontier = new
    reach.setflags(write=False)
    return reach


@functools.lru_cache(maxsize=None)
def enumerate_lattice(kind: str, size: tuple, periodic: bool = True,
                      restrict: tuple | None = None) -> EnumeratedLattice:
    """Enumerate every state of a lattice of at most 20 sites (brute force, NumPy).

    ``restrict = (acceptance, start, J, h)`` keeps only the closed class of state ``start``
    under sublattice sweeps with that acceptance and couplings (:func:`sublattice_sweep_class`).
    """
    size = tuple(int(n) for n in size)
    table = state_columns(kind, size, periodic)
    if restrict is not None:
        table = table[sublattice_sweep_class(kind, size, periodic, *restrict)]
    classes, counts = np.unique(table, axis=0, return_counts=True)
    return EnumeratedLattice(kind, size, periodic, classes, counts.astype(np.int64))


@functools.lru_cache(maxsize=None)
def cubic333_counts() -> tuple[np.ndarray, np.ndarray]:
    """Exact joint density of states g(B, M) of the 3x3x3 simple-cubic torus.

    B = sum over the 81 bonds of s_i s_j, M = sum of the 27 spins. The cube is three periodic
    3x3 square layers a, b, c stacked periodically along z, so
    ``B = b(a) + b(b) + b(c) + <a,b> + <b,c> + <c,a>`` with b(.) the 18 in-layer bonds and
    <.,.> the 9 vertical bonds between two layers; the 512**3 = 2**27 combinations are
    counted layer by layer with integer bincounts.

    Returns
    -------
    (B values, M values, counts) as int64 arrays over the support.
    """
    layer = enumerate_layer_3x3()
    intra, mag, spins = layer
    inter = spins.astype(np.int64) @ spins.T.astype(np.int64)  # <a, b>
    nb, nm = 81, 27
    width_m = 2 * nm + 1
    counts = np.zeros((2 * nb + 1) * width_m, dtype=np.int64)
    bc_bonds = intra[:, None] + intra[None, :] + inter  # b(b) + b(c) + <b, c>
    bc_mag = mag[:, None] + mag[None, :]
    for a in range(len(intra)):
        total = bc_bonds + intra[a] + inter[a][:, None] + inter[a][None, :]
        m = bc_mag + mag[a]
        counts += np.bincount(((total + nb) * width_m + (m + nm)).ravel(),
                              minlength=len(counts))
    grid = counts.reshape(2 * nb + 1, width_m)
    b_idx, m_idx = np.nonzero(grid)
    return b_idx - nb, m_idx - nm, grid[b_idx, m_idx]


def enumerate_layer_3x3():
    """In-layer bond sum, magnetization and spins of the 512 states of the 3x3 torus."""
    n = 9
    states = np.arange(2**n, dtype=np.int64)
    spins = (1 - 2 * ((states[:, None] >> np.arange(n)) & 1)).astype(np.int8)
    intra = bond_sums(spins, bond_pairs("square", (3, 3), True)).sum(axis=1)
    return intra, spins.sum(axis=1, dtype=np.int64), spins


def ring_energy(n_sites: int, temperature: float) -> float:
    """Energy per spin of the periodic Ising ring (Ising 1925; transfer matrix):
    ``u = -(t + t**(N-1)) / (1 + t**N)``, t = tanh(1/T) (REFERENCE.md Sect. 8)."""
    t = math.tanh(1.0 / temperature)
    return -(t + t ** (n_sites - 1)) / (1.0 + t**n_sites)


# ------------------------------------------------------------------------------------------
# square lattice: Onsager, Yang, Kaufman
# ------------------------------------------------------------------------------------------
def onsager_energy(temperature: float) -> float:
    """Energy per spin of the infinite square lattice, Onsager, Phys. Rev. 65, 117 (1944):
    ``u = -coth 2K [1 + (2/pi)(2 tanh^2 2K - 1) K1(k)]``, ``k = 2 sinh 2K / cosh^2 2K``."""
    K = 1.0 / temperature
    k = 2.0 * math.sinh(2 * K) / math.cosh(2 * K) ** 2
    K1 = special.ellipk(k * k)
    t2 = math.tanh(2 * K)
    return -(1.0 / t2) * (1.0 + (2.0 / math.pi) * (2.0 * t2**2 - 1.0) * K1)


def yang_magnetization(temperature: float) -> float:
    """Spontaneous magnetization, Yang, Phys. Rev. 85, 808 (1952): (1 - sinh(2K)^-4)^(1/8)."""
    x = 1.0 - math.sinh(2.0 / temperature) ** -4
    return x ** 0.125 if x > 0 else 0.0


def _kaufman_log_z_and_derivative(L: int, K: float):
    """ln Z and d ln Z / dK of the L x L torus, Kaufman, Phys. Rev. 76, 1232 (1949) [M ref],
    in the form of REFERENCE.md Sect. 1 (as used by Ferdinand & Fisher, Phys. Rev. 185, 832
    (1969) [M ref]):

    ``Z = 1/2 (2 sinh 2K)^(L^2/2) (Z1 + Z2 + Z3 + Z4)``,
    ``Z1, Z2 = prod_{r=0}^{L-1} 2 cosh, 2 sinh (L gamma_{2r+1} / 2)``,
    ``Z3, Z4 = prod_{r=0}^{L-1} 2 cosh, 2 sinh (L gamma_{2r} / 2)``,
    ``cosh gamma_l = cosh 2K coth 2K - cos(pi l / L)`` (l >= 1), ``gamma_0 = 2K + ln tanh K``.

    Evaluated in float64 with signed log-sums (only gamma_0 can be negative, which makes Z4
    negative above Tc); the derivative is analytic.
    """
    s2, c2 = math.sinh(2 * K), math.cosh(2 * K)
    base = c2 * c2 / s2
    dbase = 2.0 * c2 * (1.0 - 1.0 / (s2 * s2))  # d/dK [cosh 2K coth 2K]
    l_odd = 2 * np.arange(L) + 1
    l_even = 2 * np.arange(L)

    def gammas(ls):
        g = np.empty(len(ls))
        dg = np.empty(len(ls))
        for n, l in enumerate(ls):
            if l == 0:
                g[n] = 2 * K + math.log(math.tanh(K))
                dg[n] = 2.0 + 2.0 / s2
            else:
                c = base - math.cos(math.pi * l / L)
                g[n] = math.acosh(c)
                dg[n] = dbase / math.sqrt(c * c - 1.0)
        return g, dg

    logs, signs, derivs = [], [], []
    for ls in (l_odd, l_even):
        g, dg = gammas(ls)
        x = L * g / 2.0
        # 2 cosh x and 2 sinh x in logs: ln(2 cosh x) = |x| + ln(1 + e^{-2|x|})
        ax = np.abs(x)
        log_cosh = ax + np.log1p(np.exp(-2 * ax))
        log_sinh = ax + np.log(-np.expm1(-2 * ax)) if np.all(ax > 0) else None
        logs.append(log_cosh.sum())
        signs.append(1.0)
        derivs.append(np.sum((L / 2.0) * np.tanh(x) * dg))
        if log_sinh is None:  # gamma_0 = 0 exactly (K = Kc): Z4 = 0
            logs.append(-np.inf)
            signs.append(0.0)
            derivs.append(0.0)
        else:
            logs.append(log_sinh.sum())
            signs.append(float(np.prod(np.sign(x))))
            derivs.append(np.sum((L / 2.0) * dg / np.tanh(x)))
    logs = np.array(logs)
    top = logs.max()
    w = np.array(signs) * np.exp(logs - top)
    total = w.sum()
    log_z = math.log(0.5) + (L * L / 2.0) * math.log(2 * s2) + top + math.log(total)
    dlog_z = L * L * (c2 / s2) + float(np.dot(w, derivs)) / total
    return log_z, dlog_z


def kaufman_energy(L: int, temperature: float) -> float:
    """Exact energy per spin of the L x L periodic square lattice, ``u = -(1/N) dlnZ/dK``."""
    return -_kaufman_log_z_and_derivative(L, 1.0 / temperature)[1] / (L * L)


def kaufman_specific_heat(L: int, temperature: float, dk: float = 1e-5) -> float:
    """Exact specific heat per spin ``c = -K^2 du/dK`` of the L x L torus (central difference
    of the analytic u; truncation error ~ dk^2 u''' well below 1e-6 here)."""
    K = 1.0 / temperature
    up = -_kaufman_log_z_and_derivative(L, K + dk)[1] / (L * L)
    dn = -_kaufman_log_z_and_derivative(L, K - dk)[1] / (L * L)
    return -K * K * (up - dn) / (2 * dk)


# ------------------------------------------------------------------------------------------
# triangular lattice: Houtappel
# ------------------------------------------------------------------------------------------
def houtappel_triangular_energy(temperature: float, n: int = 512) -> float:
    """Energy per spin of the infinite triangular lattice from Houtappel's free energy,
    Houtappel, Physica 16, 425 (1950) [M ref; formula as in REFERENCE.md Sect. 11]:

    ``-beta f = ln 2 + (1/8 pi^2) int int ln[c^3 + s^3 - s (cos a + cos b + cos(a + b))]``
    over [0, 2 pi]^2, c = cosh 2K, s = sinh 2K, so ``u = -d(-beta f)/dK``. The integrand is
    smooth and periodic away from Tc, so the n x n trapezoid (midpoint) rule converges
    exponentially.
    """
    K = 1.0 / temperature
    c, s = math.cosh(2 * K), math.sinh(2 * K)
    a = (np.arange(n) + 0.5) * (2 * math.pi / n)
    S = np.cos(a)[:, None] + np.cos(a)[None, :] + np.cos(a[:, None] + a[None, :])
    X = c**3 + s**3 - s * S
    dX = 2.0 * (3 * c * c * s + 3 * s * s * c - c * S)
    # (1/8 pi^2) * (2 pi)^2 * mean = mean / 2
    return -0.5 * float(np.mean(dX / X))


# ------------------------------------------------------------------------------------------
# Glauber chain
# ------------------------------------------------------------------------------------------
def _glauber_parameters(temperature):
    if temperature == 0:
        return 1.0, 1.0
    eta = math.tanh(1.0 / temperature)
    return eta, 2 * eta / (1 + eta * eta)  # gamma = tanh(2J/T)


def glauber_correlation(k: int, t: float, temperature: float) -> float:
    """G_k(t) = <s_i s_{i+k}> of the Glauber chain after a quench from T = inf (image-method
    solution of Glauber, J. Math. Phys. 4, 294 (1963), as in REFERENCE.md Sect. 2 [D, V]):

    ``G_k(t) = eta^k - e^{-2t} sum_{l>=1} eta^l [I_{k-l}(2 gamma t) - I_{k+l}(2 gamma t)]``,
    eta = tanh(J/T), gamma = tanh(2J/T) (eta = gamma = 1 at T = 0). Evaluated with the
    exponentially scaled ``scipy.special.ive``; time t in units of Glauber's rate alpha = 1.
    """
    eta, gamma = _glauber_parameters(temperature)
    if t == 0:
        return 1.0 if k == 0 else 0.0
    x = 2 * gamma * t
    lmax = int(x + 40 * math.sqrt(x + 1) + 60)
    l = np.arange(1, lmax + 1)
    scale = math.exp(x - 2 * t)  # e^{-2t} I_n(x) = ive(n, x) e^{x - 2t}
    terms = eta**l * (special.ive(np.abs(k - l), x) - special.ive(k + l, x))
    return eta**k - scale * float(terms.sum())


def glauber_wall_density(t: float, temperature: float) -> float:
    """Domain-wall density rho(t) = (1 - G_1(t)) / 2 (Glauber 1963)."""
    return 0.5 * (1.0 - glauber_correlation(1, t, temperature))


def glauber_autocorrelation(t: float, temperature: float) -> float:
    """Spin autocorrelation A(t) = <s_i(0) s_i(t)> = e^{-t} I_0(gamma t) from an uncorrelated
    start (Glauber 1963; REFERENCE.md Sect. 2 [D, V])."""
    _, gamma = _glauber_parameters(temperature)
    return float(special.ive(0, gamma * t) * math.exp(gamma * t - t))


def glauber_correlation_ode(times, temperature: float, kmax: int = 1000) -> np.ndarray:
    """G_k(t), k = 0..kmax, by integrating Glauber's closed hierarchy
    ``dG_k/dt = -2 G_k + gamma (G_{k-1} + G_{k+1})``, G_0 = 1, G_k(0) = 0 (k >= 1), truncated
    with G_{kmax+1} = 0; an independent check of the closed form. Returns (len(times), kmax+1).
    """
    _, gamma = _glauber_parameters(temperature)

    def rhs(_t, g):
        full = np.concatenate(([1.0], g, [0.0]))
        return -2.0 * full[1:-1] + gamma * (full[:-2] + full[2:])

    sol = integrate.solve_ivp(rhs, (0.0, max(times)), np.zeros(kmax), t_eval=sorted(times),
                              method="RK45", rtol=1e-11, atol=1e-13)
    out = np.ones((len(times), kmax + 1))
    out[:, 1:] = sol.y.T
    return out
