"""The spec file: TOML text in, a frozen and validated :class:`Spec` out.

The tables and keys are those of the design's spec contract. Every mistake raises a
:class:`SpecError` whose one-line message names the dotted key (``dynamics.rule``), shows the
bad value with ``repr`` and lists what is allowed; unknown keys and tables get a did-you-mean
suggestion. Wrong types raise :class:`SpecTypeError`, a ``SpecError`` that is also a
``TypeError``.

Required: ``lattice.kind``, ``lattice.size``, ``dynamics.rule``, one form of
``[temperature]``, ``measure.times`` and ``ensemble.seed`` (there is no default seed: a run
is reproducible only if its seed is written down, so the spec must say it).

Defaults: ``lattice.boundary = "periodic"``, ``model.J = 1.0``, ``model.h = 0.0``,
``dynamics.acceptance = "heat-bath"``, ``dynamics.update = "random"``,
``initial.state = "random"`` (or ``up``, or a seeded state of :mod:`coarsen.seeded` with its
own keys: ``disk``/``radius``, ``square``/``side``, ``stripe``/``width``,
``zigzag``/``amplitude``+``period``, optional ``centre``; ``file``/``path``, relative to the
spec file), ``initial.magnetization = 0.0``, ``initial.exact`` exact for the
conserved rules and not for Glauber (see :mod:`coarsen.initial`), ``measure.times.spacing =
"log"``, ``measure.order = "ferro"``, ``measure.snapshots = 0``, no
``measure.equilibrium_energy``, no ``measure.cuts`` (interface cuts ``[{ origin = [x, y],
direction = [dx, dy], length, label }, ...]`` on square lattices; seeded states have default
cuts, :mod:`coarsen.observables.interfaces`), ``measure.cut_width = 5``,
``ensemble.replicas = 8``.

Temperature: exactly one of ``value`` (T >= 0), ``relative`` (a fraction >= 0 of the model's
critical temperature :attr:`Spec.tc`), ``points`` (``[[t0, T0], [t1, T1], ...]`` in sweeps,
piecewise linear from t0 = 0, the last value held, a repeated time a jump; see
:mod:`coarsen.schedule`) or ``relative_points`` (the same with temperatures as fractions of
Tc), or ``ramp = { start, stop, duration, hold, relative }`` (linear from start to stop over
``duration`` sweeps, then held; ``hold`` bounds the measurement times; ``relative = true``
gives the temperatures as fractions of Tc; a list of durations makes a ramp scan: one run per
duration, gathered in one dataset along a ``ramp_time`` dimension, see :meth:`Spec.variant`).
The critical temperature is ``|J|`` times the lattice's (:attr:`Lattice.tc`); it is 0 for
the chain, for J = 0 and for the triangular antiferromagnet (J < 0, frustrated: no ordering at
any T > 0, Wannier 1950), where relative temperatures are refused.

Field: ``[model].h`` for a constant field, or a ``[field]`` table with one of ``value``,
``points`` (``[[t0, h0], ...]``, values of either sign) or ``ramp = { start, stop, duration,
hold }``, which then replaces ``[model].h`` (giving both is an error). Like the temperature,
the field is applied once per sweep at the sweep's midpoint (:mod:`coarsen.schedule`).

Measurement times: an explicit list (``times = [0, 10, 100]`` or ``times = { at = [...] }``), or
``{ start, stop, count, spacing }`` with ``count >= 2`` points from ``start`` to ``stop``, equally
spaced in log t (``spacing = "log"``, needs ``start >= 1``) or in t (``"linear"``). The engine
advances in whole sweeps, so times are rounded to the nearest whole sweep (halves up), then
sorted and de-duplicated: log spacing therefore gives fewer than ``count`` times when several
early points round to the same sweep. Time 0 measures the initial state.
"""

from __future__ import annotations

import dataclasses
import json
import math
import os
import re
import tomllib
from pathlib import Path

import numpy as np

from coarsen._validation import (
    ParameterError,
    ParameterTypeError,
    check_bool,
    check_choice,
    check_integer,
    check_number,
    did_you_mean,
)
from coarsen.engine import ACCEPTANCES, RULES, UPDATES, check_dynamics
from coarsen.initial import ORDERS, InitialState, check_state
from coarsen.lattice import BOUNDARIES, LATTICE_KINDS, Lattice
from coarsen.observables.interfaces import DEFAULT_CUT_WIDTH, Cut, check_cut_width, parse_cuts
from coarsen.resources import check_run_memory
from coarsen.schedule import Schedule, constant, from_points, ramp
from coarsen.seeded import SEEDED_PARAMETERS, read_configuration, seed_centre, seed_sites

