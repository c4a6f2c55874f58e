"""Exact equilibrium energy per site of the infinite lattices, where it is known.

The ``wall`` length estimator needs the equilibrium energy at the current temperature
(:func:`coarsen.observables.wall_length`); this module gives it wherever an exact result
exists:

* chain, any T, J and h: the transfer-matrix solution (Ising 1925; Kramers & Wannier,
  Phys. Rev. 60, 252 (1941));
* square lattice, h = 0, any sign of J: Onsager, Phys. Rev. 65, 117 (1944); an
  antiferromagnet on this bipartite lattice has the energy of the ferromagnet with |J|;
* triangular ferromagnet, h = 0: Houtappel, Physica 16, 425 (1950);
* T = 0, any field: the ground state of any ferromagnet and of the antiferromagnet on a
  bipartite lattice (Neel or saturated, whichever is lower);
* J = 0 (free spins): ``-h tanh(h / T)`` on every lattice.

Everything else returns None: the cubic lattice at T > 0 (no exact solution; give the value
yourself, for example as ``equilibrium_energy`` in the spec's ``[measure]`` table), a field in
two or three dimensions at T > 0, and the frustrated triangular antiferromagnet.
"""

from __future__ import annotations

import math
from functools import lru_cache

from scipy import integrate, special

from coarsen._validation import finite_float
from coarsen.lattice import LATTICE_KINDS

__all__ = ["equilibrium_energy"]

# Bonds per site (half the coordination number) of each kind.
_BONDS_PER_SITE = {"chain": 1, "square": 2, "triangular": 3, "cubic": 3}

# Above this coupling K = |J|/T the exact energies equal the ground state to double precision
# (corrections ~ exp(-8K) on the square and exp(-12K) on the triangular lattice).
_GROUND_STATE_K = 50.0
# Below this K the triangular energy comes from its high-temperature series (error ~ t^4).
_HIGH_T_K = 1e-4


def equilibrium_energy(kind: str, temperature: float, J: float = 1.0,
                       h: float = 0.0) -> float | None:
    """Exact equilibrium energy per site of the infinite lattice, or None where unknown.

    Parameters
    ----------
    kind : {"chain", "square", "triangular", "cubic"}
        Lattice kind.
    temperature : float
        T >= 0 in units of J/k_B (k_B = 1).
    J : float, default: 1.0
        Coupling (J > 0 ferromagnetic, J < 0 antiferromagnetic).
    h : float, default: 0.0
        Uniform field.

    Returns
    -------
    float or None
        ``<-J sum_bonds s_i s_j - h sum_i s_i> / N`` in equilibrium for N -> infinity, or None
        where no exact result is known (cubic lattice at T > 0, a field in two or three
        dimensions at T > 0, the triangular antiferromagnet).

    Raises
    ------
    TypeError
        If a number is not a number.
    ValueError
        For an unknown kind, a negative or non-finite temperature, or a non-finite J or h.

    Notes
    -----
    The chain uses the largest transfer-matrix eigenvalue in closed form, written with
    logarithms so that it neither overflows nor cancels at low temperature or strong field:
    ``m = sinh(b) / q``, ``<s_i s_(i+1)> = m**2 + (1 - m**2) tanh((ln cosh b - ln q) / 2)``
    with ``b = h/T``, ``q**2 = sinh(b)**2 + exp(-4 J/T)``. The square lattice uses Onsager's
    ``u = -coth 2K [1 + (2/pi)(2 tanh**2 2K - 1) K1(k)]``, ``k = 2 sinh 2K / cosh**2 2K``
    (its limit ``-sqrt 2`` at Tc). The triangular lattice integrates the derivative of
    Houtappel's free energy after doing one of its two integrals in closed form
    (``int_0^(2 pi) ln(P - Q cos t) dt = 2 pi ln((P + sqrt(P**2 - Q**2)) / 2)``), leaving a
    smooth one-dimensional integral for ``scipy.integrate.quad`` (relative error ~1e-12).
    Results are cached.

    Examples
    --------
    >>> round(equilibrium_energy("square", 2.0), 10)
    -1.7455645753
    >>> equilibrium_energy("cubic", 2.0) is None
    True
    >>> equilibrium_energy("cubic", 0.0)
    -3.0
    """
    if kind not in LATTICE_KINDS:
        raise ValueError(f"kind: {kind!r} is not a lattice kind; choose one of "
                         f"{', '.join(LATTICE_KINDS)}")
    T = finite_float(temperature, "temperature")
    if T < 0:
        raise ValueError(f"temperature: {temperature!r} is not a temperature >= 0")
    return _energy(kind, T, finite_float(J, "J"), finite_float(h, "h"))


@lru_cache(maxsize=1024)
def _energy(kind: str, T: float, J: float, h: float) -> float | None:
    if kind == "chain":
        return _chain_ground_state(J, h) if T == 0 else _chain(T, J, h)
    half_z = _BONDS_PER_SITE[kind]
    if J == 0:
        return -abs(h) if T == 0 else -h * math.tanh(h / T)
    frustrated = kind == "triangular" and J < 0
    if frustrated:
        return None
    if T == 0:
        return _ground_state(half_z, J, h)
    if h != 0:
        return None
    if kind == "square":
        return _onsager(abs(J), T)
    if kind == "triangular":
        return _houtappel(J, T)
    return None


