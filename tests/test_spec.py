"""The spec layer: defaults, every kind of mistake named by its key, times, round trips."""

import dataclasses
import math
import tomllib
from pathlib import Path

import numpy as np
import pytest

from coarsen.lattice import CRITICAL_TEMPERATURE
from coarsen.spec import (
    Spec,
    SpecError,
    SpecTypeError,
    load_spec,
    parse_spec,
    spec_from_mapping,
    to_toml,
)

SPEC_DIR = Path(__file__).resolve().parents[1] / "data" / "specs"

#: Onsager (1944): Tc of the square lattice, 2 / ln(1 + sqrt 2).
SQUARE_TC = 2.0 / math.log(1.0 + math.sqrt(2.0))

MINIMAL = """
[lattice]
kind = "square"
size = [32, 16]

[dynamics]
rule = "glauber"

[temperature]
value = 1.5

[measure]
times = [1, 10, 100]

[ensemble]
seed = 42
"""


def _edit(old: str, new: str, text: str = MINIMAL) -> str:
    assert old in text, old
    return text.replace(old, new, 1)


def _error(text: str, source: str = "run.toml") -> SpecError:
    with pytest.raises(SpecError) as info:
        parse_spec(text, source)
    error = info.value
    message = str(error)
    assert "\n" not in message, "messages are one line (the CLI prints them as they are)"
    assert message.startswith(f"{source}: ")
    assert error.source == source
    return error


# --- defaults and a full spec -----------------------------------------------------------------
def test_minimal_spec_takes_the_documented_defaults():
    spec = parse_spec(MINIMAL)
    assert isinstance(spec, Spec)
    assert spec.lattice.kind == "square" and spec.lattice.size == (32, 16)
    assert spec.lattice.boundary == "periodic"
    assert (spec.J, spec.h) == (1.0, 0.0)
    assert (spec.rule, spec.acceptance, spec.update) == ("glauber", "heat-bath", "random")
    assert spec.temperature.is_constant and spec.temperature.at(0.0) == 1.5
    assert (spec.initial.state, spec.initial.magnetization, spec.initial.exact) == \
        ("random", 0.0, None)
    assert spec.times == (1, 10, 100) and spec.final_time == 100
    assert spec.order == "ferro"
    assert spec.snapshots == 0 and spec.snapshot_times == ()
    assert spec.replicas == 8 and spec.seed == 42
    assert spec.equilibrium_energy is None
    assert spec.text == MINIMAL and spec.source is None
    with pytest.raises(dataclasses.FrozenInstanceError):
        spec.seed = 1


def test_every_key_given():
    text = """
[lattice]
kind = "cubic"
size = [6, 4, 8]
boundary = "open"
[model]
J = -0.5
h = 0.25
[dynamics]
rule = "kawasaki-nonlocal"
acceptance = "metropolis"
update = "random"
[temperature]
points = [[0, 3.0], [50, 1.0]]
[initial]
state = "random"
magnetization = -0.4
exact = false
[measure]
times = { start = 0, stop = 100, count = 5, spacing = "linear" }
order = "neel"
snapshots = 2
equilibrium_energy = -0.9
[ensemble]
replicas = 3
seed = 9223372036854775807
"""
    spec = parse_spec(text, "full.toml")
    assert spec.lattice.describe() == "cubic 6x4x8 open"
    assert (spec.J, spec.h) == (-0.5, 0.25)
    assert (spec.rule, spec.acceptance) == ("kawasaki-nonlocal", "metropolis")
    assert spec.temperature.points == ((0.0, 3.0), (50.0, 1.0))
    assert spec.initial.exact is False and spec.initial.magnetization == -0.4
    assert spec.times == (0, 25, 50, 75, 100)
    assert spec.order == "neel" and spec.snapshot_times == (0, 100)
    assert spec.equilibrium_energy == -0.9
    assert (spec.replicas, spec.seed) == (3, 2**63 - 1)
    assert spec.source == "full.toml"