__all__ = [
    "Spec",
    "SpecError",
    "SpecTypeError",
    "critical_temperature",
    "evenly_spread",
    "load_spec",
    "parse_spec",
    "spec_from_mapping",
    "to_toml",
]

#: The keys each table takes.
TABLE_KEYS: dict[str, tuple[str, ...]] = {
    "lattice": ("kind", "size", "boundary"),
    "model": ("J", "h"),
    "dynamics": ("rule", "acceptance", "update"),
    "temperature": ("value", "relative", "points", "relative_points", "ramp"),
    "initial": ("state", "magnetization", "exact", "radius", "side", "width", "amplitude",
                "period", "centre", "path"),
    "measure": ("times", "order", "snapshots", "equilibrium_energy", "cuts", "cut_width"),
    "ensemble": ("replicas", "seed"),
    "field": ("value", "points", "ramp"),
}
#: Parts of the design that a later version adds.
NOT_YET: dict[str, str] = {}
_RAMP_KEYS = ("start", "stop", "duration", "hold", "relative")
_FIELD_RAMP_KEYS = ("start", "stop", "duration", "hold")
#: Largest measurement time: whole sweeps stay exact in the dataset's float64 time axis.
MAX_TIME = 2**53
DEFAULT_REPLICAS = 8

_TEMPERATURE_FORMS = TABLE_KEYS["temperature"]
_TIMES_KEYS = ("start", "stop", "count", "spacing")
_SPACINGS = ("log", "linear")


class SpecError(ValueError):
    """A mistake in a spec.

    Attributes
    ----------
    key : str or None
        The dotted key (``"dynamics.rule"``), or None for the file as a whole.
    value : object
        The bad value (None when a key is missing).
    allowed : tuple or None
        The allowed values, where there is a list of them.
    source : str or None
        The spec's file name, if it came from a file.
    """

    def __init__(self, message: str, *, key=None, value=None, allowed=None, source=None):
        self.message = message
        self.key, self.value, self.source = key, value, source
        self.allowed = None if allowed is None else tuple(allowed)
        super().__init__(f"{source}: {message}" if source else message)


class SpecTypeError(SpecError, TypeError):
    """A spec value of the wrong type."""


