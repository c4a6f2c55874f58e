"""The sweep file: a base spec, a grid of overrides by dotted key, replica batches.

A sweep file is TOML with the top-level keys

``base``
    The base spec: a path to a spec file (relative to the sweep file) or an inline ``[base]``
    table holding the spec's tables (``[base.lattice]``, ...).
``batch``
    Replicas per task (default: all replicas of a point in one task). A point with R
    replicas (``ensemble.replicas`` of its spec) runs as ``ceil(R / batch)`` tasks; every
    batch holds ``batch`` replicas except the last, which holds the rest.
``seed``
    The sweep seed (required, a whole number >= 0). Task ``(point, batch)`` runs with the seed
    ``SeedSequence([seed, point, batch]).generate_state(1, uint64)[0] >> 1`` (63 bits, so it
    is a valid TOML integer): independent of every other task, and reproducible on its own.
``combine``
    ``"product"`` (default: every combination of the grid's values, the last key varying
    fastest) or ``"zip"`` (the i-th value of every key together; the lists must have one
    length).
``[grid]``
    Dotted spec keys with a list of values each, e.g. ``"temperature.relative" = [0.3, 0.5]``
    or ``"lattice.size" = [[16, 16], [32, 32]]``. Quoted keys and TOML's own dotted keys
    (``temperature.relative = [...]`` inside ``[grid]``) mean the same. A key is
    ``table.key`` of the spec or, inside ``temperature.ramp``, ``field.ramp`` and
    ``measure.times``, one level deeper (``"temperature.ramp.duration"``).

Overrides replace the base's value. Giving one form of ``[temperature]`` (``value``,
``relative``, ``points``, ``relative_points``, ``ramp``) or of ``[field]`` removes the base's
other forms, since a spec takes exactly one. ``ensemble.seed`` cannot be a grid key: task
seeds come from the sweep seed. Every point's spec is validated before anything runs; an
error names the grid key (or the base's key) and the point.

Ramp times. A base whose ``temperature.ramp.duration`` is a list is a ramp scan: each task
runs all the durations one after the other and its part has a ``ramp_time`` dimension. A grid
over ``"temperature.ramp.duration"`` (scalar values) instead spreads the durations over
tasks; the combined dataset calls that grid dimension ``ramp_time`` too, so both give the
same layout (with different seeds). The two cannot be mixed: a grid over the duration needs a
base with a single duration.
"""

from __future__ import annotations

import copy
import dataclasses
import hashlib
import itertools
import json
import math
import os
import tomllib
from pathlib import Path

import numpy as np

from coarsen._validation import ParameterError, check_choice, check_integer, did_you_mean
from coarsen.spec import (
    DEFAULT_REPLICAS,
    TABLE_KEYS,
    SpecError,
    read_toml_text,
    spec_from_mapping,
    to_toml,
)

__all__ = [
    "COMBINE_MODES",
    "Sweep",
    "SweepError",
    "Task",
    "coordinate_name",
    "load_sweep",
    "parse_sweep",
    "task_seed",
]

COMBINE_MODES = ("product", "zip")
_TOP_KEYS = ("base", "batch", "seed", "combine", "grid")
_TEMPERATURE_FORMS = TABLE_KEYS["temperature"]
_FIELD_FORMS = TABLE_KEYS["field"]
#: Keys one level below a spec key that a grid may set.
_NESTED_KEYS = {
    "temperature.ramp": ("start", "stop", "duration", "hold", "relative"),
    "field.ramp": ("start", "stop", "duration", "hold"),
    "measure.times": ("start", "stop", "count", "spacing", "at"),
}
#: Grid keys whose dimension in the combined dataset has a name of its own.
_COORDINATE_NAMES = {"temperature.ramp.duration": "ramp_time"}


class SweepError(SpecError):
    """A mistake in a sweep file; ``.key`` is the grid key or top-level key at fault."""


def _fail(message, key, value=None, source=None, allowed=None):
    raise SweepError(message, key=key, value=value, allowed=allowed, source=source)


