"""Write the bad-input corpus of this directory and its manifest EXPECTED.csv.

Run it from anywhere (``python tests/data/bad/make_bad_inputs.py``) after adding a case; the
files it writes are kept in the repository, so the tests never depend on running it. Each
case is (file name, command, fragment): the command is a ``coarsen`` argument template
(``{file}`` is the bad file, ``{out}`` an output path in a fresh directory), and the fragment
is a piece of the one-line message the command must print on stderr with exit status 2.
Every file is deliberately wrong in exactly one way; the synthetic values mean nothing.
"""

from __future__ import annotations

import csv
import pickle
import zipfile
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent

#: A small valid spec; the cases change one thing in it.
GOOD_SPEC = """\
[lattice]
kind = "{kind}"
size = {size}
boundary = "{boundary}"

[model]
J = {J}
h = 0.0

[dynamics]
rule = "glauber"
acceptance = "heat-bath"
update = "{update}"

[temperature]
{temperature}

[initial]
{initial}

[measure]
times = {times}
order = "{order}"
snapshots = {snapshots}

[ensemble]
replicas = {replicas}
seed = {seed}
"""

DEFAULTS = dict(kind="square", size="[8, 8]", boundary="periodic", J="1.0", update="random",
                temperature="value = 1.0", initial='state = "random"', times="[0, 1, 2]",
                order="ferro", snapshots="1", replicas="2", seed="1")


def spec(**changes) -> str:
    values = dict(DEFAULTS)
    values.update(changes)
    return GOOD_SPEC.format(**values)


RUN = "run {file} -o {out}"
SWEEP = "sweep {file} -o {out}"
MEASURE = "measure {file} -o {out}"
FIT = "fit {file} -o {out} --max-steps 200"
COLLAPSE = "collapse {file} -o {out} --quick"

CASES: list[tuple[str, str, str, object]] = []


def case(name, command, fragment, content):
    CASES.append((name, command, fragment, content))


# ---- spec files ------------------------------------------------------------------------------
case("spec_toml_syntax.toml", RUN, "TOML syntax error", '[lattice\nkind = "square"\n')
case("spec_duplicate_key.toml", RUN, "TOML syntax error",
     spec().replace('kind = "square"', 'kind = "square"\nkind = "cubic"'))
case("spec_empty.toml", RUN, "lattice.kind: missing", "")
case("spec_not_utf8.toml", RUN, "not UTF-8", b"[lattice]\nkind = \"sq\xffuare\"\n")
case("spec_size_string.toml", RUN, "lattice.size", spec(size='"8x8"'))
case("spec_size_float.toml", RUN, "lattice.size", spec(size="[8.5, 8]"))
case("spec_size_dimensions.toml", RUN, "lattice.size", spec(size="[8]"))
case("spec_size_below_minimum.toml", RUN, "lattice.size", spec(size="[2, 2]"))
case("spec_size_negative.toml", RUN, "lattice.size", spec(size="[-8, 8]"))
case("spec_lattice_too_large.toml", RUN, "lattice.size",
     spec(size="[1000000, 1000000]"))
case("spec_lattice_too_large_replicas.toml", RUN, "memory",
     spec(size="[16384, 16384]", replicas="4096"))
case("spec_kind_unknown.toml", RUN, "did you mean 'square'", spec(kind="sqare"))
case("spec_replicas_zero.toml", RUN, "ensemble.replicas", spec(replicas="0"))
case("spec_replicas_string.toml", RUN, "ensemble.replicas", spec(replicas='"8"'))
case("spec_replicas_float.toml", RUN, "ensemble.replicas", spec(replicas="8.0"))
case("spec_seed_missing.toml", RUN, "ensemble.seed: missing",
     spec().replace("seed = 1\n", ""))
case("spec_seed_negative.toml", RUN, "ensemble.seed", spec(seed="-3"))
case("spec_temperature_negative.toml", RUN, "temperature.value",
     spec(temperature="value = -1.0"))
case("spec_temperature_nan.toml", RUN, "temperature.value", spec(temperature="value = nan"))
case("spec_temperature_string.toml", RUN, "temperature.value",
     spec(temperature='value = "cold"'))
case("spec_temperature_two_forms.toml", RUN, "give exactly one of",
     spec(temperature="value = 1.0\nrelative = 0.5"))