@dataclasses.dataclass(frozen=True)
class Spec:
    """A validated spec: everything a run needs.

    Build it with :func:`load_spec`, :func:`parse_spec` or :func:`spec_from_mapping`; the
    defaults of missing keys are listed in the module docstring (boundary periodic, J = 1,
    h = 0, heat-bath, random-sequential, random initial state with m = 0, order ferro,
    no snapshots, 8 replicas; the seed is required).

    Attributes
    ----------
    lattice : Lattice
    J : float
        Coupling.
    field : Schedule
        h(t) in sweeps (constant unless the spec has a ``[field]`` table); :attr:`h` is its
        value when it is constant.
    rule, acceptance, update : str
        The dynamics (:func:`coarsen.engine.advance`).
    temperature : Schedule
        T(t) in sweeps, absolute (relative forms already multiplied by :attr:`tc`).
    initial : InitialState
    times : tuple of int
        Measurement times in whole sweeps, sorted, unique, >= 0.
    order : {"ferro", "neel"}
    snapshots : int
        Number of configurations kept, 0 .. len(times).
    snapshot_times : tuple of int
        The measurement times that keep a snapshot: evenly spread over the measurement
        indices, the first and the last included (only the last for one snapshot).
    replicas, seed : int
    equilibrium_energy : float or None
        Energy per site of equilibrium at the final temperature, for the ``wall`` length
        estimator where no exact value is known.
    ramp_times : tuple of float
        For a ramp scan (a list of ramp durations), the durations, sorted; empty otherwise.
        :attr:`temperature` is then the first duration's schedule; :meth:`variant` gives the
        spec of each duration.
        The TOML text (stored in datasets).
    source : str or None
        The file it was read from.
    cuts : tuple of Cut
        Interface cuts given in ``measure.cuts`` (empty: the seeded state's defaults,
        :func:`coarsen.observables.interfaces.default_cuts`).
    cut_width : int
        Band width of the cuts' coarse-grained profile (``measure.cut_width``, default 5).
    """

    lattice: Lattice
    J: float
    field: Schedule
    rule: str
    acceptance: str
    update: str
    temperature: Schedule
    initial: InitialState
    times: tuple[int, ...]
    order: str
    snapshots: int
    snapshot_times: tuple[int, ...]
    replicas: int
    seed: int
    equilibrium_energy: float | None
    text: str
    source: str | None
    ramp_times: tuple[float, ...] = ()
    ramp_schedules: tuple[Schedule, ...] = ()
    cuts: tuple[Cut, ...] = ()
    cut_width: int = DEFAULT_CUT_WIDTH

    @property
    def h(self) -> float:
        """The field, when it is constant in time.

        Raises
        ------
        ValueError
            When the spec's ``[field]`` varies in time (use :attr:`field`).
        """
        if len(set(value for _, value in self.field.points)) != 1:
            raise ValueError("h: the field varies in time ([field]); use Spec.field")
        return float(self.field.points[0][1])

    @property
    def is_ramp_scan(self) -> bool:
        """True when the spec lists several ramp durations."""
        return bool(self.ramp_times)

    def variant(self, index: int) -> "Spec":
        """The single-duration spec of a ramp scan's ``index``-th ramp time.

        Each duration runs with its own seed, derived from the spec's seed and the index
        (``SeedSequence([seed, index])``), so the runs are independent; the variant's text is
        the scan's text with a closing comment naming the duration, which keeps checkpoints of
        different durations apart.
        """
        if not self.ramp_times:
            raise ValueError("variant: the spec is not a ramp scan (one ramp duration)")
        if not 0 <= index < len(self.ramp_times):
            raise ValueError(f"variant: index {index!r} is not in 0..{len(self.ramp_times) - 1}")
        seed = int(np.random.SeedSequence([self.seed, index]).generate_state(1, np.uint64)[0])
        return dataclasses.replace(
            self, temperature=self.ramp_schedules[index], seed=seed, ramp_times=(),
            ramp_schedules=(),
            text=f"{self.text.rstrip()}\n# ramp scan: duration {self.ramp_times[index]:g} "
                 f"(index {index}, seed {seed})\n")

    @property
    def final_time(self) -> int:
        """The last measurement time, in sweeps."""
        return self.times[-1]

    @property
    def tc(self) -> float:
        """Critical temperature of the model at h = 0 (see :func:`critical_temperature`)."""
        return critical_temperature(self.lattice, self.J)


def critical_temperature(lattice: Lattice, J: float) -> float:
    """``|J|`` times the lattice's Tc; 0 for J = 0 and for the triangular antiferromagnet."""
    if J < 0 and lattice.kind == "triangular":
        return 0.0
    return abs(J) * lattice.tc


# --------------------------------------------------------------------------------------------
# reading
# --------------------------------------------------------------------------------------------
def load_spec(path) -> Spec:
    """Read and validate a spec file.

    Parameters
    ----------
    path : str or os.PathLike
        The TOML file.

    Raises
    ------
    SpecError
        If the file is missing or unreadable, is not UTF-8 TOML (the message gives the line),
        or any key is wrong; the message starts with the file name.
    """
    source = os.fspath(path)
    text = read_toml_text(source, SpecError, "spec file", "a spec is a TOML text file")
    return parse_spec(text, source)


def read_toml_text(source: str, error: type, what: str, kind: str) -> str:
    """The UTF-8 text of a TOML file; ``error(message, source=source)`` when it can't be read.

    ``what`` names the file in the messages ("spec file"), ``kind`` says what it should be
    when it is not UTF-8 ("a spec is a TOML text file").
    """
    try:
        with open(source, "rb") as handle:
            raw = handle.read()
    except FileNotFoundError:
        raise error(f"no such {what}", source=source) from None
    except IsADirectoryError:
        raise error(f"is a directory, not a {what}", source=source) from None
    except OSError as problem:
        raise error(f"cannot read the {what} ({problem.strerror})", source=source) from None
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError as problem:
        raise error(f"not UTF-8 text (byte {problem.start}); {kind}", source=source) from None