def coordinate_name(key: str) -> str:
    """The name of a grid key's coordinate in the combined dataset (the key itself, except
    ``temperature.ramp.duration``, which becomes ``ramp_time``)."""
    return _COORDINATE_NAMES.get(key, key)


def task_seed(seed: int, point: int, batch: int) -> int:
    """The seed of task ``(point, batch)`` of a sweep with seed ``seed``.

    Returns
    -------
    int
        ``SeedSequence([seed, point, batch]).generate_state(1, uint64)[0] >> 1``, in
        ``0 .. 2**63 - 1`` (a TOML integer).
    """
    state = np.random.SeedSequence([int(seed), int(point), int(batch)]).generate_state(
        1, np.uint64)[0]
    return int(state) >> 1


@dataclasses.dataclass(frozen=True)
class Task:
    """One (grid point, replica batch) of a sweep.

    Attributes
    ----------
    point, batch : int
        Indices of the grid point and of the batch within it.
    replicas : int
        Replicas of this batch.
    seed : int
        The task's seed (:func:`task_seed`).
    spec_text : str
        The task's spec as TOML: ``coarsen run`` of this text reproduces the part exactly.
    part : str
        File name of its part (``point-0003-batch-001.nc``).
    """

    point: int
    batch: int
    replicas: int
    seed: int
    spec_text: str
    part: str

    @property
    def digest(self) -> str:
        """SHA-256 of the spec text (hex)."""
        return hashlib.sha256(self.spec_text.encode()).hexdigest()


@dataclasses.dataclass(frozen=True)
class Sweep:
    """A validated sweep file.

    Attributes
    ----------
    keys : tuple of str
        The grid keys, in file order.
    values : dict of str to list
        Each key's values.
    points : tuple of dict
        The overrides of each grid point (key -> value), in point order.
    shape : tuple of int
        ``len(values[key])`` per key for a product; ``(len(points),)`` for a zip.
    tasks : tuple of Task
        Every task, point by point, batch by batch.
    """

    source: str | None
    text: str
    base_text: str
    seed: int
    batch: int | None
    combine: str
    keys: tuple[str, ...]
    values: dict
    points: tuple[dict, ...]
    shape: tuple[int, ...]
    tasks: tuple[Task, ...]

    @property
    def digest(self) -> str:
        """SHA-256 over every task's part name and spec text: the sweep's identity."""
        digest = hashlib.sha256()
        for task in self.tasks:
            digest.update(f"{task.part}\0{task.spec_text}\0".encode())
        return digest.hexdigest()

    @property
    def coordinate_names(self) -> tuple[str, ...]:
        """Names of the grid keys' coordinates in the combined dataset."""
        return tuple(coordinate_name(key) for key in self.keys)


# --------------------------------------------------------------------------------------------
# reading
# --------------------------------------------------------------------------------------------
def load_sweep(path) -> Sweep:
    """Read and validate a sweep file.

    Raises
    ------
    SweepError
        If the file is missing, is not TOML, or any key is wrong (the message names it).
    """
    source = os.fspath(path)
    text = read_toml_text(source, SweepError, "sweep file", "a sweep file is TOML")
    return parse_sweep(text, source)