@pytest.mark.parametrize("path", sorted(SPEC_DIR.glob("*.toml")), ids=lambda p: p.name)
def test_example_specs_parse_and_round_trip(path):
    spec = load_spec(path)
    assert spec.source == str(path) and spec.text == path.read_text()
    again = spec_from_mapping(tomllib.loads(to_toml(tomllib.loads(spec.text))))
    assert dataclasses.replace(again, text=spec.text, source=spec.source) == spec
    assert 0 < spec.final_time <= 10_000 and spec.replicas >= 1


def test_example_specs_are_the_ones_described():
    names = {p.name for p in SPEC_DIR.glob("*.toml")}
    assert {"quench.toml", "conserved.toml"} <= names
    quench = load_spec(SPEC_DIR / "quench.toml")
    assert quench.lattice.size == (256, 256) and quench.replicas == 16
    assert (quench.rule, quench.acceptance, quench.update) == ("glauber", "heat-bath", "random")
    assert quench.temperature.at(0.0) == pytest.approx(0.5 * SQUARE_TC, rel=1e-15)
    assert quench.times[0] == 1 and quench.final_time == 1000 and 20 <= len(quench.times) <= 25
    assert len(quench.snapshot_times) == 4 and quench.snapshot_times[-1] == 1000
    conserved = load_spec(SPEC_DIR / "conserved.toml")
    assert conserved.rule == "kawasaki" and conserved.lattice.size == (128, 128)
    assert conserved.initial.is_exact(conserved.rule)


def test_mapping_without_text_stores_a_text_that_parses_back():
    mapping = tomllib.loads(_edit("value = 1.5", 'relative_points = [[0, 2.0], [10, 0.5]]'))
    mapping["lattice"]["size"] = [8, 8]
    mapping["measure"]["times"] = {"start": 1, "stop": 64, "count": 7}
    spec = spec_from_mapping(mapping, source="grid point 3")
    assert spec.source == "grid point 3"
    assert spec_from_mapping(tomllib.loads(spec.text), "grid point 3", spec.text) == spec
    assert spec.times == (1, 2, 4, 8, 16, 32, 64)


# --- temperatures -----------------------------------------------------------------------------
def test_relative_temperature_is_a_fraction_of_tc():
    for kind, size in (("square", "[8, 8]"), ("triangular", "[6, 6]"), ("cubic", "[4, 4, 4]")):
        text = _edit('kind = "square"\nsize = [32, 16]', f'kind = "{kind}"\nsize = {size}')
        spec = parse_spec(_edit("value = 1.5", "relative = 0.5", text))
        # Onsager (1944), Houtappel (1950), Ferrenberg, Xu & Landau (2018)
        assert spec.temperature.at(3.0) == 0.5 * CRITICAL_TEMPERATURE[kind]
    # Tc scales with |J| (units J = k_B = 1); the bipartite antiferromagnet has the same |Tc|
    twice = parse_spec(_edit("[dynamics]", "[model]\nJ = -2.0\n[dynamics]",
                             _edit("value = 1.5", "relative = 0.5")))
    assert twice.temperature.at(0.0) == pytest.approx(SQUARE_TC, rel=1e-15)
    assert twice.tc == pytest.approx(2 * SQUARE_TC, rel=1e-15)


def test_relative_points_scale_every_temperature():
    spec = parse_spec(_edit("value = 1.5", "relative_points = [[0, 2.0], [40, 2.0], [40, 0.25]]"))
    np.testing.assert_allclose(spec.temperature.values, [2 * SQUARE_TC, 2 * SQUARE_TC,
                                                         0.25 * SQUARE_TC], rtol=1e-15)
    assert spec.temperature.at(40.0) == pytest.approx(0.25 * SQUARE_TC, rel=1e-15)