case("spec_temperature_missing.toml", RUN, "temperature: missing", spec(temperature=""))
case("spec_relative_on_chain.toml", RUN, "temperature.relative",
     spec(kind="chain", size="[16]", temperature="relative = 0.5"))
case("spec_coupling_infinite.toml", RUN, "model.J", spec(J="inf"))
case("spec_coupling_bool.toml", RUN, "model.J", spec(J="true"))
case("spec_checkerboard_odd.toml", RUN, "lattice.size",
     spec(size="[15, 15]", update="checkerboard"))
case("spec_neel_triangular.toml", RUN, "measure.order",
     spec(kind="triangular", order="neel"))
case("spec_neel_odd_periodic.toml", RUN, "measure.order", spec(size="[9, 9]", order="neel"))
case("spec_unknown_key.toml", RUN, "did you mean 'rule'",
     spec().replace('rule = "glauber"', 'rul = "glauber"'))
case("spec_unknown_table.toml", RUN, "did you mean 'ensemble'",
     spec().replace("[ensemble]", "[ensembel]"))
case("spec_rule_unknown.toml", RUN, "dynamics.rule",
     spec().replace('rule = "glauber"', 'rule = "glaubr"'))
case("spec_times_empty.toml", RUN, "measure.times", spec(times="[]"))
case("spec_times_negative.toml", RUN, "measure.times", spec(times="[0, -5]"))
case("spec_times_log_from_zero.toml", RUN, "measure.times.start",
     spec(times="{ start = 0, stop = 100, count = 5 }"))
case("spec_snapshots_too_many.toml", RUN, "measure.snapshots", spec(snapshots="9"))
case("spec_magnetization_range.toml", RUN, "initial.magnetization",
     spec(initial='state = "random"\nmagnetization = 1.5'))
case("spec_initial_file_missing.toml", RUN, "initial.path",
     spec(initial='state = "file"\npath = "no_such_start.npy"'))
case("spec_initial_file_pickle.toml", RUN, "initial.path",
     spec(initial='state = "file"\npath = "lab_object_array.npy"'))
case("spec_initial_file_shape.toml", RUN, "initial.path",
     spec(initial='state = "file"\npath = "lab_values_two.npy"'))
case("spec_output_is_input.toml", "run {file} -o {file}", "is the input", spec())
case("spec_output_is_start_file.toml", "run {file} -o {dir}/start_8x8.npy", "initial.path",
     spec(initial='state = "file"\npath = "start_8x8.npy"'))

# ---- lab snapshot stacks ---------------------------------------------------------------------
rng = np.random.default_rng(20261201)
good = np.where(rng.random((3, 8, 8)) < 0.5, 1, -1).astype(np.int8)
case("lab_empty.npy", MEASURE, "not a readable NumPy file", b"")
case("lab_truncated.npy", MEASURE, "lab_truncated.npy", "npy-truncated")
case("lab_one_axis.npy", MEASURE, "expected (shots, n_x", np.ones(16, dtype=np.int8))
case("lab_five_axes.npy", MEASURE, "expected (shots, n_x", np.ones((2, 3, 3, 3, 3), np.int8))
case("lab_no_shots.npy", MEASURE, "holds no shots", np.ones((0, 8, 8), dtype=np.int8))
case("lab_values_two.npy", MEASURE, "expected {0, 1} or {-1, +1}",
     np.where(good > 0, 2, 0).astype(np.int16))
case("lab_mixed_conventions.npy", MEASURE, "mix the conventions",
     np.concatenate([good, np.zeros((1, 8, 8), np.int8)]))
case("lab_nan.npy", MEASURE, "nan", np.where(good > 0, 1.0, np.nan))
case("lab_infinite.npy", MEASURE, "inf", np.where(good > 0, 1.0, np.inf))
case("lab_complex.npy", MEASURE, "complex", good.astype(np.complex128))
case("lab_strings.npy", MEASURE, "dtype", np.where(good > 0, "u", "d"))
case("lab_object_array.npy", MEASURE, "pickled", "npy-object")
case("lab_plain_pickle.npy", MEASURE, "pickled", "pickle")
case("lab_axis_too_short.npy", MEASURE, "too small", np.ones((2, 1, 8), dtype=np.int8))
case("lab_npz_no_spins.npz", MEASURE, "no array named 'spins'", {"configs": good})
case("lab_npz_extra_array.npz", MEASURE, "unexpected arrays",
     {"spins": good, "notes": np.arange(3)})
