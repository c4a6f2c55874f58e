"""Length estimators on patterns with a known length scale.

* Square-wave stripes of period P: along the stripe normal C(d) = 1 - 4 d / P for
  0 <= d <= P / 2 (the fraction of pairs straddling a wall is 2 d / P; exact on the lattice
  for integer d and linear in between), so its zero is at P / 4 and its half at P / 8; the
  wall density gives e - e_0 = 4 / P per site, hence ``wall`` = P / 4; the Fourier series of
  a square wave has only odd harmonics k_n = 2 pi n / P with (discrete) weights
  1 / sin^2(k_n / 2), which fixes ``sk_moment``.
* A Gaussian random field thresholded at 0: Sheppard's arcsine law (W. F. Sheppard, Phil.
  Trans. R. Soc. A 192, 101 (1899); also Van Vleck & Middleton, Proc. IEEE 54, 2 (1966)
  [M refs, recalled from memory]) gives <sgn(phi_0) sgn(phi_d)> = (2/pi) arcsin rho(d)
  exactly, with rho the field's correlation, known exactly on the lattice for a field made by
  filtering white noise. Tolerances: 5 standard errors of the replica mean.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from coarsen.lattice import Lattice
from coarsen.observables import (
    ESTIMATORS,
    MeasurementGrid,
    correlation,
    correlation_crossing,
    measure,
    moment_length,
    wall_length,
)

Z = 5.0  # standard errors


def _stripes(lattice, period, axis_xyz=0):
    coordinate = np.indices(lattice.shape)[::-1][axis_xyz]
    return np.where(coordinate % period < period // 2, 1, -1).astype(np.int8)[np.newaxis]


def _square_wave_moment(period: int) -> float:
    n = np.arange(1, period, 2)  # odd harmonics
    k = 2 * np.pi * n / period
    k = k[k <= np.pi + 1e-12]
    weight = 1.0 / np.sin(k / 2) ** 2
    return 2 * np.pi * weight.sum() / (k * weight).sum()


@pytest.mark.parametrize("period", [8, 12, 20, 40])
def test_chain_stripes(period):
    """On a chain C(r) is C along the normal: corr_zero = P/4, corr_half = P/8 exactly;
    wall = P/4 at T = 0 (e_0 = -1); sk_moment from the square wave's Fourier series."""
    lattice = Lattice("chain", (120,))
    spins = _stripes(lattice, period)
    grid = MeasurementGrid(lattice, precision="double")
    m = measure(spins, lattice, grid, temperature=0.0)
    lengths = dict(zip(ESTIMATORS, m.length[:, 0]))
    assert lengths["corr_zero"] == pytest.approx(period / 4, abs=1e-10)
    assert lengths["corr_half"] == pytest.approx(period / 8, abs=1e-10)
    assert lengths["wall"] == pytest.approx(period / 4, abs=1e-10)
    assert lengths["sk_moment"] == pytest.approx(_square_wave_moment(period), rel=1e-10)
    assert m.domain_count[0] == 120 // period * 2


def _torus_lengths(lattice):
    """Shortest-image |d| of every displacement (index d mod L) of a square or cubic torus."""
    folded = [np.minimum(np.arange(n), n - np.arange(n)).astype(float) for n in lattice.shape]
    return np.sqrt(sum(g**2 for g in np.meshgrid(*folded, indexing="ij")))


def _bin_means(values, lengths, centres):
    """Mean of ``values`` over the displacements whose rounded length is each centre."""
    bins = np.floor(lengths + 0.5 + 1e-9)
    return np.array([values[bins == c].mean() for c in centres])


@pytest.mark.parametrize("kind", ["square", "cubic"])
def test_stripes_in_higher_dimensions(kind):
    """Stripes along x: C(d) = tri(d_x) = 1 - 4 |d_x| / P (folded with period P) whatever d_y,
    d_z, so the radial average is the mean of tri(d_x) over each bin, whose first zero lies
    beyond P/4 (along the stripes C stays 1); wall = P/4 still, since e - e_0 =
    2 (2 L / P walls) L^(d-1) / N = 4 / P."""
    period = 8
    size = (32, 32) if kind == "square" else (16, 16, 16)
    lattice = Lattice(kind, size)
    spins = _stripes(lattice, period)
    grid = MeasurementGrid(lattice, precision="double")
    m = measure(spins, lattice, grid, temperature=0.0)
    c = correlation(spins, lattice)[0]
    along_x = c[(0,) * (lattice.dimension - 1) + (slice(0, 5),)]
    np.testing.assert_allclose(along_x, 1 - 4 * np.arange(5) / period, atol=1e-12)
    dx = np.broadcast_to(np.arange(lattice.size[0]), lattice.shape)
    tri = 1 - 4 * np.abs((dx + period / 2) % period - period / 2) / period
    expected = _bin_means(tri, _torus_lengths(lattice), grid.r)
    np.testing.assert_allclose(m.correlation[0], expected, atol=1e-12)
    zero = correlation_crossing(grid.r, expected, 0.0)[0]
    assert m.length[ESTIMATORS.index("corr_zero"), 0] == pytest.approx(zero, abs=1e-10)
    assert zero > period / 4
    assert m.length[ESTIMATORS.index("wall"), 0] == pytest.approx(period / 4, abs=1e-10)