def test_relative_temperature_without_a_transition():
    chain = _edit('kind = "square"\nsize = [32, 16]', 'kind = "chain"\nsize = [40]')
    error = _error(_edit("value = 1.5", "relative = 0.3", chain))
    assert error.key == "temperature.relative" and "Tc = 0" in str(error) and "0.3" in str(error)
    triangular = _edit('kind = "square"\nsize = [32, 16]', 'kind = "triangular"\nsize = [6, 6]')
    frustrated = _edit("[dynamics]", "[model]\nJ = -1.0\n[dynamics]", triangular)
    error = _error(_edit("value = 1.5", "relative_points = [[0, 1.0]]", frustrated))
    assert error.key == "temperature.relative_points"


def test_two_temperature_forms_at_once():
    error = _error(_edit("value = 1.5", "value = 1.5\nrelative = 0.5"))
    assert error.key == "temperature" and error.value == ("value", "relative")
    assert "value and relative are both given" in str(error)
    assert error.allowed == ("value", "relative", "points", "relative_points", "ramp")


def test_no_temperature_form():
    error = _error(_edit("value = 1.5", ""))
    assert error.key == "temperature" and "missing" in str(error)
    assert "value, relative, points, relative_points" in str(error)


def test_bad_temperature_points():
    error = _error(_edit("value = 1.5", "points = [[0, 2.0], [10, -1.0]]"))
    assert error.key == "temperature.points" and "temperature.points[1]" in str(error)
    assert "-1.0" in str(error)
    error = _error(_edit("value = 1.5", "points = [[5, 2.0]]"))
    assert "starts at time 0" in str(error)
    error = _error(_edit("value = 1.5", "value = -0.1"))
    assert error.key == "temperature.value" and "-0.1 is out of range" in str(error)


def test_ramp_through_tc():
    tc = 2 / math.log(1 + math.sqrt(2))
    spec = parse_spec(_edit("value = 1.5", "ramp = { start = 1.5, stop = 0.5, duration = 100, "
                                           "relative = true }"))
    assert np.allclose(spec.temperature.at([0, 50, 100, 150]), [1.5 * tc, tc, 0.5 * tc, 0.5 * tc])
    error = _error(_edit("value = 1.5", "ramp = { start = 1.5, stop = 0.5 }"))
    assert error.key == "temperature.ramp.duration" and "missing" in str(error)
    error = _error(_edit("value = 1.5", "ramp = { start = 1.5, stop = 0.5, duration = 100, "
                                        "speed = 2 }"))
    assert error.key == "temperature.ramp.speed" and "unknown key" in str(error)
    error = _error(_edit("value = 1.5", "ramp = { start = 1.5, stop = 0.5, duration = 50, "
                                        "hold = 20 }"))
    assert error.key == "measure.times" and "past the end of the ramp" in str(error)


def test_ramp_scan_lists_durations_and_gives_one_spec_per_duration():
    spec = parse_spec(_edit("value = 1.5", "ramp = { start = 1.5, stop = 0.5, "
                                           "duration = [400, 100], relative = true }"))
    assert spec.is_ramp_scan and spec.ramp_times == (100.0, 400.0)
    variants = [spec.variant(i) for i in range(2)]
    assert [v.temperature.points[-1][0] for v in variants] == [100.0, 400.0]
    assert not any(v.is_ramp_scan for v in variants)
    assert len({spec.seed, variants[0].seed, variants[1].seed}) == 3
    assert variants[0].text != variants[1].text and variants[0].text.startswith(spec.text.rstrip())
    for bad, key, words in [("[10, 10]", "temperature.ramp.duration", "listed twice"),
                            ("[]", "temperature.ramp.duration", "lists no durations"),
                            ("[10, -5]", "temperature.ramp.duration[1]", "out of range")]:
        error = _error(_edit("value = 1.5", f"ramp = {{ start = 1.5, stop = 0.5, "
                                            f"duration = {bad} }}"))
        assert error.key == key and words in str(error), str(error)
    error = _error(_edit("value = 1.5", "ramp = { start = 1.5, stop = 0.5, duration = [40, 400], "
                                        "hold = 20 }"))
    assert error.key == "measure.times" and "shortest ramp" in str(error)
    with pytest.raises(ValueError, match="not a ramp scan"):
        parse_spec(MINIMAL).variant(0)