def parse_spec(text: str, source: str | None = None) -> Spec:
    """Parse and validate the TOML text of a spec.

    Parameters
    ----------
    text : str
        The TOML text.
    source : str or None
        The file name, for messages and :attr:`Spec.source`.

    Raises
    ------
    SpecError
        For a TOML syntax error (with its line and column) or any wrong key.
    """
    if not isinstance(text, str):
        raise SpecTypeError(f"spec text: expected a str, got {type(text).__name__}",
                            source=source)
    try:
        mapping = tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        raise SpecError(f"TOML syntax error: {error}", source=source) from None
    return spec_from_mapping(mapping, source=source, text=text)


def spec_from_mapping(mapping: dict, source=None, text=None) -> Spec:
    """Validate a spec given as nested dicts (the parsed TOML).

    Parameters
    ----------
    mapping : dict
        Tables by name, each a dict of keys (as :func:`tomllib.loads` returns them).
    source : str or None
        Where it came from, for messages.
    text : str or None
        The TOML text to store; None writes it from ``mapping`` (so a spec assembled in code,
        say with grid overrides, still stores a text that parses back to the same spec).

    Raises
    ------
    SpecError
        For any wrong key, naming it.
    """
    if not isinstance(mapping, dict):
        raise SpecTypeError(f"spec: expected a dict of tables, got {type(mapping).__name__}",
                            source=source)
    try:
        spec = _build(mapping, source, "" if text is None else text)
    except ParameterError as error:
        kind = SpecTypeError if isinstance(error, TypeError) else SpecError
        raise kind(str(error), key=error.name, value=error.value, allowed=error.allowed,
                   source=source) from None
    if text is None:
        spec = dataclasses.replace(spec, text=to_toml(mapping))
    return spec


# --------------------------------------------------------------------------------------------
# building
# --------------------------------------------------------------------------------------------
def _fail(message, key, value=None, allowed=None, type_error=False):
    kind = ParameterTypeError if type_error else ParameterError
    raise kind(f"{key}: {message}", name=key, value=value, allowed=allowed)


def _tables(mapping: dict) -> dict[str, dict]:
    for name, value in mapping.items():
        if name in TABLE_KEYS:
            if not isinstance(value, dict):
                _fail(f"{value!r} is not a table; write it as [{name}] with its keys below",
                      name, value, type_error=True)
        elif name in NOT_YET:
            _fail(f"{NOT_YET[name]} are not available in this version; give h in [model]",
                  name, value)
        else:
            owner = [f"{table}.{name}" for table, keys in TABLE_KEYS.items() if name in keys]
            hint = (f" (did you mean {owner[0]!r}?)" if owner
                    else did_you_mean(name, TABLE_KEYS))
            what = "table" if isinstance(value, dict) else "top-level key"
            _fail(f"unknown {what}; a spec has the tables {', '.join(TABLE_KEYS)}{hint}",
                  name, value, tuple(TABLE_KEYS))
    return {name: mapping.get(name, {}) for name in TABLE_KEYS}


def _check_keys(table: dict, prefix: str, known) -> None:
    for key, value in table.items():
        if key not in known:
            dotted = f"{prefix}.{key}"
            if dotted in NOT_YET:
                _fail(f"{NOT_YET[dotted]} are not available in this version; give one of "
                      f"{', '.join(known)}", dotted, value, tuple(known))
            _fail(f"unknown key; [{prefix}] takes {', '.join(known)}"
                  f"{did_you_mean(key, known)}", dotted, value, tuple(known))


def _required(table: dict, prefix: str, key: str, example: str):
    if key not in table:
        _fail(f"missing; the spec must give it, e.g. {example}", f"{prefix}.{key}")
    return table[key]


def _lattice(table: dict) -> Lattice:
    kind = check_choice(_required(table, "lattice", "kind", 'kind = "square"'),
                        LATTICE_KINDS, "lattice.kind", what="lattice kind")
    boundary = check_choice(table.get("boundary", "periodic"), BOUNDARIES,
                            "lattice.boundary", what="boundary")
    size = _required(table, "lattice", "size", "size = [256, 256]")
    d = LATTICE_KINDS[kind]
    if not isinstance(size, list):
        _fail(f"{size!r} is not a list; give {d} whole number{'s' if d > 1 else ''} of sites, "
              f"one per axis, e.g. {[256] * d!r}", "lattice.size", size, type_error=True)
    for n in size:
        check_integer(n, "lattice.size", minimum=1, what="number of sites per axis")
    try:
        return Lattice(kind, tuple(size), boundary)
    except ValueError as error:
        _fail(re.sub(r"^lattice \w+: ", "", str(error)), "lattice.size", size)


