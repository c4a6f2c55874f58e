"""Growth-law models L(t), their parameters and priors, with any parameter fixable.

``power``    ``L = A t**n``
``offset``   ``L = L0 + A t**n``: a constant correction, the form used for conserved
             dynamics, where the raw log-log slope approaches n only slowly (Huse, Phys. Rev.
             B 34, 7845 (1986), recalled from memory)
``shifted``  ``L = A (t + t0)**n``: a shifted time origin

With ``extra_scatter`` every model gains ``sigma_extra``, a scatter in ``log L`` added in
quadrature to the given errors (lab data whose error bars may be underestimated).

Default priors (overridable, see :func:`make_model`):

=============== ============================ =============================================
parameter       prior                        support
=============== ============================ =============================================
``n``           flat                         (0, 1.5)
``A``           log-uniform (flat in ln A)   (1e-6, 1e6)
``L0``          flat                         (-max L, max L) of the fitted points
``t0``          flat                         (-min t, max t) of the fitted points
``sigma_extra`` flat                         (0, 1) (in units of ln L)
=============== ============================ =============================================

A model whose L is not positive at every fitted time has zero prior probability.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["MODELS", "GrowthModel", "Prior", "default_priors", "make_model"]

#: Model name -> its growth-law parameters, in order.
MODELS = {
    "power": ("n", "A"),
    "offset": ("n", "A", "L0"),
    "shifted": ("n", "A", "t0"),
}
_KINDS = ("uniform", "log-uniform")


@dataclass(frozen=True)
class Prior:
    """A flat prior on the parameter (``uniform``) or on its logarithm (``log-uniform``).

    Attributes
    ----------
    kind : {"uniform", "log-uniform"}
    low, high : float
        Support; for ``log-uniform`` both > 0.
    """

    kind: str
    low: float
    high: float

    def __post_init__(self):
        if self.kind not in _KINDS:
            raise ValueError(f"prior kind: {self.kind!r} is not one of {', '.join(_KINDS)}")
        if not (np.isfinite(self.low) and np.isfinite(self.high) and self.low < self.high):
            raise ValueError(f"prior bounds: ({self.low!r}, {self.high!r}) must be finite with "
                             f"low < high")
        if self.kind == "log-uniform" and self.low <= 0:
            raise ValueError(f"prior bounds: a log-uniform prior needs low > 0, got {self.low!r}")

    def to_sampling(self, value):
        """The sampler's coordinate: the value, or its logarithm for ``log-uniform``."""
        return np.log(value) if self.kind == "log-uniform" else np.asarray(value, dtype=float)

    def from_sampling(self, coordinate):
        return np.exp(coordinate) if self.kind == "log-uniform" else coordinate

    @property
    def sampling_bounds(self) -> tuple[float, float]:
        return float(self.to_sampling(self.low)), float(self.to_sampling(self.high))

    def draw(self, rng: np.random.Generator, size=None):
        """Draws from the prior (used by calibration tests)."""
        low, high = self.sampling_bounds
        return self.from_sampling(rng.uniform(low, high, size))


def default_priors(time, length) -> dict[str, Prior]:
    """The default priors for the fitted points ``time``, ``length`` (see the module notes)."""
    time = np.asarray(time, dtype=float)
    largest = float(np.max(length))
    return {
        "n": Prior("uniform", 0.0, 1.5),
        "A": Prior("log-uniform", 1e-6, 1e6),
        "L0": Prior("uniform", -largest, largest),
        "t0": Prior("uniform", -float(np.min(time)), float(np.max(time))),
        "sigma_extra": Prior("uniform", 0.0, 1.0),
    }


def _as_prior(name: str, value) -> Prior:
    if isinstance(value, Prior):
        return value
    try:
        items = tuple(value)
    except TypeError:
        raise TypeError(f"priors[{name!r}]: {value!r} is not a Prior or a (low, high) or "
                        f"(kind, low, high) tuple") from None
    if len(items) == 2:
        kind = "log-uniform" if name == "A" else "uniform"
        return Prior(kind, float(items[0]), float(items[1]))
    if len(items) == 3:
        return Prior(str(items[0]), float(items[1]), float(items[2]))
    raise TypeError(f"priors[{name!r}]: {value!r} is not a (low, high) or (kind, low, high) tuple")