def test_field_table_replaces_the_constant_field():
    constant = parse_spec(_edit("[dynamics]", "[model]\nh = 0.25\n[dynamics]"))
    table = parse_spec(MINIMAL + "\n[field]\nvalue = 0.25\n")
    assert constant.h == table.h == 0.25 and constant.field == table.field
    ramp = parse_spec(MINIMAL + "\n[field]\nramp = { start = 0.5, stop = -0.5, duration = 40 }\n")
    assert np.allclose(ramp.field.at([0, 20, 40, 80]), [0.5, 0.0, -0.5, -0.5])
    with pytest.raises(ValueError, match="varies in time"):
        ramp.h
    points = parse_spec(MINIMAL + "\n[field]\npoints = [[0, 0.0], [10, 0.0], [10, -1.0]]\n")
    assert points.field.at([9, 10]).tolist() == [0.0, -1.0]
    for extra, key, words in [
            ("[model]\nh = 0.1\n[field]\nvalue = 0.2\n", "model.h", "replaces it"),
            ("[field]\nvalue = 0.1\npoints = [[0, 1.0]]\n", "field", "exactly one of"),
            ("[field]\nramp = { start = 1, stop = 0, duration = 10, relative = true }\n",
             "field.ramp.relative", "unknown key"),
            ("[field]\nramp = { start = 1, stop = 0 }\n", "field.ramp.duration", "missing"),
            ("[field]\nvalue = nan\n", "field.value", "not finite"),
            ("[field]\nramp = { start = 1, stop = 0, duration = 1, hold = 2 }\n",
             "measure.times", "past the end of the ramp")]:
        error = _error(MINIMAL + "\n" + extra)
        assert error.key == key and words in str(error), str(error)


# --- measurement times --------------------------------------------------------------------------
def test_log_times_are_rounded_and_deduplicated():
    spec = parse_spec(_edit("times = [1, 10, 100]",
                            'times = { start = 1, stop = 1000, count = 25, spacing = "log" }'))
    # by definition: t_k = 1000 ** (k / 24), rounded to the nearest whole sweep
    expected = sorted({math.floor(1000 ** (k / 24) + 0.5) for k in range(25)})
    assert spec.times == tuple(expected)
    assert len(spec.times) == 23  # 1.33 -> 1 and 2.37 -> 2 merge with their neighbours


def test_log_is_the_default_spacing_and_linear_times():
    log = parse_spec(_edit("times = [1, 10, 100]", "times = { start = 10, stop = 1000, count = 3 }"))
    assert log.times == (10, 100, 1000)
    linear = parse_spec(_edit("times = [1, 10, 100]",
                              'times = { start = 0, stop = 9, count = 4, spacing = "linear" }'))
    assert linear.times == (0, 3, 6, 9)


@pytest.mark.parametrize("times", ["[10, 0, 2.4, 2.6, 3, 10.0, 0.5]",
                                   "{ at = [10, 0, 2.4, 2.6, 3, 10.0, 0.5] }"])
def test_explicit_times_are_rounded_sorted_and_unique(times):
    spec = parse_spec(_edit("times = [1, 10, 100]", f"times = {times}"))
    assert spec.times == (0, 1, 2, 3, 10)  # 0.5 rounds up, 2.4 down, 2.6 up
    assert all(type(t) is int for t in spec.times)


