"""Property tests: on arbitrary input only the documented error type escapes the readers.

* :func:`coarsen.spec.parse_spec` and :func:`coarsen.spec.spec_from_mapping` raise only
  :class:`coarsen.spec.SpecError` (``SpecTypeError`` is one);
* :func:`coarsen.sweep_file.parse_sweep` raises only :class:`coarsen.sweep_file.SweepError`;
* :func:`coarsen.labdata.load_snapshots`, :func:`coarsen.fit.inputs.read_length_table` and
  :func:`coarsen.fit.collapse_inputs.read_curve_table` raise only ``ValueError``, whose
  message names the file.

Inputs are random text, random bytes, random arrays, and random variations of valid specs
and sweeps (one key at a time replaced by a value of any type), so that the checks past the
TOML parser are reached too. Lattices stay small (the memory check refuses the large ones).
"""

from __future__ import annotations

import copy
import string
import tomllib

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp

from coarsen.fit.collapse_inputs import read_curve_table
from coarsen.fit.inputs import read_length_table
from coarsen.labdata import load_snapshots
from coarsen.spec import TABLE_KEYS, SpecError, parse_spec, spec_from_mapping, to_toml
from coarsen.sweep_file import SweepError, parse_sweep

BASE = {
    "lattice": {"kind": "square", "size": [6, 6], "boundary": "periodic"},
    "model": {"J": 1.0, "h": 0.0},
    "dynamics": {"rule": "glauber", "acceptance": "heat-bath", "update": "random"},
    "temperature": {"value": 1.0},
    "initial": {"state": "random", "magnetization": 0.0},
    "measure": {"times": [0, 1, 2], "order": "ferro", "snapshots": 1},
    "ensemble": {"replicas": 2, "seed": 1},
}

_scalars = st.one_of(
    st.none(), st.booleans(), st.integers(-3, 12), st.integers(), st.floats(),
    st.text(max_size=12), st.sampled_from(["square", "chain", "cubic", "triangular", "glauber",
                                           "kawasaki", "checkerboard", "neel", "file", "disk",
                                           "log", "linear", "zigzag", "open"]))
_values = st.recursive(
    _scalars,
    lambda inner: st.one_of(st.lists(inner, max_size=4),
                            st.dictionaries(st.text(string.ascii_lowercase, max_size=8), inner,
                                            max_size=4)),
    max_leaves=8)
_keys = st.sampled_from([(table, key) for table, keys in TABLE_KEYS.items() for key in keys]
                        + [("lattice", "sise"), ("extra", "key"), ("measure", "at")])


def _mutated(changes):
    mapping = copy.deepcopy(BASE)
    for (table, key), value in changes:
        if value is None:
            mapping.get(table, {}).pop(key, None)
        else:
            mapping.setdefault(table, {})[key] = value
    return mapping


_small_sizes = st.lists(st.one_of(st.integers(-2, 9), st.just(10**12)), min_size=0, max_size=4)
_changes = st.lists(st.tuples(_keys, st.one_of(_values, _small_sizes)), min_size=1, max_size=3)


def _refuses_only(error_type, call, *args):
    try:
        call(*args)
    except error_type as error:
        text = str(error)
        assert text and "\n" not in text, repr(text)
    # anything else propagates and fails the test


@given(st.text(max_size=300))
def test_parse_spec_arbitrary_text(text):
    _refuses_only(SpecError, parse_spec, text, "random.toml")


@given(_changes)
@settings(max_examples=300)
def test_spec_from_mapping_variations(changes):
    mapping = _mutated(changes)
    if mapping["lattice"].get("kind") != "square" or mapping["lattice"].get("size") != [6, 6]:
        # keep the sizes the strategy draws small or far too large
        size = mapping["lattice"].get("size")
        if isinstance(size, list):
            assume(all(not isinstance(n, int) or isinstance(n, bool) or n < 64 or n >= 10**12
                       for n in size))
    _refuses_only(SpecError, spec_from_mapping, mapping)


@given(_changes)
@settings(max_examples=100)
def test_parse_spec_of_written_variations(changes):
    """The same variations as TOML text (where TOML can write them)."""
    mapping = _mutated(changes)
    size = mapping["lattice"].get("size")
    if isinstance(size, list):
        assume(all(not isinstance(n, int) or isinstance(n, bool) or n < 64 or n >= 10**12
                   for n in size))
    try:
        text = to_toml(mapping)
        tomllib.loads(text)
    except (SpecError, tomllib.TOMLDecodeError, ValueError, TypeError):
        assume(False)
    _refuses_only(SpecError, parse_spec, text)


@given(st.text(max_size=300))
def test_parse_sweep_arbitrary_text(text):
    _refuses_only(SweepError, parse_sweep, text, None)


_grid_keys = st.sampled_from(["temperature.value", "temperature.relative", "lattice.size",
                              "ensemble.replicas", "ensemble.seed", "measure.times.count",
                              "temperature.ramp.duration", "dynamics.rule", "lattice",
                              "nonsense.key", "measure.times"])


@given(grid=st.dictionaries(_grid_keys, st.one_of(_values, st.lists(_small_sizes, max_size=3)),
                            max_size=3),
       seed=st.one_of(st.integers(-2, 10), _scalars),
       batch=st.one_of(st.none(), st.integers(-1, 4), _scalars),
       combine=st.one_of(st.sampled_from(["product", "zip"]), _scalars))