def _dynamics(table: dict, lattice: Lattice):
    rule = check_choice(_required(table, "dynamics", "rule", 'rule = "glauber"'), RULES,
                        "dynamics.rule", what="rule")
    acceptance = check_choice(table.get("acceptance", "heat-bath"), ACCEPTANCES,
                              "dynamics.acceptance", what="acceptance")
    update = check_choice(table.get("update", "random"), UPDATES, "dynamics.update",
                          what="update")
    try:
        check_dynamics(lattice, rule, acceptance, update)
    except ValueError as error:
        message = str(error)
        if message.startswith("lattice size: "):
            _fail(message[len("lattice size: "):] + '; or use dynamics.update = "random"',
                  "lattice.size", list(lattice.size))
        _fail(re.sub(r"^\w+: ", "", message), "dynamics.update", update, UPDATES)
    if (update == "checkerboard" and acceptance == "metropolis" and lattice.kind == "chain"
            and lattice.periodic):
        _fail("'checkerboard' with acceptance 'metropolis' is not ergodic on a periodic "
              "chain: every zero-energy flip is forced, so the sweeps conserve the difference "
              "of the even- and odd-bond sums and never reach equilibrium; use acceptance "
              "'heat-bath' or update 'random'", "dynamics.update", update, UPDATES)
    return rule, acceptance, update


def _temperature(table: dict, lattice: Lattice, J: float) -> tuple[Schedule, ...]:
    """The temperature schedule, or one per ramp duration for a scan (sorted durations)."""
    tc = critical_temperature(lattice, J)
    forms = [form for form in _TEMPERATURE_FORMS if form in table]
    listing = ", ".join(_TEMPERATURE_FORMS)
    if not forms:
        _fail(f"missing; give exactly one of {listing}, e.g. value = 1.0", "temperature",
              allowed=_TEMPERATURE_FORMS)
    if len(forms) > 1:
        _fail(f"{' and '.join(forms)} are {'both' if len(forms) == 2 else 'all'} given; "
              f"give exactly one of {listing}",
              "temperature", tuple(forms), _TEMPERATURE_FORMS)
    form = forms[0]
    key, value = f"temperature.{form}", table[form]
    if form.startswith("relative") and tc == 0:
        _fail(f"{value!r} is relative to Tc, but the {lattice.kind} lattice with J = {J!r} "
              "has no ordering transition (Tc = 0); give value or points instead", key, value)
    if form == "value":
        return (constant(check_number(value, key, minimum=0.0, what="temperature")),)
    if form == "relative":
        fraction = check_number(value, key, minimum=0.0, what="fraction of Tc")
        return (constant(fraction * tc),)
    if form == "ramp":
        return _ramp(value, key, tc, lattice)
    points = from_points(value, name=key)
    if form == "relative_points":
        points = Schedule(tuple((t, v * tc) for t, v in points.points))
    return (points,)


def _durations(value, key: str) -> tuple[float, ...]:
    """One ramp duration, or a list of distinct ones (sorted), each > 0 sweeps."""
    if not isinstance(value, list):
        return (check_number(value, key, minimum=0.0, strict_minimum=True,
                             what="duration in sweeps"),)
    if len(value) == 0:
        _fail("[] lists no durations; give one or more, e.g. [250, 1000, 4000]", key, value)
    durations = [check_number(v, f"{key}[{i}]", minimum=0.0, strict_minimum=True,
                              what="duration in sweeps") for i, v in enumerate(value)]
    if len(set(durations)) != len(durations):
        repeated = next(d for d in durations if durations.count(d) > 1)
        _fail(f"{repeated:g} is listed twice; give each ramp duration once", key, value)
    return tuple(sorted(durations))