@pytest.mark.parametrize("times, key, fragment", [
    ("[]", "measure.times", "[] has no times"),
    ("[1, -2]", "measure.times", "-2 is out of range"),
    ('[1, "ten"]', "measure.times", "'ten' is not a number"),
    ("5", "measure.times", "5 is neither a list"),
    ("{ start = 0, stop = 10, count = 3 }", "measure.times.start", "(log spacing) >= 1.0"),
    ("{ start = 10, stop = 10, count = 3 }", "measure.times.stop", "10 is out of range"),
    ("{ start = 1, stop = 10, count = 1 }", "measure.times.count", "1 is out of range"),
    ("{ start = 1, stop = 10, count = 3.0 }", "measure.times.count", "3.0 is not an integer"),
    ("{ start = 1, stop = 10 }", "measure.times.count", "missing"),
    ('{ start = 1, stop = 10, count = 3, spacing = "lin" }', "measure.times.spacing",
     "'lin' is not a spacing; choose one of 'log', 'linear'"),
    ("{ strat = 1, stop = 10, count = 3 }", "measure.times.strat", "did you mean 'start'?"),
    ("{ at = [1], count = 3 }", "measure.times", "'at' and 'count' are both given"),
    ("[1, 1e17]", "measure.times", "beyond the largest time"),
])
def test_bad_times(times, key, fragment):
    error = _error(_edit("times = [1, 10, 100]", f"times = {times}"))
    assert error.key == key
    assert str(error).startswith(f"run.toml: {key}")
    assert fragment in str(error)


@pytest.mark.parametrize("count, expected", [
    (0, ()), (1, (100,)), (2, (1, 100)), (3, (1, 10, 100)),
])
def test_snapshot_times_are_evenly_chosen_and_include_the_last(count, expected):
    spec = parse_spec(_edit("[ensemble]", f"snapshots = {count}\n[ensemble]"))
    assert spec.snapshot_times == expected


def test_snapshot_times_spread_over_many_times():
    spec = parse_spec(_edit("times = [1, 10, 100]", "times = { start = 0, stop = 10, count = 11, "
                            'spacing = "linear" }\nsnapshots = 4'))
    assert spec.snapshot_times == (0, 3, 7, 10)


# --- one test per kind of mistake ----------------------------------------------------------------
def test_unknown_key_gets_a_suggestion():
    error = _error(_edit('rule = "glauber"', 'rule = "glauber"\nacceptence = "metropolis"'))
    assert error.key == "dynamics.acceptence" and error.value == "metropolis"
    assert "unknown key" in str(error) and "did you mean 'acceptance'?" in str(error)
    assert error.allowed == ("rule", "acceptance", "update")


def test_unknown_table_gets_a_suggestion():
    error = _error(MINIMAL + "\n[ensembel]\nreplicas = 2\n")
    assert error.key == "ensembel" and "unknown table" in str(error)
    assert "did you mean 'ensemble'?" in str(error)
    error = _error("replicas = 4\n" + MINIMAL)
    assert error.key == "replicas" and "did you mean 'ensemble.replicas'?" in str(error)


def test_bad_choice_lists_what_is_allowed():
    error = _error(_edit('rule = "glauber"', 'rule = "glaubr"'))
    assert error.key == "dynamics.rule" and error.value == "glaubr"
    assert error.allowed == ("glauber", "kawasaki", "kawasaki-nonlocal")
    assert "'glaubr' is not a rule; choose one of 'glauber', 'kawasaki', 'kawasaki-nonlocal'" \
        in str(error)
    assert "did you mean 'glauber'?" in str(error)


@pytest.mark.parametrize("old, new, key, fragment", [
    ("seed = 42", "seed = 42.0", "ensemble.seed", "42.0 is not an integer"),
    ("seed = 42", 'seed = "42"', "ensemble.seed", "'42' is not an integer"),
    ("seed = 42", "seed = 42\nreplicas = true", "ensemble.replicas", "True is not an integer"),
    ("value = 1.5", 'value = "hot"', "temperature.value", "'hot' is not a number"),
    ('rule = "glauber"', "rule = 1", "dynamics.rule", "1 is not a string"),
    ("size = [32, 16]", "size = 32", "lattice.size", "32 is not a list"),
    ("size = [32, 16]", "size = [32, 16.5]", "lattice.size", "16.5 is not an integer"),
    ('[lattice]\nkind = "square"\nsize = [32, 16]\n', "lattice = 3\n", "lattice",
     "3 is not a table"),
    ("[ensemble]", '[initial]\nexact = "yes"\n[ensemble]', "initial.exact",
     "'yes' is not true or false"),
])
def test_wrong_type(old, new, key, fragment):
    with pytest.raises(SpecTypeError) as info:
        parse_spec(_edit(old, new), "run.toml")
    error = info.value
    assert isinstance(error, TypeError) and isinstance(error, SpecError)
    assert error.key == key and str(error).startswith(f"run.toml: {key}: ")
    assert fragment in str(error)