def parse_sweep(text: str, source: str | None = None) -> Sweep:
    """Parse and validate the TOML text of a sweep file.

    Parameters
    ----------
    text : str
        The TOML text.
    source : str or None
        Its file name: relative ``base`` paths are taken from its directory (else from the
        working directory), and messages start with it.

    Raises
    ------
    SweepError
        For a TOML syntax error or any wrong key, naming the key.
    """
    try:
        mapping = tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        raise SweepError(f"TOML syntax error: {error}", source=source) from None
    for key, value in mapping.items():
        if key not in _TOP_KEYS:
            hint = (f" (spec tables go inside [base], grid keys inside [grid])"
                    if key in TABLE_KEYS else did_you_mean(key, _TOP_KEYS))
            _fail(f"{key}: unknown key; a sweep file takes {', '.join(_TOP_KEYS)}{hint}", key,
                  value, source, _TOP_KEYS)
    folder = Path(source).resolve().parent if source is not None else Path.cwd()
    base, base_text, base_folder = _base(mapping, folder, source)
    seed = _whole(mapping, "seed", source, required=True, minimum=0, what="seed (whole number)")
    batch = _whole(mapping, "batch", source, required=False, minimum=1,
                   what="number of replicas per task")
    try:
        combine = check_choice(mapping.get("combine", "product"), COMBINE_MODES, "combine",
                               what="combine mode")
    except ParameterError as error:
        _fail(str(error), "combine", error.value, source, COMBINE_MODES)
    keys, values = _grid(mapping, base, source)
    if combine == "zip":
        lengths = {key: len(values[key]) for key in keys}
        if len(set(lengths.values())) > 1:
            listing = ", ".join(f"{key!r} has {n}" for key, n in lengths.items())
            _fail(f"grid: combine = 'zip' needs value lists of one length, but {listing}",
                  next(key for key in keys if lengths[key] != lengths[keys[0]]), None, source)
        rows = list(zip(*(values[key] for key in keys)))
        seen = set()
        for row in rows:
            canonical = json.dumps(row, sort_keys=True)
            if canonical in seen:
                _fail(f"grid: the point {dict(zip(keys, row))!r} is listed twice", keys[0],
                      None, source)
            seen.add(canonical)
        shape = (len(rows),)
    else:
        rows = list(itertools.product(*(values[key] for key in keys)))
        shape = tuple(len(values[key]) for key in keys)
    points = tuple(dict(zip(keys, row)) for row in rows)
    tasks = []
    for index, overrides in enumerate(points):
        tasks.extend(_point_tasks(index, overrides, base, base_folder, seed, batch, source))
    return Sweep(source=source, text=text, base_text=base_text, seed=seed, batch=batch,
                 combine=combine, keys=keys, values=values, points=points, shape=shape,
                 tasks=tuple(tasks))


def _whole(mapping, key, source, *, required, minimum, what):
    if key not in mapping:
        if required:
            _fail(f"{key}: missing; a sweep file must give it, e.g. {key} = 7", key, None, source)
        return None
    try:
        value = check_integer(mapping[key], key, minimum=minimum, what=what)
    except ParameterError as error:
        _fail(str(error), key, mapping[key], source)
    if key == "seed" and value >= 2**63:
        _fail(f"seed: {value!r} is too large; give a whole number below 2**63", key, value,
              source)
    return value


def _base(mapping, folder: Path, source):
    """The base spec mapping, its text and the directory its relative paths start from."""
    if "base" not in mapping:
        _fail('base: missing; give a spec file (base = "quench.toml") or an inline [base] table',
              "base", None, source)
    base = mapping["base"]
    if isinstance(base, dict):
        return copy.deepcopy(base), to_toml(base), folder
    if not isinstance(base, str):
        _fail(f"base: {base!r} is neither a spec file path nor a table", "base", base, source)
    path = Path(base).expanduser()
    if not path.is_absolute():
        path = folder / path
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        _fail(f"base: {base!r}: no such spec file (looked for {str(path)!r})", "base", base,
              source)
    except (OSError, UnicodeDecodeError) as error:
        _fail(f"base: {base!r}: cannot read the spec file ({error})", "base", base, source)
    try:
        parsed = tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        _fail(f"base: {base!r}: TOML syntax error: {error}", "base", base, source)
    return parsed, text, path.resolve().parent


def _flatten(table: dict, prefix: str = "") -> list[tuple[str, object]]:
    """Grid entries as (dotted key, value): TOML's nested dotted keys are joined."""
    entries = []
    for key, value in table.items():
        dotted = f"{prefix}{key}"
        if isinstance(value, dict):
            entries.extend(_flatten(value, dotted + "."))
        else:
            entries.append((dotted, value))
    return entries


