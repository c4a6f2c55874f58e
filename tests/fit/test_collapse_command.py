"""``coarsen collapse`` and ``fit_collapse``: the JSON contract, the output dataset, tables,
ramp-scan families and bad input (exit status 2 with a one-line message)."""

from __future__ import annotations

import json

import numpy as np
import pytest
import xarray as xr

from coarsen.cli import main
from coarsen.dataset import open_dataset, write_dataset
from coarsen.fit import family_from_curves, fit_collapse


def _table(tmp_path, *, a=0.5, b=0.8, labels=(1.0, 2.0, 4.0, 8.0), seed=1, name="curves.csv"):
    rng = np.random.default_rng(seed)
    lines = ["# synthetic: y = s^a / (1 + (x s^-b)^2)", "parameter,x,y,y_err"]
    for s in labels:
        u = np.linspace(0.2, 4.0, 10)
        y = s ** a / (1 + u ** 2)
        e = 0.02 * y
        for xi, yi, ei in zip(u * s ** b, y + e * rng.standard_normal(u.size), e):
            lines.append(f"{float(s)!r},{float(xi)!r},{float(yi)!r},{float(ei)!r}")
    path = tmp_path / name
    path.write_text("\n".join(lines) + "\n")
    return path


def test_json_follows_the_contract(tmp_path, capsys):
    path = _table(tmp_path)
    assert main(["collapse", str(path), "--json", "--max-steps", "2000"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert {"exponents", "quality", "converged"} <= set(out)
    assert set(out["exponents"]) == {"a", "b"}
    for summary in out["exponents"].values():
        assert {"median", "hdi68", "hdi95"} <= set(summary)
        assert summary["hdi95"][0] <= summary["hdi68"][0] <= summary["median"] \
            <= summary["hdi68"][1] <= summary["hdi95"][1]
    assert isinstance(out["quality"], float) and out["quality"] > 0
    assert isinstance(out["converged"], bool)
    assert out["exponents"]["a"]["hdi95"][0] < 0.5 < out["exponents"]["a"]["hdi95"][1]


def test_quick_output_dataset_and_printed_summary(tmp_path, capsys):
    path = _table(tmp_path)
    output = tmp_path / "collapse.nc"
    assert main(["collapse", str(path), "--quick", "-o", str(output)]) == 0
    text = capsys.readouterr().out
    assert "quality" in text and "Houdayer-Hartmann" in text and "wrote" in text
    ds = open_dataset(output)
    for name in ("master_curve", "master_curve_low95", "master_curve_high95", "rescaled_x",
                 "rescaled_y", "point_x", "quality"):
        assert name in ds
        assert ds[name].attrs["units"] and ds[name].attrs["long_name"]
    summary = json.loads(ds.attrs["summary"])
    assert set(summary["exponents"]) == {"a", "b"}
    assert np.all(ds["master_curve_low95"] <= ds["master_curve_high95"])


def test_fixed_exponent_is_reported_as_fixed(tmp_path, capsys):
    path = _table(tmp_path)
    assert main(["collapse", str(path), "--quick", "--json", "--fix", "a=0.5"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["exponents"]["a"] == {"median": 0.5, "hdi68": [0.5, 0.5], "hdi95": [0.5, 0.5],
                                     "fixed": True}


def _ramp_scan():
    """A dataset shaped like a ramp scan: length (ramp_time, estimator, replica, time) with
    L = tau^a F(t / tau^b), a = 0.3, b = 1, F(u) = (1 + u)^0.5, 4 replicas of noise."""
    rng = np.random.default_rng(8)
    taus = np.array([100.0, 200.0, 400.0, 800.0])
    time = np.geomspace(10, 4000, 14)
    u = time[np.newaxis, :] / taus[:, np.newaxis]
    truth = taus[:, np.newaxis] ** 0.3 * np.sqrt(1 + u)
    values = truth[:, np.newaxis, np.newaxis, :] * np.exp(
        0.02 * rng.standard_normal((4, 4, 4, time.size)).transpose(1, 0, 2, 3))
    estimators = ["corr_zero", "corr_half", "sk_moment", "wall"]
    return xr.Dataset(
        {"length": (("ramp_time", "estimator", "replica", "time"), values,
                    {"units": "lattice spacings", "long_name": "domain length"})},
        coords={"ramp_time": taus, "estimator": estimators, "replica": np.arange(4),
                "time": time})


def test_family_across_ramp_times():
    fit = fit_collapse(_ramp_scan(), observable="length", quick=True)
    assert fit.form.name == "family" and fit.family.parameter_name == "ramp_time"
    assert abs(fit.exponents["a"]["median"] - 0.3) < 0.05, fit.exponents
    assert abs(fit.exponents["b"]["median"] - 1.0) < 0.1, fit.exponents


@pytest.mark.parametrize("content, message", [
    ("parameter,x,y,y_err\n1,1,1,0.1\n1,2,0.5,0.1\n", "at least two"),
    ("parameter,x,y,y_err\n1,1,nan,0.1\n1,2,0.5,0.1\n2,1,1,0.1\n2,2,1,0.1\n", "finite"),
    ("parameter,x,y\n1,1,1\n", "y_err"),
    ("parameter,x,y,y_err\n1,1,1,0\n1,2,1,0.1\n2,1,1,0.1\n2,2,1,0.1\n", "must be > 0"),
])
def test_bad_tables_exit_2_with_one_line(tmp_path, capsys, content, message):
    path = tmp_path / "bad.csv"
    path.write_text(content)
    assert main(["collapse", str(path), "--quick"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("coarsen collapse: ") and message in err
    assert str(path) in err and err.count("\n") == 1


def test_bad_arrays_name_the_curve():
    with pytest.raises(ValueError, match="curve 1 .*mismatched shapes"):
        family_from_curves([(1.0, [1, 2, 3], [1, 2, 3], [0.1] * 3),
                            (2.0, [1, 2, 3], [1, 2], [0.1] * 3)])
    with pytest.raises(ValueError, match=r"curve 0 .*y\[1\] is nan"):
        family_from_curves([(1.0, [1, 2], [1, np.nan], [0.1] * 2),
                            (2.0, [1, 2], [1, 2], [0.1] * 2)])
    with pytest.raises(ValueError, match="fixed: 'n' is not an exponent of form 'power'"):
        fit_collapse([(1.0, [1, 2, 3], [1, 2, 3], [0.1] * 3),
                      (2.0, [1, 2, 3], [1, 2, 3], [0.1] * 3)], fixed={"n": 0.5}, quick=True)


def _tiny_dataset(times, replicas=2):
    r = np.arange(6.0)
    k = np.arange(5.0) * 0.3
    t = np.asarray(times, dtype=float)
    c = np.exp(-r[np.newaxis, :] / np.sqrt(t)[:, np.newaxis])
    length = np.broadcast_to(np.sqrt(t), (4, replicas, t.size)).copy()
    return xr.Dataset(
        {"correlation": (("time", "r"), c), "correlation_sem": (("time", "r"), 0.01 + 0 * c),
         "structure_factor": (("time", "k"), 1 + 0 * k[np.newaxis, :] + 0 * t[:, None]),
         "structure_factor_sem": (("time", "k"), 0.01 + 0 * k[np.newaxis, :] + 0 * t[:, None]),
         "length": (("estimator", "replica", "time"), length)},
        coords={"time": t, "r": r, "k": k, "replica": np.arange(replicas),
                "estimator": ["corr_zero", "corr_half", "sk_moment", "wall"]},
        attrs={"size": np.array([64, 64])})


def test_bad_datasets_exit_2(tmp_path, capsys):
    single = tmp_path / "single.nc"
    write_dataset(_tiny_dataset([100.0]), single)
    assert main(["collapse", str(single), "--quick"]) == 2
    assert "at least two" in capsys.readouterr().err
    nan = _tiny_dataset([100.0, 400.0])
    nan["correlation"][1, 3] = np.nan
    path = tmp_path / "nan.nc"
    write_dataset(nan, path)
    assert main(["collapse", str(path), "--quick"]) == 2
    err = capsys.readouterr().err
    assert "correlation at time 400, r = 3: value is NaN" in err and err.count("\n") == 1
    assert main(["collapse", str(path), "--observable", "length"]) == 2
    assert "ramp_time" in capsys.readouterr().err
    assert main(["collapse", str(tmp_path / "missing.nc")]) == 2
    assert "no such file" in capsys.readouterr().err
    assert main(["collapse", str(single), "--form", "wobbly"]) == 2
    assert "--form" in capsys.readouterr().err
