"""``coarsen fit`` and ``fit_growth``: the JSON contract, the output dataset, windows, fixing."""

from __future__ import annotations

import json

import numpy as np
import pytest

from coarsen.cli import main
from coarsen.dataset import open_dataset, write_dataset
from coarsen.fit import choose_window, fit_growth
from coarsen.fit.effective import effective_exponent
from coarsen.fit.inputs import read_length_table
from coarsen.simulate import simulate
from coarsen.spec import parse_spec


def _table(tmp_path, *, n=0.4, amplitude=1.5, sigma=0.02, times=None, seed=3, errors=True,
           comment="# lattice: square 1000x1000 periodic\n"):
    """A synthetic length table L = A t^n with log-normal noise of known size."""
    rng = np.random.default_rng(seed)
    times = np.geomspace(5, 2000, 12) if times is None else np.asarray(times, float)
    length = amplitude * times ** n * np.exp(sigma * rng.standard_normal(times.size))
    lines = [comment + "time,length" + (",length_err" if errors else "")]
    for t, value in zip(times, length):
        lines.append(f"{float(t)!r},{float(value)!r}"
                     + (f",{float(sigma * value)!r}" if errors else ""))
    path = tmp_path / "table.csv"
    path.write_text("\n".join(lines) + "\n")
    return path


def test_json_follows_the_contract(tmp_path, capsys):
    path = _table(tmp_path)
    assert main(["fit", str(path), "--json", "--no-compare", "--tmin", "5"]) == 0
    out = json.loads(capsys.readouterr().out)
    for key in ("model", "exponent", "parameters", "converged", "autocorr_time", "n_points"):
        assert key in out
    assert out["model"] == "power"
    assert set(out["parameters"]) == {"n", "A"}
    for summary in [out["exponent"], *out["parameters"].values()]:
        assert set(summary) >= {"median", "hdi68", "hdi95"}
        low95, high95 = summary["hdi95"]
        low68, high68 = summary["hdi68"]
        assert low95 <= low68 <= summary["median"] <= high68 <= high95
    assert out["exponent"] == out["parameters"]["n"]
    assert out["converged"] is True
    assert out["n_points"] == 12
    assert isinstance(out["autocorr_time"], float)
    # the data were drawn with n = 0.4: the 95 % interval should hold it (a 1-in-20 miss
    # is possible in principle; the seed is fixed)
    assert out["exponent"]["hdi95"][0] < 0.4 < out["exponent"]["hdi95"][1]


def test_output_dataset_holds_the_posterior_and_never_replaces_the_input(tmp_path, capsys):
    path = _table(tmp_path)
    output = tmp_path / "fit.nc"
    # a step cap keeps the degenerate offset and shifted fits of pure power-law data short
    assert main(["fit", str(path), "-o", str(output), "--effective", "--max-steps", "4000"]) == 0
    printed = capsys.readouterr().out
    assert "model comparison (WAIC" in printed
    assert "consistent with" in printed and "effective exponent" in printed
    ds = open_dataset(output)
    assert ds["posterior_power"].dims == ("sample_power", "parameter_power")
    assert list(ds["parameter_power"].values) == ["n", "A"]
    assert {"posterior_offset", "posterior_shifted", "waic_elpd"} <= set(ds.data_vars)
    for name, variable in ds.data_vars.items():
        assert "units" in variable.attrs and "long_name" in variable.attrs, name
    summary = json.loads(ds.attrs["summary"])
    n = ds["posterior_power"].sel(parameter_power="n").values
    assert summary["exponent"]["median"] == pytest.approx(float(np.median(n)))
    assert set(summary["comparison"]) == {"power", "offset", "shifted"}
    assert main(["fit", str(output), "-o", str(output)]) == 2
    assert "is the input" in capsys.readouterr().err
    assert main(["fit", str(path), "-o", str(path)]) == 2
    assert path.read_text().startswith("# lattice")