case("lab_npz_object.npz", MEASURE, "pickled", "npz-object")
case("lab_npz_times_count.npz", MEASURE, "times given for 3 shots",
     {"spins": good, "times": np.array([1.0, 2.0])})
case("lab_npz_times_negative.npz", MEASURE, "times must be finite and >= 0",
     {"spins": good, "times": np.array([1.0, -2.0, 3.0])})
case("lab_npz_times_nan.npz", MEASURE, "times must be finite and >= 0",
     {"spins": good, "times": np.array([1.0, np.nan, 3.0])})
case("lab_npz_mask_shape.npz", MEASURE, "mask has shape",
     {"spins": good, "mask": np.ones((4, 4), bool)})
case("lab_npz_mask_values.npz", MEASURE, "mask must be boolean",
     {"spins": good, "mask": np.full((8, 8), 3)})
case("lab_npz_mask_nothing.npz", MEASURE, "mask excludes every site",
     {"spins": good, "mask": np.zeros((8, 8), bool)})
case("lab_npz_not_zip.npz", MEASURE, "lab_npz_not_zip.npz", b"PK\x03\x04 broken archive")
case("lab_not_netcdf.nc", MEASURE, "not a readable NetCDF", b"CDF\x01 not really netcdf\n")
case("lab_text.txt", MEASURE, "unsupported file type", "1 -1\n-1 1\n")
case("lab_missing.npy", MEASURE, "no such file", None)

# ---- length tables (coarsen fit) -------------------------------------------------------------
ok_rows = "time,length,length_err\n1,2.0,0.1\n2,2.6,0.1\n4,3.4,0.1\n8,4.5,0.2\n"
case("length_empty.csv", FIT, "no header row", "")
case("length_comments_only.csv", FIT, "no header row", "# lattice: square 64x64\n\n")
case("length_no_length_column.csv", FIT, "no 'length' column", "time,size\n1,2\n2,3\n")
case("length_duplicate_column.csv", FIT, "appears more than once",
     "time,length,length\n1,2,2\n2,3,3\n")
case("length_text_value.csv", FIT, "'abc' is not a number", ok_rows + "16,abc,0.2\n")
case("length_nan.csv", FIT, "not a finite number", ok_rows + "16,nan,0.2\n")
case("length_negative.csv", FIT, "column 'length'", ok_rows + "16,-1.0,0.2\n")
case("length_time_zero.csv", FIT, "must be > 0", ok_rows.replace("\n1,", "\n0,"))
case("length_time_decreasing.csv", FIT, "times must increase", ok_rows + "3,5.0,0.2\n")
case("length_short_row.csv", FIT, "missing value", ok_rows + "16\n")
case("length_one_row.csv", FIT, "need at least 2", "time,length\n1,2.0\n")
case("length_error_partial.csv", FIT, "length_err", ok_rows + "16,6.0,\n")
case("length_error_zero.csv", FIT, "length_err", ok_rows + "16,6.0,0\n")
case("length_binary.csv", FIT, "not a text file", b"\xff\xfe\x00\x01time,length")

# ---- curve tables (coarsen collapse) ---------------------------------------------------------
curve_rows = ("parameter,x,y,y_err\n" + "".join(
    f"{p},{x},{1.0 / (1 + x * p):.4f},0.01\n" for p in (1, 2) for x in (0.5, 1, 2, 4)))
case("curve_no_y_err.csv", COLLAPSE, "no 'y_err' column", "parameter,x,y\n1,1,1\n2,1,1\n")
case("curve_one_curve.csv", COLLAPSE, "at least two",
     "parameter,x,y,y_err\n1,1,1,0.1\n1,2,0.5,0.1\n1,3,0.3,0.1\n")
case("curve_text_value.csv", COLLAPSE, "is not a number", curve_rows + "2,8,high,0.01\n")
case("curve_error_negative.csv", COLLAPSE, "y_err", curve_rows + "2,8,0.05,-0.01\n")
case("curve_no_rows.csv", COLLAPSE, "no data rows", "parameter,x,y,y_err\n")

# ---- sweep files -----------------------------------------------------------------------------
base_line = 'base = "sweep_base.toml"\nseed = 7\n'
case("sweep_base.toml", RUN, "", spec())  # the valid base of the sweep cases (not a case)
case("sweep_toml_syntax.toml", SWEEP, "TOML syntax error", base_line + "[grid\n")
case("sweep_seed_missing.toml", SWEEP, "seed: missing",
     'base = "sweep_base.toml"\n[grid]\n"temperature.value" = [1.0, 2.0]\n')
