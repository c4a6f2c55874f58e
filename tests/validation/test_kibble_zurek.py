"""Kibble-Zurek scaling of linear ramps through Tc (Glauber, square lattice).

Freeze-out (Kibble, J. Phys. A 9, 1387 (1976); Zurek, Nature 317, 505 (1985)): at the moment a
ramp of duration tau crosses Tc, N <m^2> ~ tau^(gamma / (1 + z nu)) with the 2D Ising gamma = 7/4,
nu = 1 (exact) and z = 2.1665(12) (Nightingale & Blote, Phys. Rev. Lett. 76, 4548 (1996)),
so ~ tau^0.553 (values recalled from memory). The freeze-out time scales as
tau^(z nu / (1 + z nu)) = tau^0.684, so N <m^2> against the time since the crossing collapses
across ramp times as tau^a F((t - t_cross) / tau^b) with a = 0.553 and b = 0.684 (the same
references: the freeze-out argument applied at every time of the window). After the
crossing the domains keep coarsening, so the length at the end of a ramp deep into the
ordered phase grows faster with tau than the freeze-out length exponent nu / (1 + z nu) =
0.316: the baseline for post-ramp growth.

Checkerboard (sublattice) heat-bath updates are used for speed; they are single-spin-flip
dynamics of the same non-conserved class (model A), with the same z (common practice, no
source). The lattice is far larger than the freeze-out length at the crossing (L_half there is
1.3-2.5 sites on 64^2).
"""

from __future__ import annotations

import numpy as np
import pytest

from coarsen.fit import fit_collapse
from coarsen.fit.kibble_zurek import (crossing_family, fit_kibble_zurek, freeze_out_values,
                                      kibble_zurek_exponents)
from coarsen.simulate import simulate
from coarsen.spec import parse_spec