def _ramp(value, key: str, tc: float, lattice: Lattice) -> Schedule:
    if not isinstance(value, dict):
        _fail(f"{value!r} is not a table; write ramp = {{ start = 1.5, stop = 0.5, "
              "duration = 1000, relative = true }", key, value, type_error=True)
    _check_keys(value, key, _RAMP_KEYS)
    for name in ("start", "stop", "duration"):
        _required(value, key, name, f"{name} = ...")
    relative = check_bool(value.get("relative", False), f"{key}.relative")
    if relative and tc == 0:
        _fail(f"relative = true, but the {lattice.kind} lattice has no ordering transition "
              "(Tc = 0); give absolute temperatures", f"{key}.relative", True)
    scale = tc if relative else 1.0
    what = "fraction of Tc" if relative else "temperature"
    start = check_number(value["start"], f"{key}.start", minimum=0.0, what=what) * scale
    stop = check_number(value["stop"], f"{key}.stop", minimum=0.0, what=what) * scale
    durations = _durations(value["duration"], f"{key}.duration")
    if "hold" in value:
        check_number(value["hold"], f"{key}.hold", minimum=0.0, what="hold time in sweeps")
    return tuple(ramp(start, stop, duration) for duration in durations)


def _field(table: dict, model: dict) -> Schedule:
    """h(t): [model].h, or the [field] table (value, points or ramp) that replaces it."""
    if not table:
        return constant(check_number(model.get("h", 0.0), "model.h", what="field"),
                        signed=True)
    if "h" in model:
        _fail(f"{model['h']!r} is given, but so is a [field] table, which replaces it; give "
              "the field in one place", "model.h", model["h"])
    forms = [form for form in TABLE_KEYS["field"] if form in table]
    listing = ", ".join(TABLE_KEYS["field"])
    if len(forms) != 1:
        _fail(f"{' and '.join(forms)} are given; give exactly one of {listing}", "field",
              tuple(forms), TABLE_KEYS["field"])
    form = forms[0]
    key, value = f"field.{form}", table[form]
    if form == "value":
        return constant(check_number(value, key, what="field"), signed=True)
    if form == "points":
        return from_points(value, signed=True, name=key)
    if not isinstance(value, dict):
        _fail(f"{value!r} is not a table; write ramp = {{ start = 0.5, stop = -0.5, "
              "duration = 1000 }", key, value, type_error=True)
    _check_keys(value, key, _FIELD_RAMP_KEYS)
    for name in ("start", "stop", "duration"):
        _required(value, key, name, f"{name} = ...")
    start = check_number(value["start"], f"{key}.start", what="field")
    stop = check_number(value["stop"], f"{key}.stop", what="field")
    duration = check_number(value["duration"], f"{key}.duration", minimum=0.0,
                            strict_minimum=True, what="duration in sweeps")
    if "hold" in value:
        check_number(value["hold"], f"{key}.hold", minimum=0.0, what="hold time in sweeps")
    return from_points([(0.0, start), (duration, stop)], signed=True, name=key)


def _check_hold(ramp_table, key: str, times, shortest=None) -> None:
    """Measurement times must end by the end of a ramp's hold (the shortest, for a scan)."""
    if not (isinstance(ramp_table, dict) and "hold" in ramp_table):
        return
    duration = ramp_table["duration"] if shortest is None else shortest
    end = float(duration) + float(ramp_table["hold"])
    if times[-1] > end:
        what = "the shortest ramp and its hold" if shortest is not None else "the ramp and hold"
        _fail(f"the last time {times[-1]} is past the end of {what} ({end:g} sweeps, "
              f"{key}); stop the measurements by then or lengthen the hold",
              "measure.times", times[-1])


def _initial(table: dict, lattice: Lattice, source) -> InitialState:
    state = check_state(table.get("state", "random"), "initial.state")
    own = {"random": ("magnetization", "exact"), "up": ()}
    own.update({name: required + optional
                for name, (required, optional) in SEEDED_PARAMETERS.items()})
    for key, value in table.items():
        if key != "state" and key not in own[state]:
            users = [name for name, keys in own.items() if key in keys]
            states = f"state{'s' if len(users) > 1 else ''} {' or '.join(map(repr, users))}"
            _fail(f"{value!r} given, but {key} applies to {states} only, not {state!r}; "
                  "remove it", f"initial.{key}", value)
    m = check_number(table.get("magnetization", 0.0), "initial.magnetization", minimum=-1.0,
                     maximum=1.0, what="magnetization")
    exact = check_bool(table["exact"], "initial.exact") if "exact" in table else None
    parameters = ()
    if state in SEEDED_PARAMETERS:
        required, optional = SEEDED_PARAMETERS[state]
        for key in required:
            _required(table, "initial", key, f"{key} = ...")
        values = {key: table[key] for key in required + optional if key in table}
        if state == "file":
            if not isinstance(values["path"], str):
                _fail(f"{values['path']!r} is not a file path (a string)", "initial.path",
                      values["path"], type_error=True)
            path = Path(values["path"]).expanduser()
            if not path.is_absolute() and source is not None:
                path = Path(source).resolve().parent / path
            values["path"] = str(path)  # read and checked once the replicas are known
        else:
            if "centre" in values:
                values["centre"] = tuple(seed_centre(lattice, values["centre"]).tolist())
            seed_sites(state, lattice, values)  # validates the parameters
        parameters = tuple(sorted(values.items()))
    return InitialState(state, m, exact, parameters)