@pytest.mark.parametrize("old, new, key, fragment", [
    ("seed = 42", "seed = -1", "ensemble.seed", "-1 is out of range; give a seed"),
    ("seed = 42", "seed = 42\nreplicas = 0", "ensemble.replicas", "0 is out of range"),
    ("[ensemble]", "[initial]\nmagnetization = 1.2\n[ensemble]", "initial.magnetization",
     "1.2 is out of range; give a finite magnetization >= -1.0 and <= 1.0"),
    ("[ensemble]", "snapshots = 4\n[ensemble]", "measure.snapshots",
     "4 is out of range; give a number of snapshots (at most one per measurement time) >= 0 "
     "and <= 3"),
    ("[dynamics]", "[model]\nJ = inf\n[dynamics]", "model.J", "inf is not finite"),
    ("[dynamics]", "[model]\nh = nan\n[dynamics]", "model.h", "nan is not finite"),
])
def test_out_of_range(old, new, key, fragment):
    error = _error(_edit(old, new))
    assert error.key == key and fragment in str(error)


@pytest.mark.parametrize("key, old", [
    ("lattice.kind", 'kind = "square"\n'), ("lattice.size", "size = [32, 16]\n"),
    ("dynamics.rule", 'rule = "glauber"\n'), ("measure.times", "times = [1, 10, 100]\n"),
    ("ensemble.seed", "seed = 42\n"),
])
def test_missing_required_key(key, old):
    error = _error(_edit(old, ""))
    assert error.key == key and error.value is None
    assert str(error).startswith(f"run.toml: {key}: missing; the spec must give it, e.g. ")


def test_initial_keys_belong_to_the_random_state():
    error = _error(_edit("[ensemble]", '[initial]\nstate = "up"\nmagnetization = 0.2\n[ensemble]'))
    assert error.key == "initial.magnetization" and "state 'random' only" in str(error)
    error = _error(_edit("[ensemble]", '[initial]\nstate = "zigzag"\n[ensemble]'))
    assert error.key == "initial.amplitude" and "missing" in str(error)
    error = _error(_edit("[ensemble]", '[initial]\nstate = "disk"\nradius = 3\nwidth = 2\n'
                                       '[ensemble]'))
    assert error.key == "initial.width" and "state 'stripe' only" in str(error)
    error = _error(_edit("[ensemble]", '[initial]\nstate = "upp"\n[ensemble]'))
    assert "did you mean 'up'?" in str(error)


def test_conserved_rule_defaults_to_an_exact_initial_state():
    spec = parse_spec(_edit('rule = "glauber"', 'rule = "kawasaki"'))
    assert spec.initial.exact is None and spec.initial.is_exact(spec.rule)


@pytest.mark.parametrize("size, fragment", [
    ("[2, 16]", "[2, 16] is too small; every axis of a periodic lattice needs at least 3"),
    ("[32]", "[32] has 1 entries but a square lattice has 2 dimensions"),
])
def test_lattice_errors_are_reported_by_key(size, fragment):
    error = _error(_edit("size = [32, 16]", f"size = {size}"))
    assert error.key == "lattice.size" and fragment in str(error)
    assert str(error).startswith("run.toml: lattice.size: ")
    error = _error(_edit('kind = "square"', 'kind = "hexagonal"'))
    assert error.key == "lattice.kind" and "'hexagonal' is not a lattice kind" in str(error)
    error = _error(_edit("size = [32, 16]", 'size = [32, 16]\nboundary = "fixed"'))
    assert error.key == "lattice.boundary" and error.allowed == ("periodic", "open")