def _check_key(key: str, source) -> None:
    """A grid key must name a spec key (table.key, or one level deeper where allowed)."""
    parts = key.split(".")
    shown = f"grid {key!r}"
    if len(parts) < 2:
        _fail(f"{shown}: not a dotted spec key; write it as table.key, e.g. "
              f'"temperature.relative"{did_you_mean(key, _all_keys())}', key, None, source)
    table, name = parts[0], parts[1]
    if table not in TABLE_KEYS:
        _fail(f"{shown}: unknown table {table!r}; a spec has the tables "
              f"{', '.join(TABLE_KEYS)}{did_you_mean(table, TABLE_KEYS)}", key, None, source,
              tuple(TABLE_KEYS))
    if name not in TABLE_KEYS[table]:
        _fail(f"{shown}: unknown key; [{table}] takes {', '.join(TABLE_KEYS[table])}"
              f"{did_you_mean(name, TABLE_KEYS[table])}", key, None, source,
              TABLE_KEYS[table])
    if key == "ensemble.seed":
        _fail(f"{shown}: task seeds derive from the sweep's seed (top-level seed = ...); it "
              "cannot be a grid key", key, None, source)
    if len(parts) > 2:
        parent = f"{table}.{name}"
        inner = _NESTED_KEYS.get(parent)
        if inner is None:
            _fail(f"{shown}: {parent} has no keys below it; give {parent!r} itself", key, None,
                  source)
        if len(parts) > 3 or parts[2] not in inner:
            _fail(f"{shown}: unknown key; {parent} takes {', '.join(inner)}"
                  f"{did_you_mean(parts[2], inner)}", key, None, source, inner)


def _all_keys():
    return [f"{table}.{key}" for table, keys in TABLE_KEYS.items() for key in keys]


def _grid(mapping, base: dict, source):
    if "grid" not in mapping:
        _fail('grid: missing; give a [grid] table of dotted keys and value lists, e.g. '
              '"temperature.relative" = [0.3, 0.5]', "grid", None, source)
    grid = mapping["grid"]
    if not isinstance(grid, dict):
        _fail(f"grid: {grid!r} is not a table; write [grid] with dotted keys below it", "grid",
              grid, source)
    entries = _flatten(grid)
    if not entries:
        _fail('grid: empty; give at least one dotted key with a list of values, e.g. '
              '"temperature.relative" = [0.3, 0.5]', "grid", None, source)
    keys, values = [], {}
    for key, value in entries:
        _check_key(key, source)
        shown = f"grid {key!r}"
        if not isinstance(value, list):
            _fail(f"{shown}: {value!r} is not a list of values; write {key!r} = [{value!r}] "
                  "for a single value", key, value, source)
        if not value:
            _fail(f"{shown}: [] is an empty list; give one or more values", key, value, source)
        canonical = [json.dumps(v, sort_keys=True) for v in value]
        for i, text in enumerate(canonical):
            if canonical.index(text) != i:
                _fail(f"{shown}: {value[i]!r} is listed twice; give each value once", key,
                      value, source)
        keys.append(key)
        values[key] = value
    names = [coordinate_name(key) for key in keys]
    if len(set(names)) != len(names):
        _fail("grid: 'temperature.ramp.duration' is given twice", "temperature.ramp.duration",
              None, source)
    for key in keys:
        if key.startswith("temperature.ramp.") or key.startswith("field.ramp."):
            parent = key.rsplit(".", 1)[0]
            table, name = parent.split(".")
            forms_given = any(other == parent for other in keys)
            if not forms_given and not isinstance(base.get(table, {}).get(name), dict):
                _fail(f"grid {key!r}: the base spec has no {parent} table to change; give "
                      f"{parent} = {{ ... }} in the base", key, None, source)
        if key.startswith("measure.times."):
            times = base.get("measure", {}).get("times")
            if not isinstance(times, dict) and "measure.times" not in keys:
                _fail(f"grid {key!r}: the base's measure.times is not a table "
                      "{ start, stop, count, spacing }; give measure.times itself", key, None,
                      source)
    if "temperature.ramp.duration" in keys:
        for value in values["temperature.ramp.duration"]:
            if isinstance(value, list):
                _fail("grid 'temperature.ramp.duration': a list of durations in a grid value "
                      "is a ramp scan inside one task; give single durations here, or the "
                      "list in the base", "temperature.ramp.duration", value, source)
        ramp = base.get("temperature", {}).get("ramp")
        if isinstance(ramp, dict) and isinstance(ramp.get("duration"), list):
            _fail("grid 'temperature.ramp.duration': the base spec already lists several "
                  "durations (a ramp scan); give the durations in one place",
                  "temperature.ramp.duration", None, source)
    return tuple(keys), values