@settings(max_examples=200)
def test_parse_sweep_variations(grid, seed, batch, combine):
    for value in grid.values():
        if isinstance(value, list):
            for entry in value:
                if isinstance(entry, list):
                    assume(all(not isinstance(n, int) or isinstance(n, bool) or n < 64
                               or n >= 10**12 for n in entry))
    mapping = {"base": BASE, "seed": seed, "grid": grid}
    if batch is not None:
        mapping["batch"] = batch
    mapping["combine"] = combine
    try:
        text = to_toml(mapping)
        tomllib.loads(text)
    except (SpecError, tomllib.TOMLDecodeError, ValueError, TypeError):
        assume(False)
    _refuses_only(SweepError, parse_sweep, text, None)


# ---- lab files -------------------------------------------------------------------------------
_files = settings(max_examples=120, suppress_health_check=[HealthCheck.function_scoped_fixture])


def _named(path):
    def check(call, *args, **kwargs):
        try:
            call(*args, **kwargs)
        except ValueError as error:
            text = str(error)
            assert "\n" not in text and path.name in text, text
    return check


@_files
@given(data=st.binary(max_size=400), suffix=st.sampled_from([".npy", ".npz", ".nc", ".dat"]))
def test_load_snapshots_arbitrary_bytes(tmp_path, data, suffix):
    path = tmp_path / f"shots{suffix}"
    path.write_bytes(data)
    _named(path)(load_snapshots, path)


_dtypes = st.one_of(hnp.integer_dtypes(), hnp.floating_dtypes(), hnp.boolean_dtypes(),
                    hnp.complex_number_dtypes(), hnp.unicode_string_dtypes(max_len=2),
                    hnp.datetime64_dtypes())


@_files
@given(array=hnp.arrays(_dtypes, hnp.array_shapes(min_dims=0, max_dims=4, max_side=5)),
       kind=st.sampled_from([None, "chain", "square", "triangular", "cubic"]),
       boundary=st.sampled_from(["open", "periodic"]))
def test_load_snapshots_arbitrary_arrays(tmp_path, array, kind, boundary):
    path = tmp_path / "shots.npy"
    np.save(path, array)
    _named(path)(load_snapshots, path, kind=kind, boundary=boundary)


@_files
@given(spins=hnp.arrays(np.int8, hnp.array_shapes(min_dims=1, max_dims=3, max_side=5),
                        elements=st.sampled_from([-1, 0, 1, 2])),
       times=st.one_of(st.none(), hnp.arrays(np.float64, st.integers(0, 6))),
       mask=st.one_of(st.none(), hnp.arrays(st.sampled_from([np.bool_, np.int64, np.float64]),
                                            hnp.array_shapes(min_dims=0, max_dims=3,
                                                             max_side=5))))
def test_load_snapshots_arbitrary_archives(tmp_path, spins, times, mask):
    path = tmp_path / "shots.npz"
    arrays = {"spins": spins}
    if times is not None:
        arrays["times"] = times
    if mask is not None:
        arrays["mask"] = mask
    np.savez(path, **arrays)
    _named(path)(load_snapshots, path)


_cells = st.one_of(st.sampled_from(["1", "2.5", "-1", "0", "nan", "inf", "", "x", "1e400",
                                    " 3 ", '"4"']), st.text(max_size=5))
_headers = st.lists(st.sampled_from(["time", "length", "length_err", "replicas", "parameter",
                                     "x", "y", "y_err", "other", ""]), max_size=5)


def _table(header, rows, comments):
    lines = [f"# {c}" for c in comments] + [",".join(header)]
    lines += [",".join(row) for row in rows]
    return "\n".join(lines) + "\n"


@_files
@given(header=_headers, rows=st.lists(st.lists(_cells, max_size=5), max_size=6),
       comments=st.lists(st.text(max_size=20).map(lambda s: s.replace("\n", " ")),
                         max_size=2),
       raw=st.one_of(st.none(), st.binary(max_size=200)))
def test_tables_refuse_only_with_value_error(tmp_path, header, rows, comments, raw):
    path = tmp_path / "table.csv"
    if raw is not None:
        path.write_bytes(raw)
    else:
        path.write_text(_table(header, rows, comments), encoding="utf-8")
    _named(path)(read_length_table, path)
    _named(path)(read_curve_table, path)


def test_valid_inputs_still_read(tmp_path):
    """The properties above would pass vacuously if the readers refused everything."""
    spec_from_mapping(copy.deepcopy(BASE))
    parse_sweep(to_toml({"base": BASE, "seed": 1, "grid": {"temperature.value": [1.0, 2.0]}}))
    path = tmp_path / "shots.npy"
    np.save(path, np.ones((2, 5, 5), dtype=np.int8))
    assert load_snapshots(path).spins.shape == (2, 5, 5)
    table = tmp_path / "lengths.csv"
    table.write_text("time,length\n1,2\n2,3\n", encoding="utf-8")
    assert len(read_length_table(table)) == 2
    curves = tmp_path / "curves.csv"
    curves.write_text("parameter,x,y,y_err\n" + "".join(
        f"{p},{x},{1 / (x + p)},0.1\n" for p in (1, 2) for x in (1, 2, 3)), encoding="utf-8")
    with pytest.raises(ValueError):  # only checks it reaches the family validation
        read_curve_table(tmp_path / "missing.csv")
    assert read_curve_table(curves) is not None
