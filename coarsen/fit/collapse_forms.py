"""Scaling forms of a collapse: which exponents, how a point is rescaled, their priors.

Every form is a special case of the power form

    y(x; s) = (s / s_ref)^a F((x - x_c) (s / s_ref)^(-b)),

so a point ``(x, y, error)`` of the curve with label ``s`` maps to ``X = (x - x_c) u^(-b)``,
``Y = y u^(-a)``, ``E = error u^(-a)`` with ``u = s / s_ref`` (on log scales:
``X = ln(x - x_c) - b ln u``, ``Y = ln y - a ln u``, ``E = error / y``). ``s_ref`` is the
geometric mean of the labels, so that the exponents and the master curve's scale are
nearly uncorrelated; the exponents do not depend on it.

``dynamic`` (one run; Bray, Adv. Phys. 43, 357 (1994), recalled from memory)
    ``C(r, t) = f(r / L(t))``: a = 0, b = n; ``S(k, t) = L^d g(k L)``: a = d n, b = -n, with
    ``L = (t / t_ref)^n`` and the growth exponent n free.
``measured`` (one run)
    The same with L(t) the measured length of an estimator (no exponent: the labels are the
    lengths, a = 0, b = 1 for C and a = d, b = -1 for S).
``power``
    ``y(x, t) = t^a F(x t^(-b))`` with a and b free (or fixed); optionally a shift ``x_c``.
``family``
    ``y(t; p) = p^a F((t - t_c) / p^b)`` across a protocol parameter p (for ramps the ramp
    time); a, b and optionally the shift ``t_c``.

On linear y the likelihood of the measured y includes the Jacobian ``prod u_i^(-a)`` of the
map y -> Y (derived: without it the likelihood rewards shrinking every Y towards zero).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

__all__ = ["DEFAULT_BOUNDS", "FORMS", "ScalingForm", "make_form"]

FORMS = ("dynamic", "measured", "power", "family")

#: Uniform prior bounds of the exponents (overridable).
DEFAULT_BOUNDS = {"n": (0.0, 2.0), "a": (-5.0, 5.0), "b": (-5.0, 5.0)}


@dataclass(frozen=True)
class ScalingForm:
    """One scaling form with its exponents, fixed values and prior bounds.

    Attributes
    ----------
    name : str
        One of :data:`FORMS`.
    observable : str
    exponents : tuple of str
        Every exponent of the form, in order (``("n",)``, ``("a", "b")``, ``("a", "b",
        "t_c")``, or empty for ``measured``).
    fixed : dict of str to float
    bounds : dict of str to (float, float)
        Uniform prior of each free exponent.
    log_x, log_y : bool
        Rescale on log scales.
    dimension : int
        Spatial dimension (the ``L^d`` of S(k)).
    reference : float
        ``s_ref`` (1 for ``measured``).
    """

    name: str
    observable: str
    exponents: tuple
    fixed: dict
    bounds: dict
    log_x: bool
    log_y: bool
    dimension: int = 2
    reference: float = 1.0
    shift_name: str | None = None
    notes: tuple = field(default=())

    @property
    def free(self) -> tuple:
        return tuple(name for name in self.exponents if name not in self.fixed)

    def values(self, theta: np.ndarray) -> dict:
        """Exponent values from the sampled columns (fixed ones filled in), arrays (W,)."""
        theta = np.atleast_2d(theta)
        out = {}
        columns = iter(range(theta.shape[1]))
        for name in self.exponents:
            if name in self.fixed:
                out[name] = np.full(theta.shape[0], float(self.fixed[name]))
            else:
                out[name] = theta[:, next(columns)]
        return out

    def powers(self, values: dict, count: int = 1):
        """``(a, b, shift)`` arrays (W,) of the power form (W = ``count`` without exponents)."""
        w = next(iter(values.values())).shape[0] if values else count
        zero = np.zeros(w)
        if self.name == "measured":
            if self.observable == "correlation":
                return zero, zero + 1.0, zero
            return zero + self.dimension, zero - 1.0, zero
        if self.name == "dynamic":
            n = values["n"]
            if self.observable == "correlation":
                return zero, n, zero
            return self.dimension * n, -n, zero
        shift = values[self.shift_name] if self.shift_name else zero
        return values["a"], values["b"], shift

    def rescale(self, values: dict, label, x, y, error, count: int = 1):
        """Rescaled points for W parameter sets.

        Parameters
        ----------
        values : dict of str to ndarray of shape (W,)
        label, x, y, error : ndarray of shape (N,)
        count : int, default: 1
            W, for a form without exponents.

        Returns
        -------
        X, Y, E : ndarray of shape (W, N)
            NaN in X where ``x - shift <= 0`` on a log scale.
        log_jacobian : ndarray of shape (W,)
        """
        a, b, shift = self.powers(values, count)
        log_u = np.log(label / self.reference)
        shifted = x[np.newaxis, :] - shift[:, np.newaxis]
        if self.log_x:
            with np.errstate(invalid="ignore", divide="ignore"):
                big_x = np.where(shifted > 0, np.log(np.where(shifted > 0, shifted, 1.0)),
                                 np.nan)
            big_x = big_x - b[:, np.newaxis] * log_u
        else:
            big_x = shifted * np.exp(-b[:, np.newaxis] * log_u)
        if self.log_y:
            big_y = np.log(y)[np.newaxis, :] - a[:, np.newaxis] * log_u
            big_e = np.broadcast_to(error / y, big_y.shape)
            jacobian = np.zeros(a.shape)
        else:
            factor = np.exp(-a[:, np.newaxis] * log_u)
            big_y = y * factor
            big_e = error * factor
            jacobian = -a * np.sum(log_u)
        return big_x, big_y, big_e, jacobian

    def in_bounds(self, theta: np.ndarray) -> np.ndarray:
        theta = np.atleast_2d(theta)
        inside = np.ones(theta.shape[0], dtype=bool)
        for column, name in enumerate(self.free):
            low, high = self.bounds[name]
            inside &= (theta[:, column] > low) & (theta[:, column] < high)
        return inside


def _check_fixed(fixed: dict, exponents: tuple, form: str) -> dict:
    out = {}
    for name, value in (fixed or {}).items():
        if name not in exponents:
            allowed = ", ".join(exponents) or "none"
            raise ValueError(f"fixed: {name!r} is not an exponent of form {form!r} "
                             f"(exponents: {allowed})")
        if isinstance(value, bool) or not isinstance(value, (int, float, np.number)) or \
                not math.isfinite(value):
            raise ValueError(f"fixed: {name} = {value!r} must be a finite number")
        out[name] = float(value)
    return out


def make_form(name: str, observable: str, labels, *, dimension: int | None = None,
              fixed: dict | None = None, bounds: dict | None = None, shift: bool = False,
              log_x: bool | None = None, log_y: bool | None = None,
              x_range=None) -> ScalingForm:
    """Build a scaling form for curves of ``observable`` with the given labels.

    Parameters
    ----------
    name : {"dynamic", "measured", "power", "family"}
    observable : str
        ``correlation``, ``structure_factor``, ``length`` or ``y``.
    labels : ndarray
        Curve labels (times, ramp times, parameters; lengths for ``measured``).
    dimension : int, optional
        Needed for ``structure_factor`` (default 2).
    fixed : dict, optional
        Exponents held fixed, e.g. ``{"a": 0.0}``.
    bounds : dict, optional
        Replacement uniform prior bounds ``{name: (low, high)}``.
    shift : bool, default: False
        ``power``/``family``: also fit a shift of x (``x_c``, or ``t_c`` for families).
    log_x, log_y : bool, optional
        Default: log-log for ``structure_factor`` and ``length``, linear otherwise.
    x_range : (float, float), optional
        Smallest and largest x of the fitted points: the shift's prior is uniform on
        ``(x_min - (x_max - x_min), x_min)`` (log x) or up to ``x_max`` (linear x).

    Returns
    -------
    ScalingForm
    """
    from coarsen._validation import check_choice

    check_choice(name, FORMS, "form")
    if name in ("dynamic", "measured") and observable not in ("correlation",
                                                              "structure_factor"):
        raise ValueError(f"form: {name!r} needs the correlation or structure_factor of one run "
                         f"(got {observable!r}); use 'power' or 'family'")
    if shift and name not in ("power", "family"):
        raise ValueError(f"shift: form {name!r} has no shift; use 'power' or 'family'")
    log_default = observable in ("structure_factor", "length")
    log_x = log_default if log_x is None else bool(log_x)
    log_y = log_default if log_y is None else bool(log_y)
    shift_name = None
    if name == "dynamic":
        exponents = ("n",)
    elif name == "measured":
        exponents = ()
    else:
        exponents = ("a", "b")
        if shift:
            shift_name = "t_c" if name == "family" else "x_c"
            exponents = exponents + (shift_name,)
    fixed = _check_fixed(fixed, exponents, name)
    all_bounds = dict(DEFAULT_BOUNDS)
    if shift_name:
        if x_range is None:
            raise ValueError("x_range: needed for the shift's prior")
        low, high = float(x_range[0]), float(x_range[1])
        span = max(high - low, abs(low), 1e-12)
        all_bounds[shift_name] = (low - span, low if log_x else high)
    for key, value in (bounds or {}).items():
        if key not in exponents:
            raise ValueError(f"bounds: {key!r} is not an exponent of form {name!r} "
                             f"(exponents: {', '.join(exponents) or 'none'})")
        try:
            low, high = (float(v) for v in value)
        except (TypeError, ValueError):
            raise ValueError(f"bounds: {key} = {value!r} must be (low, high)") from None
        if not (math.isfinite(low) and math.isfinite(high) and low < high):
            raise ValueError(f"bounds: {key} = {value!r} must be finite with low < high")
        all_bounds[key] = (low, high)
    for key, value in fixed.items():
        low, high = all_bounds[key]
        if key == shift_name and log_x and value >= low + (high - low):
            raise ValueError(f"fixed: {key} = {value!r} must be below the smallest fitted x "
                             f"{x_range[0]!r} on a log x scale")
    labels = np.asarray(labels, dtype=np.float64)
    reference = 1.0 if name == "measured" else float(np.exp(np.mean(np.log(labels))))
    if observable == "structure_factor" and dimension is None:
        dimension = 2
    return ScalingForm(name=name, observable=observable, exponents=exponents, fixed=fixed,
                       bounds={k: all_bounds[k] for k in exponents if k not in fixed},
                       log_x=log_x, log_y=log_y, dimension=int(dimension or 2),
                       reference=reference, shift_name=shift_name)