def _round_times(values, key: str) -> tuple[int, ...]:
    whole = {math.floor(v + 0.5) for v in values}
    if max(whole) > MAX_TIME:
        _fail(f"{max(whole)!r} sweeps is beyond the largest time {MAX_TIME}", key, max(whole))
    return tuple(sorted(whole))


def _explicit_times(values, key: str) -> tuple[int, ...]:
    if not isinstance(values, list):
        _fail(f"{values!r} is not a list of times in sweeps", key, values, type_error=True)
    if not values:
        _fail("[] has no times; give at least one", key, values)
    numbers = [check_number(v, key, minimum=0.0, what="time in sweeps") for v in values]
    return _round_times(numbers, key)


def _times(value) -> tuple[int, ...]:
    key = "measure.times"
    if isinstance(value, list):
        return _explicit_times(value, key)
    if not isinstance(value, dict):
        _fail(f"{value!r} is neither a list of times nor a table "
              "{ start, stop, count, spacing } or { at = [...] }", key, value, type_error=True)
    if "at" in value:
        if len(value) > 1:
            extra = sorted(k for k in value if k != "at")
            _fail(f"'at' and {', '.join(map(repr, extra))} are both given; give either at = "
                  "[...] or start, stop, count, spacing", key, value)
        return _explicit_times(value["at"], f"{key}.at")
    _check_keys(value, key, _TIMES_KEYS + ("at",))
    for name in ("start", "stop", "count"):
        _required(value, key, name, "times = { start = 1, stop = 1000, count = 25 }")
    spacing = check_choice(value.get("spacing", "log"), _SPACINGS, f"{key}.spacing",
                           what="spacing")
    start = check_number(value["start"], f"{key}.start", minimum=1.0 if spacing == "log"
                         else 0.0, what="time in sweeps" + (" (log spacing)"
                                                            if spacing == "log" else ""))
    stop = check_number(value["stop"], f"{key}.stop", minimum=start, strict_minimum=True,
                        what="time in sweeps (after start)")
    count = check_integer(value["count"], f"{key}.count", minimum=2, what="number of times")
    grid = (np.geomspace(start, stop, count) if spacing == "log"
            else np.linspace(start, stop, count))
    return _round_times(grid.tolist(), key)


