"""Exact equilibrium energies of the infinite lattices against tables and independent forms.

* Square lattice: Onsager, Phys. Rev. 65, 117 (1944), tests/data/square_infinite.csv
  (REFERENCE.md Sect. 1, [V]); u(Tc) = -sqrt 2.
* Triangular ferromagnet: Houtappel, Physica 16, 425 (1950) [M ref],
  tests/data/triangular_energy.csv (REFERENCE.md Sect. 11, [V]); u(Tc) = -2.
* Both also against the independent double-integral / elliptic-integral implementations in
  tests/validation/_exact.py (test code, not imported by the package).
* Chain in a field: the 2 x 2 transfer matrix (Kramers & Wannier, Phys. Rev. 60, 252 (1941)
  [M ref]), u = -d ln(lambda_max)/d(beta) by the Hellmann-Feynman theorem
  d(lambda)/d(beta) = v . (dT/d beta) v for the normalised top eigenvector v (no finite
  differences), evaluated with numpy's eigensolver; h = 0: u = -J tanh(J/T) (Ising 1925).
Tolerances: the tables' printed digits (half a unit of the last digit); 1e-10 between
implementations (quadrature and eigensolver accuracy).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from coarsen.equilibrium import equilibrium_energy
from coarsen.lattice import CRITICAL_TEMPERATURE
from tests.validation import _exact
from tests.validation._equilibrium import load_table


def _printed_digits(name: str, column: str) -> list[int]:
    """Decimals printed for each row of a column of tests/data/<name>.csv."""
    from tests.validation._equilibrium import DATA_DIR

    lines = [ln for ln in (DATA_DIR / f"{name}.csv").read_text().splitlines()
             if ln.strip() and not ln.startswith("#")]
    j = lines[0].split(",").index(column)
    return [len(row.split(",")[j].split(".")[1]) if "." in row.split(",")[j] else 0
            for row in lines[1:]]


@pytest.mark.parametrize("J", [1.0, -1.0])
def test_square_lattice_matches_onsager_table(J):
    """For J < 0 the bipartite square lattice has the ferromagnet's energy (gauge s -> -s on
    one sublattice)."""
    table = load_table("square_infinite")
    digits = _printed_digits("square_infinite", "u")
    for T, u, d in zip(table["T"], table["u"], digits):
        assert equilibrium_energy("square", T, J=J) == pytest.approx(u, abs=0.5 * 10.0**-d)
    assert equilibrium_energy("square", CRITICAL_TEMPERATURE["square"]) == pytest.approx(
        -math.sqrt(2.0), abs=1e-12)


def test_triangular_ferromagnet_matches_houtappel_table():
    table = load_table("triangular_energy")
    digits = _printed_digits("triangular_energy", "u")
    for T, u, d in zip(table["T"], table["u"], digits):
        assert equilibrium_energy("triangular", T) == pytest.approx(u, abs=0.5 * 10.0**-d)
    assert equilibrium_energy("triangular", CRITICAL_TEMPERATURE["triangular"]) == \
        pytest.approx(-2.0, abs=1e-10)


@pytest.mark.parametrize("T", [0.8, 1.7, 2.1, 2.3, 2.9, 5.0, 40.0])
def test_against_the_validation_implementations(T):
    """Away from Tc (where _exact.onsager_energy is 0 * inf), and with J scaling e(T, J) =
    J e(T / J, 1)."""
    assert equilibrium_energy("square", T) == pytest.approx(_exact.onsager_energy(T), abs=1e-10)
    hout = _exact.houtappel_triangular_energy(T, n=1024)
    assert equilibrium_energy("triangular", T) == pytest.approx(hout, abs=1e-10)
    assert equilibrium_energy("square", 2 * T, J=2.0) == pytest.approx(
        2 * equilibrium_energy("square", T), rel=1e-12)


def _transfer_matrix_energy(T: float, J: float, h: float) -> float:
    beta = 1.0 / T
    s = np.array([1.0, -1.0])
    exponent = J * np.outer(s, s) + 0.5 * h * (s[:, None] + s[None, :])
    shift = exponent.max()  # scale out exp(beta * max) so nothing overflows
    matrix = np.exp(beta * (exponent - shift))
    values, vectors = np.linalg.eigh(matrix)
    v = vectors[:, -1]
    derivative = (exponent - shift) * matrix  # d/d beta of the scaled matrix
    return -(v @ derivative @ v) / values[-1] - shift


@pytest.mark.parametrize("T,J,h", [(1.0, 1.0, 0.0), (0.4, 1.0, 0.0), (1.0, 1.0, 0.5),
                                   (2.0, -1.0, 0.3), (0.5, -1.0, 3.0), (0.3, 1.0, -0.2),
                                   (1.0, 0.0, 0.7), (5.0, 2.0, 1.0), (0.05, -1.0, 1.0),
                                   (0.05, 1.0, 0.01)])
def test_chain_in_a_field_matches_the_transfer_matrix(T, J, h):
    assert equilibrium_energy("chain", T, J, h) == pytest.approx(
        _transfer_matrix_energy(T, J, h), abs=1e-10)
    if h == 0:
        assert equilibrium_energy("chain", T, J) == pytest.approx(-J * math.tanh(J / T),
                                                                   abs=1e-14)


def test_chain_matches_a_long_ring():
    """The periodic ring's exact energy (tests/validation/_exact.ring_energy, transfer matrix
    trace) tends to the chain's; at N = 4000 and T = 2 the difference t**N is far below 1e-15."""
    assert equilibrium_energy("chain", 2.0) == pytest.approx(_exact.ring_energy(4000, 2.0),
                                                             abs=1e-14)