def test_fixing_n_and_bad_fix_options(tmp_path, capsys):
    path = _table(tmp_path)
    assert main(["fit", str(path), "--json", "--no-compare", "--fix", "n=0.3333"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["parameters"]["n"] == {"median": 0.3333, "hdi68": [0.3333, 0.3333],
                                      "hdi95": [0.3333, 0.3333], "fixed": True}
    assert main(["fit", str(path), "--fix", "L0=1"]) == 2
    assert "'L0' is not a parameter of model 'power'" in capsys.readouterr().err
    assert main(["fit", str(path), "--fix", "n"]) == 2
    assert "NAME=VALUE" in capsys.readouterr().err


def test_fit_is_reproducible_for_a_seed(tmp_path):
    path = _table(tmp_path)
    first = fit_growth(path, compare=False, seed=11)
    again = fit_growth(path, compare=False, seed=11)
    assert np.array_equal(first.main.posterior.samples, again.main.posterior.samples)
    assert first.to_json() == again.to_json()


def test_table_without_errors_fits_the_scatter(tmp_path):
    """No length_err: sigma_extra is fitted; its 95 % interval holds the realised scatter
    of the noise that was drawn (root mean square of the known deviations from the truth)."""
    times = np.geomspace(5, 2000, 15)
    path = _table(tmp_path, sigma=0.05, errors=False, times=times)
    fit = fit_growth(path, compare=False, tmin=5)
    assert fit.extra_scatter and "sigma_extra" in fit.main.summaries
    noise = fit.data.log_length - (np.log(1.5) + 0.4 * np.log(times))
    realised = float(np.sqrt(np.mean(noise ** 2)))
    low, high = fit.main.summaries["sigma_extra"]["hdi95"]
    assert low < realised < high
    assert np.all(np.isnan(fit.effective.error))


def test_automatic_window_drops_transient_and_saturation(tmp_path):
    times = np.geomspace(1, 1e4, 20)
    length = np.minimum(1.0 * times ** 0.5, 60.0)
    path = tmp_path / "sat.csv"
    path.write_text("# lattice: square 200x200 periodic\ntime,length,length_err\n" + "".join(
        f"{float(t)!r},{float(v)!r},{float(0.02 * v)!r}\n" for t, v in zip(times, length)))
    window = choose_window(read_length_table(path))
    fitted = length[window.keep]
    assert fitted.min() >= 3.0 and fitted.max() <= 20.0
    assert "transient" in window.reasons[0] and "saturation" in window.reasons[1]
    given = choose_window(read_length_table(path), tmin=2, tmax=50)
    assert given.tmin >= 2 and given.tmax <= 50
    with pytest.raises(ValueError, match="tmin"):
        choose_window(read_length_table(path), tmin=50, tmax=2)


def test_dataset_fit_and_effective_exponent_band_from_replicas(tmp_path, capsys):
    """A small Glauber run through the command; n_eff's band equals the standard error of
    the per-replica slopes (computed here directly from the dataset)."""
    spec = parse_spec("""
[lattice]
kind = "square"
size = [64, 64]
[dynamics]
rule = "glauber"
[temperature]
value = 0.0
[initial]
state = "random"
[measure]
times = { start = 5, stop = 200, count = 10, spacing = "log" }
snapshots = 0
[ensemble]
replicas = 6
seed = 21
""")
    ds = simulate(spec).dataset
    source = tmp_path / "run.nc"
    write_dataset(ds, source)
    assert main(["fit", str(source), "--json", "--no-compare", "--tmin", "10"]) == 0
    out = json.loads(capsys.readouterr().out)
    # the automatic late cut: corr_half above 0.1 x 64 is finite-size saturation
    geometric = np.exp(np.log(ds["length"].sel(estimator="corr_half").values).mean(axis=0))
    keep = (ds["time"].values >= 10) & (geometric <= 6.4)
    assert out["estimator"] == "corr_half" and out["n_points"] == int(keep.sum())
    fit = fit_growth(ds, compare=False, tmin=10)
    slopes = effective_exponent(fit.data)
    logs = np.log(ds["length"].sel(estimator="corr_half").values)
    per_replica = np.diff(logs, axis=1) / np.diff(np.log(ds["time"].values))
    # a replica whose domain has nearly filled the lattice (|m| near 0.8 at t = 200 here) has
    # C(r) above 1/2 at every r, so corr_half is undefined (NaN) there: the band is taken over
    # the replicas with a finite slope, as effective_exponent documents
    finite = np.isfinite(per_replica).sum(axis=0)
    assert finite.min() >= 2
    assert np.allclose(slopes.exponent, np.nanmean(per_replica, axis=0))
    assert np.allclose(slopes.error, np.nanstd(per_replica, axis=0, ddof=1) / np.sqrt(finite))