def evenly_spread(items: int, count: int) -> tuple[int, ...]:
    """Indices of ``count`` of ``items`` things spread evenly, the last included.

    The index nearest ``i (items - 1) / (count - 1)`` for i = 0 .. count - 1, in integers,
    strictly increasing (``count`` is capped at ``items``); one index is the last. This is
    how a run chooses the measurement times that keep a snapshot, and how lab datasets and
    figures thin theirs.
    """
    n, last = min(int(count), int(items)), int(items) - 1
    if n <= 0:
        return ()
    if n == 1:
        return (last,)
    return tuple((i * last + (n - 1) // 2) // (n - 1) for i in range(n))


def _snapshot_times(times: tuple[int, ...], snapshots: int) -> tuple[int, ...]:
    return tuple(times[i] for i in evenly_spread(len(times), snapshots))


def _build(mapping: dict, source, text: str) -> Spec:
    tables = _tables(mapping)
    for name, table in tables.items():
        _check_keys(table, name, TABLE_KEYS[name])
    lattice = _lattice(tables["lattice"])
    model = tables["model"]
    J = check_number(model.get("J", 1.0), "model.J", what="coupling")
    field = _field(tables["field"], model)
    rule, acceptance, update = _dynamics(tables["dynamics"], lattice)
    schedules = _temperature(tables["temperature"], lattice, J)
    temperature = schedules[0]
    measure = tables["measure"]
    times = _times(_required(measure, "measure", "times",
                             "times = { start = 1, stop = 1000, count = 25 }"))
    ramp_table = tables["temperature"].get("ramp")
    ramp_times = ()
    if isinstance(ramp_table, dict) and isinstance(ramp_table["duration"], list):
        ramp_times = _durations(ramp_table["duration"], "temperature.ramp.duration")
    _check_hold(ramp_table, "temperature.ramp.hold", times,
                shortest=ramp_times[0] if ramp_times else None)
    _check_hold(tables["field"].get("ramp"), "field.ramp.hold", times)
    order = check_choice(measure.get("order", "ferro"), ORDERS, "measure.order", what="order")
    if order == "neel" and not lattice.bipartite:
        _fail(f"'neel' needs a bipartite lattice, but a {lattice.describe()} lattice is not "
              "(triangular, or periodic with an odd size); use order 'ferro'",
              "measure.order", order, ORDERS)
    snapshots = check_integer(measure.get("snapshots", 0), "measure.snapshots", minimum=0,
                              maximum=len(times), what="number of snapshots (at most one per "
                              "measurement time)")
    energy = measure.get("equilibrium_energy")
    if energy is not None:
        energy = check_number(energy, "measure.equilibrium_energy", what="energy per site")
    cuts = parse_cuts(measure["cuts"], lattice) if "cuts" in measure else ()
    cut_width = check_cut_width(measure.get("cut_width", DEFAULT_CUT_WIDTH))
    ensemble = tables["ensemble"]
    replicas = check_integer(ensemble.get("replicas", DEFAULT_REPLICAS), "ensemble.replicas",
                             minimum=1, what="number of replicas")
    seed = check_integer(_required(ensemble, "ensemble", "seed", "seed = 20261201"),
                         "ensemble.seed", minimum=0, what="seed (whole number)")
    # before the initial state, whose seeded shapes are the first arrays of lattice size
    check_run_memory(lattice, replicas, snapshots)
    initial = _initial(tables["initial"], lattice, source)
    if initial.state == "file":
        read_configuration(initial.parameter_dict()["path"], lattice, replicas)
    return Spec(lattice=lattice, J=J, field=field, rule=rule, acceptance=acceptance,
                update=update,
                temperature=temperature, initial=initial, times=times, order=order,
                snapshots=snapshots, snapshot_times=_snapshot_times(times, snapshots),
                replicas=replicas, seed=seed, equilibrium_energy=energy, text=text,
                source=None if source is None else str(source), ramp_times=ramp_times,
                ramp_schedules=schedules if ramp_times else (), cuts=cuts,
                cut_width=cut_width)


# --------------------------------------------------------------------------------------------
# writing (for specs assembled in code)
# --------------------------------------------------------------------------------------------
_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")


def _toml_key(key: str) -> str:
    return key if _BARE_KEY.match(key) else json.dumps(key)


def _toml_value(value, key: str) -> str:
    if isinstance(value, (bool, np.bool_)):
        return "true" if value else "false"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        number = float(value)
        if math.isnan(number):
            return "nan"
        if math.isinf(number):
            return "inf" if number > 0 else "-inf"
        return repr(number)
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False)  # a valid TOML basic string
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_toml_value(v, key) for v in value) + "]"
    if isinstance(value, dict):
        inner = ", ".join(f"{_toml_key(str(k))} = {_toml_value(v, f'{key}.{k}')}"
                          for k, v in value.items())
        return "{ " + inner + " }" if inner else "{}"
    raise SpecTypeError(f"{key}: {value!r} cannot be written as TOML", key=key, value=value)


def to_toml(mapping: dict) -> str:
    """TOML text of a spec mapping: top-level tables as ``[name]`` sections.

    Only what a spec holds is supported (strings, booleans, numbers, lists and inline
    tables); :func:`tomllib.loads` reads the text back to an equal mapping.
    """
    scalars = [f"{_toml_key(str(name))} = {_toml_value(value, str(name))}"
               for name, value in mapping.items() if not isinstance(value, dict)]
    lines = scalars + ([""] if scalars else [])
    for name, table in mapping.items():
        if isinstance(table, dict):
            lines.append(f"[{_toml_key(str(name))}]")
            lines.extend(f"{_toml_key(str(k))} = {_toml_value(v, f'{name}.{k}')}"
                         for k, v in table.items())
            lines.append("")
    return "\n".join(lines)