class GrowthModel:
    """One growth law with its free and fixed parameters and priors.

    The sampler sees a vector of the free parameters in sampling coordinates (``ln A`` for a
    log-uniform A); :meth:`values` turns such vectors back into parameter values.

    Attributes
    ----------
    name : str
    parameters : tuple of str
        All parameters, ``sigma_extra`` last when present.
    free : tuple of str
        The sampled ones.
    fixed : dict of str to float
    priors : dict of str to Prior
        For the free parameters.
    """

    def __init__(self, name: str, *, fixed: dict, priors: dict, extra_scatter: bool):
        self.name = name
        self.parameters = MODELS[name] + (("sigma_extra",) if extra_scatter else ())
        self.fixed = dict(fixed)
        self.free = tuple(p for p in self.parameters if p not in self.fixed)
        self.priors = {p: priors[p] for p in self.free}
        self.extra_scatter = extra_scatter
        self._low = np.array([priors[p].sampling_bounds[0] for p in self.free])
        self._high = np.array([priors[p].sampling_bounds[1] for p in self.free])

    def __repr__(self):
        fixed = ", ".join(f"{k}={v:g}" for k, v in self.fixed.items())
        return f"GrowthModel({self.name!r}, free={self.free!r}" + (
            f", fixed: {fixed})" if fixed else ")")

    def values(self, theta: np.ndarray) -> dict[str, np.ndarray]:
        """Parameter values (natural units) of sampler vectors ``theta`` of shape (W, k)."""
        theta = np.atleast_2d(theta)
        out = {}
        for name in self.parameters:
            if name in self.fixed:
                out[name] = np.full(theta.shape[0], float(self.fixed[name]))
            else:
                column = theta[:, self.free.index(name)]
                out[name] = self.priors[name].from_sampling(column)
        return out

    def to_sampling(self, values: dict) -> np.ndarray:
        """Sampler vector of the free parameters from a dict of values."""
        return np.array([float(self.priors[p].to_sampling(values[p])) for p in self.free])

    def in_support(self, theta: np.ndarray) -> np.ndarray:
        theta = np.atleast_2d(theta)
        return np.all((theta > self._low) & (theta < self._high), axis=1)

    @property
    def bounds(self) -> tuple[np.ndarray, np.ndarray]:
        """Bounds of the sampler coordinates."""
        return self._low.copy(), self._high.copy()

    def log_length(self, values: dict, time: np.ndarray) -> np.ndarray:
        """``ln L(t)`` of shape (W, T); NaN where L <= 0."""
        log_t = np.log(time)[np.newaxis]
        n = values["n"][:, np.newaxis]
        log_a = np.log(values["A"])[:, np.newaxis]
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            if self.name == "power":
                return log_a + n * log_t
            if self.name == "offset":
                length = values["L0"][:, np.newaxis] + np.exp(log_a + n * log_t)
                return np.where(length > 0, np.log(np.where(length > 0, length, 1.0)), np.nan)
            shifted = time[np.newaxis] + values["t0"][:, np.newaxis]
            return np.where(shifted > 0,
                            log_a + n * np.log(np.where(shifted > 0, shifted, 1.0)), np.nan)


def make_model(name: str, time, length, *, fixed: dict | None = None,
               priors: dict | None = None, extra_scatter: bool = False) -> GrowthModel:
    """Build a growth model for the fitted points.

    Parameters
    ----------
    name : {"power", "offset", "shifted"}
    time, length : array_like
        The fitted points (they set the default supports of L0 and t0).
    fixed : dict of str to float, optional
        Parameters held at a value, for example ``{"n": 1/3}``.
    priors : dict, optional
        Parameter name to a :class:`Prior`, a ``(low, high)`` tuple (log-uniform for ``A``,
        flat otherwise) or a ``(kind, low, high)`` tuple; replaces the default.
    extra_scatter : bool, default: False
        Add ``sigma_extra``.

    Returns
    -------
    GrowthModel
    """
    if name not in MODELS:
        raise ValueError(f"model: {name!r} is not one of {', '.join(MODELS)}")
    parameters = MODELS[name] + (("sigma_extra",) if extra_scatter else ())
    table = default_priors(time, length)
    for key, value in (priors or {}).items():
        if key not in table:
            raise ValueError(f"priors: {key!r} is not a parameter; use one of "
                             f"{', '.join(table)}")
        table[key] = _as_prior(key, value)
    checked = {}
    for key, value in (fixed or {}).items():
        if key not in parameters:
            raise ValueError(f"fixed: {key!r} is not a parameter of model {name!r}; use one of "
                             f"{', '.join(parameters)}")
        try:
            number = float(value)
        except (TypeError, ValueError):
            raise TypeError(f"fixed[{key!r}]: {value!r} is not a number") from None
        if not np.isfinite(number) or (key == "A" and number <= 0) or (
                key == "sigma_extra" and number < 0):
            raise ValueError(f"fixed[{key!r}]: {value!r} is not an allowed value")
        checked[key] = number
    return GrowthModel(name, fixed=checked, priors=table, extra_scatter=extra_scatter)