def test_ground_states():
    """T = 0: ferromagnets align with the field; bipartite antiferromagnets take the lower of
    Neel (-|J| per bond) and saturated (|J| per bond, -|h| per site)."""
    assert equilibrium_energy("chain", 0.0) == -1.0
    assert equilibrium_energy("square", 0.0) == -2.0
    assert equilibrium_energy("triangular", 0.0) == -3.0
    assert equilibrium_energy("cubic", 0.0) == -3.0
    assert equilibrium_energy("square", 0.0, J=1.0, h=0.5) == -2.5
    assert equilibrium_energy("cubic", 0.0, J=-1.0, h=1.0) == -3.0
    assert equilibrium_energy("cubic", 0.0, J=-1.0, h=7.0) == -4.0
    assert equilibrium_energy("chain", 0.0, J=-1.0, h=3.0) == -2.0
    assert equilibrium_energy("square", 0.0, J=-2.0) == -4.0
    # the low-temperature limits reach them
    assert equilibrium_energy("square", 0.05) == pytest.approx(-2.0, abs=1e-12)
    assert equilibrium_energy("triangular", 0.2) == pytest.approx(-3.0, abs=1e-12)
    assert equilibrium_energy("chain", 0.01, J=-1.0, h=3.0) == pytest.approx(-2.0, abs=1e-12)


def test_free_spins():
    assert equilibrium_energy("cubic", 2.0, J=0.0, h=1.0) == pytest.approx(-math.tanh(0.5))
    assert equilibrium_energy("triangular", 0.0, J=0.0, h=-1.0) == -1.0


def test_unknown_cases_return_none():
    assert equilibrium_energy("cubic", 2.0) is None
    assert equilibrium_energy("square", 2.0, h=0.1) is None
    assert equilibrium_energy("cubic", 3.0, J=-1.0) is None
    assert equilibrium_energy("triangular", 2.0, J=-1.0) is None
    assert equilibrium_energy("triangular", 0.0, J=-1.0) is None


def test_high_temperature_is_smooth():
    """No loss of precision far above Tc: the square lattice's high-temperature series
    u = -2 (t + 2 t**3) + O(t**5) (t = tanh K; one plaquette per site), and the triangular
    series -3t - 6t**2 - 12t**3 (REFERENCE.md Sect. 11). The truncated series are off by
    O(t**5) and O(t**4); allowed: 100 t**5 and 100 t**4 (plus double-precision rounding)."""
    for T in (1e2, 1e3, 1e5, 1e8):
        t = math.tanh(1.0 / T)
        assert equilibrium_energy("square", T) == pytest.approx(
            -2 * (t + 2 * t**3), abs=100 * t**5 + 1e-15 * t)
        assert equilibrium_energy("triangular", T) == pytest.approx(
            -(3 * t + 6 * t * t + 12 * t**3), abs=100 * t**4 + 1e-15 * t)


def test_bad_input_names_the_parameter():
    with pytest.raises(ValueError, match="kind: 'hexagonal' is not a lattice kind"):
        equilibrium_energy("hexagonal", 1.0)
    with pytest.raises(ValueError, match="temperature: -1"):
        equilibrium_energy("square", -1.0)
    with pytest.raises(ValueError, match="temperature: inf"):
        equilibrium_energy("square", math.inf)
    with pytest.raises(TypeError, match="temperature: 'warm'"):
        equilibrium_energy("square", "warm")
    with pytest.raises(TypeError, match="J: None"):
        equilibrium_energy("square", 1.0, J=None)
    with pytest.raises(ValueError, match="h: nan"):
        equilibrium_energy("square", 1.0, h=math.nan)