def _scan(size: int, replicas: int, durations, seed: int, extra_times=()):
    times = sorted(set([d // 2 for d in durations] + list(durations) + list(extra_times)))
    text = f"""
[lattice]
kind = "square"
size = [{size}, {size}]
[dynamics]
rule = "glauber"
update = "checkerboard"
[temperature]
ramp = {{ start = 1.5, stop = 0.5, duration = {list(durations)}, relative = true }}
[measure]
times = {times}
[ensemble]
replicas = {replicas}
seed = {seed}
"""
    return simulate(parse_spec(text)).dataset


def test_freeze_out_values_read_exact_and_interpolated_moments():
    # 32^2 rather than smaller: on 16^2 most replicas are a single domain by t = 32-64, where
    # corr_half is undefined (NaN), and the reader then rightly refuses the moment.
    ds = _scan(32, 4, [8, 32, 64], seed=5, extra_times=[1, 3])
    crossing = freeze_out_values(ds, quantity="susceptibility", moment="crossing")
    assert np.allclose(crossing.moment_time, [4.0, 16.0, 32.0])
    assert not crossing.interpolated.any()
    m = ds["magnetization"].values
    times = ds["time"].values
    for i, t in enumerate(crossing.moment_time):
        per_replica = 32 * 32 * m[i, :, times == t][0] ** 2
        assert np.isclose(crossing.value[i], per_replica.mean())
    end = freeze_out_values(ds.sel(time=ds.time != 32.0), quantity="length", moment="end",
                            estimator="corr_half")
    assert end.interpolated.tolist() == [False, True, False]
    with pytest.raises(ValueError, match="ramp_time"):
        freeze_out_values(ds.isel(ramp_time=0))
    with pytest.raises(ValueError, match="at least three"):
        fit_kibble_zurek(ds.isel(ramp_time=[0, 1]))
    with pytest.raises(ValueError, match="estimator"):
        freeze_out_values(ds, quantity="length", estimator="bogus")


def test_crossing_family_holds_each_ramp_against_the_time_since_its_crossing():
    ds = _scan(32, 4, [8, 32, 64], seed=6, extra_times=[1, 3, 20, 40])
    family = crossing_family(ds, quantity="susceptibility")
    times = ds["time"].values
    m = ds["magnetization"].values
    for i, duration in enumerate([8, 32, 64]):
        assert family.parameter[i] == duration
        assert np.array_equal(family.x[i], times - duration / 2)
        assert np.allclose(family.y[i], (32 * 32 * m[i] ** 2).mean(axis=0))
    narrow = crossing_family(ds, quantity="susceptibility", window=(-0.3, 0.3),
                             time_exponent=1.0)
    for i, duration in enumerate([8, 32, 64]):
        assert np.all(np.abs(narrow.x[i]) <= 0.3 * duration)
    with pytest.raises(ValueError, match="duration 8"):
        crossing_family(ds, window=(5.0, 6.0))
    with pytest.raises(ValueError, match="ramp_time"):
        crossing_family(ds.isel(ramp_time=0))


@pytest.mark.slow
def test_susceptibility_at_the_crossing_follows_the_freeze_out_exponent():
    """N <m^2> at the crossing ~ tau^0.553 within 0.10 (the issue's tolerance; the fit's 95%
    interval is about +-0.04 with 512 replicas per duration)."""
    ds = _scan(64, 512, [64, 128, 256, 512, 1024, 2048], seed=2026)
    fit = fit_kibble_zurek(ds, quantity="susceptibility", moment="crossing")
    print(fit.summary())
    prediction = kibble_zurek_exponents()["susceptibility"]
    assert abs(fit.exponent["median"] - prediction) < 0.10, fit.summary()
    low, high = fit.exponent["hdi95"]
    assert high - low < 0.2


@pytest.mark.slow
def test_length_after_the_ramp_grows_faster_than_freeze_out():
    """L at the end of ramps to 0.5 Tc grows with tau faster than nu/(1 + z nu) = 0.316:
    coarsening continues after the crossing (reported, not an equality)."""
    ds = _scan(128, 32, [64, 128, 256, 512, 1024], seed=2027)
    fit = fit_kibble_zurek(ds, quantity="length", moment="end", estimator="corr_half")
    print(fit.summary())
    frozen = kibble_zurek_exponents()["length"]
    assert fit.exponent["hdi95"][0] > frozen, fit.summary()
    at_crossing = fit_kibble_zurek(ds, quantity="length", moment="crossing",
                                   estimator="corr_half")
    print(at_crossing.summary())
    assert fit.exponent["median"] > at_crossing.exponent["median"]


#: Window of the family collapse in units of the freeze-out time tau^0.684 around the
#: crossing: from before the crossing (still critical) to shortly after it (before
#: coarsening takes over and before finite size matters on 64^2).
_WINDOW = (-1.2, 1.2)


def _window_times(durations, b: float = 0.684, points: int = 9):
    """Whole sweeps at t_cross + s tau^b, s evenly in the window, for every duration."""
    times = set()
    for d in durations:
        for s in np.linspace(*_WINDOW, points):
            times.add(max(1, int(round(d / 2 + s * d ** b))))
    return sorted(times)


@pytest.mark.slow
def test_family_collapse_across_ramp_times_gives_freeze_out_exponents():
    """N <m^2> against t - t_cross over ramp times 64..2048 (factor 32), 256 replicas each,
    collapsed with the ``family`` form on a linear time axis: a within 0.10 of
    gamma / (1 + z nu) = 0.553 and b within 0.10 of z nu / (1 + z nu) = 0.684 (the issue's
    tolerance for the freeze-out exponent; the 95% intervals must be narrower than it)."""
    durations = [64, 128, 256, 512, 1024, 2048]
    ds = _scan(64, 256, durations, seed=2028, extra_times=_window_times(durations))
    family = crossing_family(ds, quantity="susceptibility", window=_WINDOW)
    assert len(family) == len(durations) and min(x.size for x in family.x) >= 7
    fit = fit_collapse(family, form="family", log_x=False, log_y=True, points=None)
    print({name: fit.exponents[name] for name in ("a", "b")})
    assert fit.converged
    expected = kibble_zurek_exponents()
    for name, key in (("a", "susceptibility"), ("b", "time")):
        summary = fit.exponents[name]
        assert abs(summary["median"] - expected[key]) < 0.10, (name, summary)
        assert summary["hdi95"][1] - summary["hdi95"][0] < 0.10, (name, summary)
