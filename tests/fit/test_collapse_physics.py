"""Scaling collapses of simulated coarsening against published laws.

* Glauber (non-conserved), square lattice, random start quenched to T = 0 and 0.5 Tc: the
  C(r, t) collapse with L = (t / t_ref)^n gives n within 0.05 of 1/2 (Allen & Cahn, Acta
  Metall. 27, 1085 (1979), recalled from memory), and the collapsed S(k) tail follows Porod's
  law S ~ k^-(d+1) (Porod, Kolloid-Z. 124, 83 (1951); Bray, Adv. Phys. 43, 357 (1994),
  recalled from memory) against the lattice wave number 2 sin(k/2): slope within 0.15 of -3.
* The non-conserved scaling function (collapse on the measured corr_half length) is close to
  the Ohta-Jasnow-Kawasaki form C = (2/pi) arcsin(exp(-r^2/L^2)) (Ohta, Jasnow & Kawasaki,
  Phys. Rev. Lett. 49, 1223 (1982), recalled from memory), with L fixed by C = 1/2 at r_half:
  L = r_half / sqrt(ln 2 / 2). OJK is an approximation (few-per-cent deviations in 2D, Bray
  1994): the master curve's (Gaussian process at its best
  hyperparameters) largest deviation for r <= 3 r_half must stay below
  :data:`OJK_MAX_DEVIATION` (a few hundredths), not vanish.
* Kawasaki (conserved) 50/50 at 0.5 Tc: S(0) = M^2/N = 0 exactly, S(k) peaks at k_m > 0,
  the peak sharpens with time and k_m L stays roughly constant (Yeung, Phys. Rev. Lett. 61,
  1135 (1988); Furukawa 1989; recalled from memory). The small-k k^4 law needs far larger
  lattices and is not asserted.

Lattices are 256^2 (Glauber, 16 replicas, 50-500 sweeps, about 3 s each) and 128^2
(Kawasaki, 6 replicas, up to 8000 sweeps, about 6 s). The fits use 80 points.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from coarsen.fit import fit_collapse, tail_exponent
from tests.specs import quench

#: Largest allowed |C - C_OJK| for r <= 3 r_half: "a few hundredths" (Bray 1994: OJK is good
#: but not exact in 2D). Measured while writing this test: 0.015 at T = 0 (256^2, 8
#: replicas, t = 50-500).
OJK_MAX_DEVIATION = 0.05
#: OJK: C = 1/2 at x = r / L = sqrt(ln 2 / 2) (shared/REFERENCE.md Sect. 6, verified there).
OJK_HALF = math.sqrt(math.log(2) / 2)




_GLAUBER_TIMES = 'times = { start = 50, stop = 500, count = 10, spacing = "log" }'


@pytest.fixture(scope="module")
def glauber():
    """Glauber quenches to T = 0 and 0.5 Tc, 256^2, 16 replicas (seeds fixed here)."""
    return {name: quench(rule="glauber", temperature=temperature, size=256, replicas=16,
                          times=_GLAUBER_TIMES, seed=seed)
            for name, temperature, seed in (("zero", "value = 0.0", 61),
                                            ("half", "relative = 0.5", 62))}


@pytest.mark.parametrize("temperature", ["zero", "half"])
def test_glauber_correlation_collapse_gives_allen_cahn(glauber, temperature):
    """At T = 0 the full posterior (emcee) must converge. At 0.5 Tc the posterior of the
    Gaussian-process hyperparameters of this run is bimodal in the length scale (modes near
    4 and 30 in units of r / L): the stretch move does not mix between them (tau = 1700
    steps at 20000, 4500 at 120000; the fit reports it as not converged, which is correct),
    so there the exponent comes from the profile likelihood at the best hyperparameters
    (``quick``), whose intervals are the chi-squared ones."""
    quick = temperature == "half"
    fit = fit_collapse(glauber[temperature], observable="correlation", points=80, quick=quick)
    n = fit.exponents["n"]
    assert fit.converged
    assert abs(n["median"] - 0.5) < 0.05, n
    # the interval has teeth: narrower than the tolerance
    assert n["hdi95"][1] - n["hdi95"][0] < 0.05, n


@pytest.mark.parametrize("temperature", ["zero", "half"])
def test_glauber_structure_factor_tail_follows_porod(glauber, temperature):
    """Tail k L >= 3, k <= 2 (L = corr_half) of the collapse (quick exponents: the slope of
    the rescaled tail does not depend on them) against 2 sin(k/2)."""
    fit = fit_collapse(glauber[temperature], observable="structure_factor", points=160,
                       quick=True)
    tail = tail_exponent(fit)
    assert tail["n_points"] >= 20
    assert abs(tail["slope"] - (-3.0)) < 0.15, tail
    assert abs(fit.exponents["n"]["median"] - 0.5) < 0.1, fit.exponents


def test_glauber_scaling_function_is_close_to_ojk(glauber):
    fit = fit_collapse(glauber["zero"], observable="correlation", form="measured", points=80,
                       quick=True)
    assert fit.exponents == {}
    m = fit.master
    inside = m.x <= 3.0
    assert inside.sum() > 50
    ojk = 2 / math.pi * np.arcsin(np.exp(-(OJK_HALF * m.x[inside]) ** 2))
    deviation = np.max(np.abs(m.median[inside] - ojk))
    assert deviation < OJK_MAX_DEVIATION, deviation
    # by construction of the length, the master curve passes 1/2 at x = 1
    assert abs(np.interp(1.0, m.x, m.median) - 0.5) < 0.02


def _peak(k, s):
    """k_m from a parabola through the largest shell and its neighbours."""
    j = int(np.argmax(s))
    if 0 < j < s.size - 1:
        y0, y1, y2 = s[j - 1], s[j], s[j + 1]
        shift = 0.5 * (y0 - y2) / (y0 - 2 * y1 + y2)
        return k[j] + shift * (k[1] - k[0])
    return k[j]


def test_kawasaki_structure_factor_peak():
    """k_m r_0 constant within 15 % over t >= 1000 (r_0 = corr_zero): the late-time ratios
    of shared/REFERENCE.md Sect. 6 hold within 5 % at 256^2 and t >= 1e4; here the shells
    are dk = 2 pi / 128 = 0.05 wide, about a tenth of k_m (derived), hence the wider band."""
    ds = quench(rule="kawasaki", temperature="relative = 0.5", size=128, replicas=6,
                 times='times = { start = 100, stop = 8000, count = 8, spacing = "log" }',
                 seed=63)
    s = ds["structure_factor"].values
    k = ds["k"].values
    time = ds["time"].values
    assert k[0] == 0.0
    np.testing.assert_array_equal(s[:, 0], 0.0)  # S(0) = M^2 / N = 0 exactly
    peaks = np.array([_peak(k, row) for row in s])
    assert np.all(peaks > k[1] / 2)
    heights = s.max(axis=1)
    ratio = s[:, 1] / heights  # S at the smallest k > 0 relative to the peak
    assert ratio[-1] < 0.6 * ratio[0], ratio
    assert np.all(np.diff(heights) > 0), heights
    assert peaks[-1] < peaks[0]
    length = ds["length"].sel(estimator="corr_zero").mean("replica").values
    late = time >= 1000
    product = peaks[late] * length[late]
    assert np.max(np.abs(product / product.mean() - 1)) < 0.15, product
    fit = fit_collapse(ds, observable="correlation", estimator="corr_zero", points=80)
    n = fit.exponents["n"]
    # conserved coarsening is slower than non-conserved: Lifshitz-Slyozov n = 1/3 is
    # approached from below (Huse, Phys. Rev. B 34, 7845 (1986), recalled from memory)
    assert 0.0 < n["median"] < 1 / 3, n


@pytest.mark.slow
def test_kawasaki_large_lattice_collapse_and_small_k_slope():
    """256^2, 8 replicas, up to 3e4 sweeps (a few minutes). Reports the small-k slope of S
    below the peak (Yeung's k^4 needs far larger lattices; not asserted) and the tail slope of
    the structure-factor collapse against 2 sin(k/2) (reported, see below)."""
    ds = quench(rule="kawasaki", temperature="relative = 0.5", size=256, replicas=8,
                 times='times = { start = 3000, stop = 30000, count = 6, spacing = "log" }',
                 seed=64)
    fit = fit_collapse(ds, observable="structure_factor", estimator="corr_zero", points=120)
    tail = tail_exponent(fit)
    s = ds["structure_factor"].values[-1]
    k = ds["k"].values
    peak = int(np.argmax(s))
    below = slice(1, max(peak - 1, 3))
    slope = np.polyfit(np.log(k[below]), np.log(s[below]), 1)[0]
    print(f"Kawasaki 256^2: n = {fit.exponents['n']}, tail {tail}, small-k slope {slope:.2f}")
    # Reported, not asserted: the issue asks for Porod's law only for the non-conserved
    # collapse. Measured here (seed 64): tail slope -3.42 +- 0.09 against 2 sin(k/2) with the
    # window k corr_zero >= 3, k <= 2: steeper than -3, probably because corr_zero is about 2.4
    # corr_half for conserved dynamics, so the window reaches down to the shoulder of the peak.
    assert tail["n_points"] >= 20, tail
    assert np.isfinite(slope) and slope > 0, slope  # S rises from k = 0 to the peak