case("sweep_unknown_top_key.toml", SWEEP, "did you mean 'grid'",
     base_line + '[gird]\n"temperature.value" = [1.0, 2.0]\n')
case("sweep_base_missing.toml", SWEEP, "no such spec file",
     'base = "no_such_base.toml"\nseed = 7\n[grid]\n"temperature.value" = [1.0]\n')
case("sweep_grid_missing.toml", SWEEP, "grid: missing", base_line)
case("sweep_grid_not_list.toml", SWEEP, "is not a list of values",
     base_line + '[grid]\n"temperature.value" = 1.0\n')
case("sweep_grid_empty_list.toml", SWEEP, "empty list",
     base_line + '[grid]\n"temperature.value" = []\n')
case("sweep_grid_unknown_key.toml", SWEEP, "did you mean 'relative'",
     base_line + '[grid]\n"temperature.relativ" = [0.3, 0.5]\n')
case("sweep_grid_seed.toml", SWEEP, "cannot be a grid key",
     base_line + '[grid]\n"ensemble.seed" = [1, 2]\n')
case("sweep_grid_repeated_value.toml", SWEEP, "listed twice",
     base_line + '[grid]\n"temperature.value" = [1.0, 1.0]\n')
case("sweep_grid_bad_point.toml", SWEEP, "temperature.value",
     base_line + '[grid]\n"temperature.value" = [1.0, -1.0]\n')
case("sweep_grid_too_large.toml", SWEEP, "lattice.size",
     base_line + '[grid]\n"lattice.size" = [[8, 8], [1000000, 1000000]]\n')
case("sweep_zip_lengths.toml", SWEEP, "one length",
     base_line + 'combine = "zip"\n[grid]\n"temperature.value" = [1.0, 2.0]\n'
     '"lattice.size" = [[8, 8]]\n')
case("sweep_combine_unknown.toml", SWEEP, "combine",
     base_line + 'combine = "cross"\n[grid]\n"temperature.value" = [1.0]\n')
case("sweep_batch_zero.toml", SWEEP, "batch",
     base_line + 'batch = 0\n[grid]\n"temperature.value" = [1.0]\n')


def _write(path: Path, content) -> None:
    if content is None:
        path.unlink(missing_ok=True)
    elif isinstance(content, bytes):
        path.write_bytes(content)
    elif isinstance(content, str) and content == "npy-truncated":
        np.save(path, good)
        path.write_bytes(path.read_bytes()[:100])
    elif isinstance(content, str) and content == "npy-object":
        np.save(path, np.array([{"spins": 1}, None], dtype=object), allow_pickle=True)
    elif isinstance(content, str) and content == "npz-object":
        np.savez(path, spins=np.array([good, "x"], dtype=object))
    elif isinstance(content, str) and content == "pickle":
        path.write_bytes(pickle.dumps({"spins": good.tolist()}))
    elif isinstance(content, str):
        path.write_text(content, encoding="utf-8")
    elif isinstance(content, dict):
        np.savez(path, **content)
    else:
        np.save(path, np.asarray(content))


def main() -> None:
    for name, _, _, content in CASES:
        _write(HERE / name, content)
    np.save(HERE / "start_8x8.npy", good[0])  # a valid start file (output-overwrite case)
    # a NetCDF file without a snapshot variable
    import xarray as xr

    xr.Dataset({"energy": ("time", np.zeros(3))}).to_netcdf(HERE / "lab_no_snapshot.nc",
                                                            engine="h5netcdf")
    rows = [(name, command, fragment) for name, command, fragment, _ in CASES if fragment]
    rows.append(("lab_no_snapshot.nc", MEASURE, "no 'snapshot' variable"))
    with open(HERE / "EXPECTED.csv", "w", newline="", encoding="utf-8") as handle:
        handle.write("# The bad-input corpus: file, coarsen command ({file} the file, {out} an "
                     "output path in a fresh directory, {dir} this directory), and a fragment\n"
                     "# of the one-line message expected on stderr with exit status 2. "
                     "Written by make_bad_inputs.py.\n")
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(["file", "command", "fragment"])
        writer.writerows(rows)
    assert not zipfile.is_zipfile(HERE / "lab_npz_not_zip.npz")


if __name__ == "__main__":
    main()
