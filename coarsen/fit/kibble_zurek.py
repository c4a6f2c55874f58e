"""Kibble-Zurek analysis of a ramp scan: freeze-out quantities against the ramp time.

A linear ramp through Tc at rate 1/tau falls out of equilibrium when the relaxation time
matches the time left to the transition; the correlation length then freezes at
``xi ~ tau^(nu / (1 + z nu))`` (Kibble, J. Phys. A 9, 1387 (1976); Zurek, Nature 317, 505
(1985); references recalled from memory). At the crossing of Tc a finite-size-free
susceptibility ``N <m^2>`` scales as ``xi^(gamma / nu) ~ tau^(gamma / (1 + z nu))``. After
the crossing the domains keep coarsening, so a length read at the end of a ramp deep into the
ordered phase grows faster with tau than the freeze-out law says: that is the baseline
against which post-ramp growth in an experiment is judged.

:func:`freeze_out_values` reads a quantity at the crossing time (or at the end of the ramp)
from every duration of a ramp-scan dataset (:mod:`coarsen.ramp_scan`); :func:`fit_kibble_zurek`
fits ``Q = A tau^p`` to them with the growth-law machinery (:func:`coarsen.fit.growth.
fit_model`: Gaussian on ``ln Q`` with each duration's standard error, emcee, HDIs), the
durations being independent runs.

The family collapse
------------------
:func:`crossing_family` turns a scan into one curve per ramp time, the quantity against the
time since the crossing, ``t - t_cross(tau)``. Freeze-out scaling says those curves collapse
as ``Q(t; tau) = tau^a F((t - t_cross) / tau^b)`` with ``a`` the exponent above and
``b = z nu / (1 + z nu)`` (the freeze-out time ``t_hat ~ tau^b``), which is the ``family``
form of :func:`coarsen.fit.fit_collapse` on a linear time axis.

Reading at a time that is not a measurement time
------------------------------------------------
Each replica's value is interpolated linearly in ``ln t`` between the two measurement times
that bracket the moment; then the replica mean and its standard error are taken. Put the
crossing times (``duration / 2`` for a ramp from ``a Tc`` to ``b Tc`` with ``a - 1 = 1 - b``)
and the ramp ends among the measurement times to read them exactly; the result records
whether each value was interpolated.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["KibbleZurekFit", "FreezeOut", "QUANTITIES", "MOMENTS", "crossing_family",
           "fit_kibble_zurek", "freeze_out_values", "kibble_zurek_exponents"]

#: What can be read: ``susceptibility`` is N <m^2> (N sites, m the order parameter per site),
#: ``length`` a length estimator of the dataset.
QUANTITIES = ("susceptibility", "length")
#: When to read it.
MOMENTS = ("crossing", "end")


def kibble_zurek_exponents(gamma: float = 7 / 4, nu: float = 1.0, z: float = 2.1665) -> dict:
    """The freeze-out exponents of tau: ``nu/(1+z nu)`` (length), ``gamma/(1+z nu)`` (N <m^2>)
    and ``z nu/(1+z nu)`` (``time``: the freeze-out time, the family collapse's ``b``).

    Defaults: the 2D Ising exponents gamma = 7/4, nu = 1 (exact, Onsager) and z = 2.1665
    (Nightingale & Blote, Phys. Rev. Lett. 76, 4548 (1996), recalled from memory).
    """
    return {"length": nu / (1 + z * nu), "susceptibility": gamma / (1 + z * nu),
            "time": z * nu / (1 + z * nu)}


@dataclass(frozen=True)
class FreezeOut:
    """A quantity read at one moment of every ramp of a scan.

    Attributes
    ----------
    ramp_time, moment_time : ndarray of shape (D,)
        The durations and the time read in each (the crossing or the ramp's end).
    value, error : ndarray of shape (D,)
        Replica mean and its standard error.
    interpolated : ndarray of bool, shape (D,)
        True where the moment fell between measurement times.
    quantity, moment, estimator : str
    replicas : int
    """

    ramp_time: np.ndarray
    moment_time: np.ndarray
    value: np.ndarray
    error: np.ndarray
    interpolated: np.ndarray
    quantity: str
    moment: str
    estimator: str | None
    replicas: int


def _replica_values(ds, quantity: str, estimator: str | None) -> np.ndarray:
    """(ramp_time, replica, time) values of the quantity."""
    if quantity == "susceptibility":
        sites = int(np.prod(np.asarray(ds.attrs["size"]).reshape(-1)))
        m = ds["magnetization"].transpose("ramp_time", "replica", "time").values
        return sites * m.astype(np.float64) ** 2
    if estimator is None:
        raise ValueError("estimator: give the length estimator to read (e.g. 'corr_half')")
    names = [str(e) for e in ds["estimator"].values]
    if estimator not in names:
        raise ValueError(f"estimator: {estimator!r} is not one of {', '.join(names)}")
    return ds["length"].sel(estimator=estimator).transpose("ramp_time", "replica",
                                                           "time").values.astype(np.float64)


def _moments(ds, moment: str) -> np.ndarray:
    ramp_time = ds["ramp_time"].values.astype(np.float64)
    if moment == "end":
        return ramp_time.copy()
    crossing = ds["crossing_time"].values.astype(np.float64)
    if np.any(~np.isfinite(crossing)):
        bad = float(ramp_time[~np.isfinite(crossing)][0])
        raise ValueError(f"crossing_time: the ramp of duration {bad:g} does not cross Tc")
    return crossing


def freeze_out_values(ds, *, quantity: str = "susceptibility", moment: str = "crossing",
                      estimator: str | None = "corr_half") -> FreezeOut:
    """Read ``quantity`` at the crossing of Tc (or the end of the ramp) for every duration.

    Parameters
    ----------
    ds : xarray.Dataset
        A ramp-scan dataset (with a ``ramp_time`` dimension).
    quantity : {"susceptibility", "length"}, default: "susceptibility"
        N <m^2>, or the length of ``estimator``.
    moment : {"crossing", "end"}, default: "crossing"
    estimator : str, default: "corr_half"
        For ``quantity = "length"``.

    Returns
    -------
    FreezeOut

    Raises
    ------
    ValueError
        When the dataset is not a ramp scan, a moment lies outside the measured times, or a
        name is unknown.
    """
    if quantity not in QUANTITIES:
        raise ValueError(f"quantity: {quantity!r} is not one of {', '.join(QUANTITIES)}")
    if moment not in MOMENTS:
        raise ValueError(f"moment: {moment!r} is not one of {', '.join(MOMENTS)}")
    if "ramp_time" not in ds.dims:
        raise ValueError("dataset: no ramp_time dimension; run a spec whose "
                         "temperature.ramp.duration lists several durations")
    times = ds["time"].values.astype(np.float64)
    values = _replica_values(ds, quantity, estimator if quantity == "length" else None)
    moments = _moments(ds, moment)
    durations = ds["ramp_time"].values.astype(np.float64)
    mean, error, interpolated = [], [], []
    for index, (duration, at) in enumerate(zip(durations, moments)):
        exact = np.nonzero(times == at)[0]
        if exact.size:
            per_replica = values[index, :, exact[0]]
            interpolated.append(False)
        else:
            above = np.searchsorted(times, at)
            if above == 0 or above == times.size or times[above - 1] <= 0:
                raise ValueError(f"measure.times: the {moment} of the ramp of duration "
                                 f"{duration:g} (t = {at:g}) is outside the measured times "
                                 f"{times[0]:g}..{times[-1]:g}")
            t0, t1 = times[above - 1], times[above]
            weight = (math.log(at) - math.log(t0)) / (math.log(t1) - math.log(t0))
            per_replica = (1 - weight) * values[index, :, above - 1] + \
                weight * values[index, :, above]
            interpolated.append(True)
        finite = per_replica[np.isfinite(per_replica)]
        if finite.size < 2:
            raise ValueError(f"{quantity}: fewer than two replicas have a value at the "
                             f"{moment} of the ramp of duration {duration:g}")
        mean.append(float(finite.mean()))
        error.append(float(finite.std(ddof=1) / math.sqrt(finite.size)))
    return FreezeOut(ramp_time=durations, moment_time=moments, value=np.asarray(mean),
                     error=np.asarray(error), interpolated=np.asarray(interpolated),
                     quantity=quantity, moment=moment,
                     estimator=estimator if quantity == "length" else None,
                     replicas=int(values.shape[1]))


@dataclass(frozen=True)
class KibbleZurekFit:
    """``Q = A tau^p`` fitted to freeze-out values.

    Attributes
    ----------
    data : FreezeOut
    exponent : dict
        Median, hdi68, hdi95 of p.
    amplitude : dict
        The same for A.
    converged : bool
    fit : coarsen.fit.result.ModelFit
        The posterior (draws in ``fit.values["n"]``: the exponent is sampled as the growth
        law's ``n``).
    prediction : float
        The freeze-out prediction for this quantity (:func:`kibble_zurek_exponents`).
    """

    data: FreezeOut
    exponent: dict
    amplitude: dict
    converged: bool
    fit: object
    prediction: float

    def summary(self) -> str:
        """One line: the exponent with its intervals beside the freeze-out prediction."""
        e = self.exponent
        what = ("N<m^2>" if self.data.quantity == "susceptibility"
                else f"L ({self.data.estimator})")
        return (f"{what} at the {self.data.moment} ~ tau^p: p = {e['median']:.3f}, 68% "
                f"[{e['hdi68'][0]:.3f}, {e['hdi68'][1]:.3f}], 95% [{e['hdi95'][0]:.3f}, "
                f"{e['hdi95'][1]:.3f}] (freeze-out prediction {self.prediction:.3f})")


def fit_kibble_zurek(ds, *, quantity: str = "susceptibility", moment: str = "crossing",
                     estimator: str | None = "corr_half", exponents: dict | None = None,
                     seed: int | None = None, max_steps: int = 40000) -> KibbleZurekFit:
    """Fit ``Q = A tau^p`` to a quantity read from every ramp of a scan.

    Parameters
    ----------
    ds : xarray.Dataset
        A ramp-scan dataset.
    quantity, moment, estimator
        As for :func:`freeze_out_values`.
    exponents : dict, optional
        ``gamma``, ``nu``, ``z`` for the prediction (default: 2D Ising, see
        :func:`kibble_zurek_exponents`).
    seed : int, optional
        Sampler seed (default: the fit machinery's).
    max_steps : int, default: 40000

    Returns
    -------
    KibbleZurekFit

    Notes
    -----
    The likelihood is Gaussian on ``ln Q`` with standard errors ``error / value`` (the
    durations are independent runs, so the errors are independent); the exponent's prior is
    uniform on [0, 1.5] and the amplitude's log-uniform (those of the growth law ``power``).
    """
    from coarsen.fit.growth import fit_model
    from coarsen.fit.sampling import DEFAULT_SEED

    data = freeze_out_values(ds, quantity=quantity, moment=moment, estimator=estimator)
    if data.ramp_time.size < 3:
        raise ValueError(f"ramp_time: {data.ramp_time.size} duration(s); a power of tau needs "
                         "at least three")
    if np.any(data.value <= 0):
        raise ValueError(f"{quantity}: a non-positive mean at the {moment}; no power law fits")
    log_error = data.error / data.value
    fit = fit_model("power", data.ramp_time, np.log(data.value), np.diag(log_error ** 2),
                    seed=DEFAULT_SEED if seed is None else int(seed), max_steps=max_steps)
    prediction = kibble_zurek_exponents(**(exponents or {}))
    key = "length" if quantity == "length" else "susceptibility"
    return KibbleZurekFit(data=data, exponent=fit.parameter_summary("n"),
                          amplitude=fit.parameter_summary("A"),
                          converged=bool(fit.posterior.converged), fit=fit,
                          prediction=float(prediction[key]))


def crossing_family(ds, *, quantity: str = "susceptibility", estimator: str | None = "corr_half",
                    window: tuple[float, float] | None = None, time_exponent: float | None = None):
    """One curve per ramp time: the quantity against the time since the crossing of Tc.

    Parameters
    ----------
    ds : xarray.Dataset
        A ramp-scan dataset whose ramps cross Tc.
    quantity : {"susceptibility", "length"}, default: "susceptibility"
        N <m^2>, or the length of ``estimator``.
    estimator : str, default: "corr_half"
        For ``quantity = "length"``.
    window : (float, float), optional
        Keep the times with ``low <= (t - t_cross) / tau^b <= high`` only, ``b`` being
        ``time_exponent`` (default: the 2D Ising freeze-out value of
        :func:`kibble_zurek_exponents`). Default: every measured time after ``t = 0``.
    time_exponent : float, optional
        ``b`` of the window.

    Returns
    -------
    coarsen.fit.collapse_inputs.CurveFamily
        Labels the ramp times, x the time since the crossing, y the replica mean and its
        standard error (points where fewer than two replicas have a value are left out).

    Raises
    ------
    ValueError
        When the dataset is not a ramp scan, a ramp does not cross Tc, a name is unknown or a
        curve keeps fewer than two points.
    """
    from coarsen.dataset import replica_mean_and_error
    from coarsen.fit.collapse_inputs import family_from_curves

    if quantity not in QUANTITIES:
        raise ValueError(f"quantity: {quantity!r} is not one of {', '.join(QUANTITIES)}")
    if "ramp_time" not in ds.dims:
        raise ValueError("dataset: no ramp_time dimension; run a spec whose "
                         "temperature.ramp.duration lists several durations")
    b = kibble_zurek_exponents()["time"] if time_exponent is None else float(time_exponent)
    values = _replica_values(ds, quantity, estimator if quantity == "length" else None)
    crossing = _moments(ds, "crossing")
    times = ds["time"].values.astype(np.float64)
    curves = []
    for index, duration in enumerate(ds["ramp_time"].values.astype(np.float64)):
        mean, error = replica_mean_and_error(values[index])
        since = times - crossing[index]
        keep = (times > 0) & np.isfinite(error) & (error > 0)
        if window is not None:
            scaled = since / duration ** b
            keep &= (scaled >= window[0]) & (scaled <= window[1])
        if keep.sum() < 2:
            raise ValueError(f"measure.times: the ramp of duration {duration:g} has "
                             f"{int(keep.sum())} usable time(s) in the window; a curve needs two")
        curves.append((duration, since[keep], mean[keep], error[keep]))
    return family_from_curves(curves, parameter_name="ramp_time", x_name="time since Tc",
                              source=f"{quantity} of a ramp scan")