def _ground_state(bonds_per_site: int, J: float, h: float) -> float:
    """Ferromagnet: all spins along h. Bipartite antiferromagnet: Neel (-|J| per bond, no field
    energy) or saturated (+|J| per bond, -|h| per site), whichever is lower; every bond is at
    its own minimum in one of the two, so nothing lies lower."""
    if J > 0:
        return -bonds_per_site * J - abs(h)
    return min(-bonds_per_site * abs(J), bonds_per_site * abs(J) - abs(h))


# --------------------------------------------------------------------------------------------
# chain
# --------------------------------------------------------------------------------------------
def _chain_ground_state(J: float, h: float) -> float:
    return _ground_state(1, J, h)


def _log_add(x: float, y: float) -> float:
    """ln(e**x + e**y) without overflow."""
    if x == -math.inf:
        return y
    top = max(x, y)
    return top + math.log1p(math.exp(-abs(x - y)))


def _chain(T: float, J: float, h: float) -> float:
    a, b = J / T, h / T
    ab = abs(b)
    log_cosh = ab + math.log1p(math.exp(-2.0 * ab)) - math.log(2.0)
    if b == 0:
        log_sinh = -math.inf
    else:
        log_sinh = ab + math.log1p(-math.exp(-2.0 * ab)) - math.log(2.0)
    log_q = 0.5 * _log_add(2.0 * log_sinh, -4.0 * a)
    m = math.copysign(math.exp(log_sinh - log_q), b) if b != 0 else 0.0
    one_minus_m2 = math.exp(-4.0 * a - 2.0 * log_q)
    ratio = math.tanh(0.5 * (log_cosh - log_q))  # lambda_- / lambda_+
    neighbour = m * m + one_minus_m2 * ratio
    return -J * neighbour - h * m


# --------------------------------------------------------------------------------------------
# square lattice (Onsager 1944)
# --------------------------------------------------------------------------------------------
_ELLIPK_SERIES = (0.25, 9.0 / 64.0, 25.0 / 256.0, 1225.0 / 16384.0)


def _ellipk_minus_half_pi(m: float) -> float:
    """K(m) - pi/2 (parameter m = k**2), without cancellation at small m."""
    if m < 1e-3:
        return 0.5 * math.pi * sum(c * m ** (n + 1) for n, c in enumerate(_ELLIPK_SERIES))
    return float(special.ellipk(m)) - 0.5 * math.pi


def _onsager(J: float, T: float) -> float:
    K = J / T
    if K > _GROUND_STATE_K:
        return -2.0 * J
    t2 = math.tanh(2.0 * K)
    k = 2.0 * t2 / math.cosh(2.0 * K)  # 2 sinh 2K / cosh^2 2K
    m = k * k
    # 1 + (2/pi)(2 t^2 - 1) K1 = 2 t^2 + (2/pi)(2 t^2 - 1)(K1 - pi/2): no cancellation at high T
    if m >= 1.0:  # exactly at Tc: (2 t^2 - 1) K1 -> 0
        bracket = 2.0 * t2 * t2
    else:
        bracket = 2.0 * t2 * t2 + (2.0 / math.pi) * (2.0 * t2 * t2 - 1.0) * _ellipk_minus_half_pi(m)
    return -J * bracket / t2


# --------------------------------------------------------------------------------------------
# triangular ferromagnet (Houtappel 1950)
# --------------------------------------------------------------------------------------------
def _houtappel(J: float, T: float) -> float:
    """u = -(J / 2 pi) int_0^pi d/dK ln(P + D) da, D = sqrt(P^2 - Q^2), with
    P = c^3 + s^3 - s cos a, Q = 2 s |cos(a/2)|, c = cosh 2K, s = sinh 2K."""
    K = J / T
    if K > _GROUND_STATE_K:
        return -3.0 * J
    if K < _HIGH_T_K:
        # high-temperature series (REFERENCE.md Sect. 11): u/J = -3t - 6t^2 - 12t^3 + O(t^4)
        t = math.tanh(K)
        return -J * (3.0 * t + 6.0 * t * t + 12.0 * t**3)
    c, s = math.cosh(2.0 * K), math.sinh(2.0 * K)
    base = c**3 + s**3
    dbase = 6.0 * c * s * (c + s)

    def integrand(a: float) -> float:
        cos_a = math.cos(a)
        P = base - s * cos_a
        dP = dbase - 2.0 * c * cos_a
        Q = 2.0 * s * abs(math.cos(0.5 * a))
        QdQ = 4.0 * s * c * (1.0 + cos_a)
        D = math.sqrt(max((P - Q) * (P + Q), 0.0))
        if D == 0.0:  # a = 0 exactly at Tc, where (P dP - Q dQ) / D -> 0
            value = dP / P
        else:
            value = (dP + (P * dP - QdQ) / D) / (P + D)
        # the K -> 0 limit -2 cos a integrates to 0; removing it keeps the relative error small
        return value + 2.0 * cos_a

    value, _ = integrate.quad(integrand, 0.0, math.pi, epsabs=0.0, epsrel=1e-10, limit=200)
    return -J * value / (2.0 * math.pi)