# --------------------------------------------------------------------------------------------
# planning
# --------------------------------------------------------------------------------------------
def _apply(mapping: dict, key: str, value) -> None:
    parts = key.split(".")
    table = mapping.setdefault(parts[0], {})
    if not isinstance(table, dict):
        return  # the spec's own validation reports the non-table
    if len(parts) == 2:
        forms = {"temperature": _TEMPERATURE_FORMS, "field": _FIELD_FORMS}.get(parts[0], ())
        if parts[1] in forms:
            for other in forms:
                table.pop(other, None)
        table[parts[1]] = copy.deepcopy(value)
        return
    inner = table.get(parts[1])
    if not isinstance(inner, dict):
        inner = table[parts[1]] = {}
    inner[parts[2]] = copy.deepcopy(value)


def _absolute_paths(mapping: dict, folder: Path) -> None:
    """Make a relative ``initial.path`` absolute, so the task's spec text runs anywhere."""
    initial = mapping.get("initial")
    if isinstance(initial, dict) and isinstance(initial.get("path"), str):
        path = Path(initial["path"]).expanduser()
        if not path.is_absolute():
            initial["path"] = str((folder / path).resolve())


def _describe(overrides: dict) -> str:
    return ", ".join(f"{key} = {json.dumps(value)}" for key, value in overrides.items())


def _point_tasks(index, overrides, base, folder, seed, batch, source) -> list[Task]:
    mapping = copy.deepcopy(base)
    for key, value in overrides.items():
        _apply(mapping, key, value)
    _absolute_paths(mapping, folder)
    ensemble = mapping.setdefault("ensemble", {})
    if not isinstance(ensemble, dict):
        _fail(f"base: ensemble = {ensemble!r} is not a table", "ensemble", ensemble, source)
    replicas = ensemble.get("replicas", DEFAULT_REPLICAS)
    ensemble["seed"] = 0
    where = f"point {index} ({_describe(overrides)})"
    _validate(mapping, where, overrides, source)  # checks ensemble.replicas among the rest
    size = replicas if batch is None else min(batch, replicas)
    count = math.ceil(replicas / size)
    tasks = []
    for b in range(count):
        n = size if b < count - 1 else replicas - size * (count - 1)
        s = task_seed(seed, index, b)
        ensemble["replicas"], ensemble["seed"] = n, s
        header = (f"# coarsen sweep task: point {index} ({_describe(overrides)}), batch {b} of "
                  f"{count}, {n} replicas; seed from SeedSequence([{seed}, {index}, {b}])\n")
        text = header + to_toml(mapping)
        if b in (0, count - 1):
            _validate(mapping, where, overrides, source, text)
        tasks.append(Task(point=index, batch=b, replicas=n, seed=s, spec_text=text,
                          part=f"point-{index:04d}-batch-{b:03d}.nc"))
    return tasks


def _validate(mapping, where, overrides, source, text=None) -> None:
    try:
        spec_from_mapping(copy.deepcopy(mapping), text=text)
    except SpecError as error:
        key = error.key
        culprit = next((k for k in overrides if key is not None and
                        (key == k or key.startswith(k + ".") or k.startswith(key + "."))), None)
        prefix = f"grid {culprit!r} at {where}" if culprit else f"base spec at {where}"
        raise SweepError(f"{prefix}: {error.message}", key=culprit or key, value=error.value,
                         allowed=error.allowed, source=source) from None