def test_bad_dynamics_combinations():
    error = _error(_edit('rule = "glauber"', 'rule = "kawasaki"\nupdate = "checkerboard"'))
    assert error.key == "dynamics.update" and "'glauber' only" in str(error)
    odd = _edit("size = [32, 16]", "size = [31, 16]")
    error = _error(_edit('rule = "glauber"', 'rule = "glauber"\nupdate = "checkerboard"', odd))
    assert error.key == "lattice.size" and "need every size even" in str(error)
    assert 'dynamics.update = "random"' in str(error)
    triangular = _edit('kind = "square"\nsize = [32, 16]', 'kind = "triangular"\nsize = [6, 4]')
    error = _error(_edit('rule = "glauber"', 'rule = "glauber"\nupdate = "checkerboard"',
                         triangular))
    assert error.key == "lattice.size" and "divisible by 3" in str(error)


def test_chain_metropolis_checkerboard_is_refused_as_non_ergodic():
    # the conserved even-minus-odd bond sum: tests/validation/test_enumeration.py
    chain = _edit('kind = "square"\nsize = [32, 16]', 'kind = "chain"\nsize = [64]')
    text = _edit('rule = "glauber"', 'rule = "glauber"\nacceptance = "metropolis"\n'
                 'update = "checkerboard"', chain)
    error = _error(text)
    assert error.key == "dynamics.update" and "not ergodic" in str(error)
    assert "even- and odd-bond sums" in str(error)
    # heat-bath, or open ends (ergodic by exact reachability), are accepted
    parse_spec(text.replace("metropolis", "heat-bath"))
    parse_spec(_edit("size = [64]", 'size = [64]\nboundary = "open"', text))


def test_rejection_free_updates_for_glauber_and_kawasaki_only():
    for rule in ("glauber", "kawasaki"):
        spec = parse_spec(_edit('rule = "glauber"',
                                f'rule = "{rule}"\nupdate = "rejection-free"'))
        assert spec.update == "rejection-free" and spec.rule == rule
    error = _error(_edit('rule = "glauber"',
                         'rule = "kawasaki-nonlocal"\nupdate = "rejection-free"'))
    assert error.key == "dynamics.update" and error.value == "rejection-free"
    assert "'glauber' and 'kawasaki'" in str(error)


def test_neel_order_needs_a_bipartite_lattice():
    triangular = _edit('kind = "square"\nsize = [32, 16]', 'kind = "triangular"\nsize = [6, 6]')
    error = _error(_edit("[ensemble]", 'order = "neel"\n[ensemble]', triangular))
    assert error.key == "measure.order" and "needs a bipartite lattice" in str(error)
    odd = _edit("size = [32, 16]", "size = [31, 16]")
    assert _error(_edit("[ensemble]", 'order = "neel"\n[ensemble]', odd)).key == "measure.order"
    assert parse_spec(_edit("[ensemble]", 'order = "neel"\n[ensemble]')).order == "neel"


def test_file_not_found(tmp_path):
    missing = tmp_path / "nowhere.toml"
    with pytest.raises(SpecError) as info:
        load_spec(missing)
    assert str(info.value) == f"{missing}: no such spec file"
    assert info.value.source == str(missing) and info.value.key is None
    with pytest.raises(SpecError, match="is a directory"):
        load_spec(tmp_path)


def test_not_utf8(tmp_path):
    path = tmp_path / "latin1.toml"
    path.write_bytes(MINIMAL.replace("[ensemble]", "# caf\xe9\n[ensemble]").encode("latin-1"))
    with pytest.raises(SpecError, match="not UTF-8 text"):
        load_spec(path)


def test_toml_syntax_error_gives_the_line(tmp_path):
    path = tmp_path / "broken.toml"
    path.write_text(_edit('rule = "glauber"', 'rule = "glauber'))
    with pytest.raises(SpecError) as info:
        load_spec(path)
    message = str(info.value)
    assert message.startswith(f"{path}: TOML syntax error: ") and "line 7" in message
    assert "\n" not in message