def _gaussian_field_spins(rng, lattice, width, replicas):
    """sgn(phi) for phi = white noise filtered by exp(-width^2 |k|^2 / 2) (a Gaussian kernel
    of standard deviation ``width``); returns the spins, rho(d) (the field's exact correlation
    on the torus: inverse FFT of the filter's power, normalised) and |k| of the grid."""
    k = np.sqrt(sum(g**2 for g in np.meshgrid(
        *[2 * np.pi * np.fft.fftfreq(n) for n in lattice.shape], indexing="ij")))
    power = np.exp(-(width * k) ** 2)
    noise = rng.standard_normal((replicas, *lattice.shape))
    field = np.fft.ifftn(np.fft.fftn(noise, axes=(1, 2)) * np.sqrt(power), axes=(1, 2)).real
    rho = np.fft.ifftn(power).real
    rho /= rho.flat[0]
    return np.where(field > 0, 1, -1).astype(np.int8), rho, k


def test_thresholded_gaussian_field():
    """Radial C, corr_half and sk_moment of a clipped Gaussian field agree with Sheppard's
    law C(d) = (2/pi) arcsin rho(d), averaged over each bin, and with its transform
    E S(k) = sum_d E C(d) exp(-i k d), averaged over each shell. Tolerance: Z standard errors
    of the replica mean (16 replicas, 128 x 128, kernel width 3)."""
    rng = np.random.default_rng(2026)
    lattice = Lattice("square", (128, 128))
    width, replicas = 3.0, 16
    spins, rho, k = _gaussian_field_spins(rng, lattice, width, replicas)
    exact_c = (2 / np.pi) * np.arcsin(np.clip(rho, -1, 1))
    exact_s = np.fft.fftn(exact_c).real
    grid = MeasurementGrid(lattice)
    m = measure(spins, lattice, grid, temperature=0.0)
    c_expected = _bin_means(exact_c, _torus_lengths(lattice), grid.r)
    s_expected = _bin_means(exact_s, k / grid.k_spacing, np.round(grid.k / grid.k_spacing))

    mean = m.correlation.mean(axis=0)
    error = m.correlation.std(axis=0, ddof=1) / math.sqrt(replicas)
    near = grid.r <= 20
    rounding = 1e-6  # float32 transforms; C(0) = 1 has no statistical error at all
    assert np.all(np.abs(mean - c_expected)[near] <= Z * error[near] + rounding)
    half = correlation_crossing(grid.r, c_expected, 0.5)[0]
    # continuum value sqrt(2 ln 2) width (rho = exp(-d^2 / 4 width^2)); bins shift it slightly
    assert half == pytest.approx(width * math.sqrt(2 * math.log(2)), rel=0.05)
    for estimator, expected in (("corr_half", half),
                                ("sk_moment", moment_length(grid.k, s_expected)[0])):
        values = m.length[ESTIMATORS.index(estimator)]
        se = values.std(ddof=1) / math.sqrt(replicas)
        assert abs(values.mean() - expected) <= Z * se, (estimator, values.mean(), expected, se)


def test_no_length_where_there_is_none():
    """A uniform state: C = 1 never falls (corr_zero, corr_half NaN), S(k > 0) = 0 (sk_moment
    NaN), and at T = 0 it is the ground state (wall NaN)."""
    lattice = Lattice("square", (16, 16))
    spins = np.ones((2, 16, 16), dtype=np.int8)
    m = measure(spins, lattice, MeasurementGrid(lattice), temperature=0.0)
    assert np.isnan(m.length).all()


def test_crossing_interpolates_linearly():
    r = np.arange(5.0)
    c = np.array([[1.0, 0.8, 0.4, 0.1, -0.2],
                  [1.0, 0.5, 0.4, 0.3, 0.2],
                  [1.0, 0.9, 0.8, 0.7, 0.6]])
    np.testing.assert_allclose(correlation_crossing(r, c, 0.5), [1.75, 1.0, np.nan])
    np.testing.assert_allclose(correlation_crossing(r, c, 0.0), [3 + 1 / 3, np.nan, np.nan])
    np.testing.assert_allclose(correlation_crossing(r, c[0], 1.0), [0.0])


def test_moment_and_wall_lengths():
    k = np.array([0.0, 1.0, 2.0, 3.0, 4.0])
    s = np.array([[100.0, 1.0, 1.0, 2.0, 50.0]])  # k = 0 and k > pi are left out
    assert moment_length(k, s)[0] == pytest.approx(2 * np.pi * 4 / (1 + 2 + 6))
    np.testing.assert_allclose(wall_length(np.array([-1.5, -2.0, -2.5]), -2.0),
                               [2.0, np.nan, np.nan])
    assert np.isnan(wall_length(np.array([-1.0]), None)).all()
    assert np.isnan(wall_length(np.array([-1.0]), float("nan"))).all()
