"""The ``coarsen`` command: exit statuses, one-line errors and the ``bench --json`` contract."""

import json
import os

import pytest

import coarsen
from coarsen import bench, cli
from coarsen._cache_dir import numba_cache_dir

CONTRACT = {
    "case": str,
    "rule": str,
    "update": str,
    "lattice": str,
    "size": int,
    "replicas": int,
    "threads": int,
    "temperature": float,
    "attempts_per_second": float,
    "sweeps_per_second": float,
}


def test_bench_quick_json_lines_follow_the_contract(capsys):
    assert cli.main(["bench", "--quick", "--json"]) == 0
    out = capsys.readouterr().out
    records = [json.loads(line) for line in out.splitlines()]
    assert [r["case"] for r in records] == [case.name for case in bench.CASES]
    for record in records:
        for key, kind in CONTRACT.items():
            assert isinstance(record[key], kind), (record["case"], key)
        assert record["attempts_per_second"] > 0 and record["sweeps_per_second"] > 0
        assert record["compile_seconds"] >= 0
        assert record["size"] <= next(c.size for c in bench.CASES if c.name == record["case"])
        # attempts count every replica: N * replicas attempts per sweep
        n_sites = record["size"] ** (3 if record["lattice"] == "cubic" else 2)
        assert record["attempts_per_second"] == pytest.approx(
            record["sweeps_per_second"] * n_sites * record["replicas"])
    names = [r["case"] for r in records]
    assert any(name.startswith("late-") for name in names)
    assert sum(name.startswith("reference-") for name in names) == 2


def test_bench_table_on_one_tiny_case(capsys):
    tiny = bench.Case("glauber-random-square-8-r1-t1", "glauber", "random", "square", 8, 8,
                      1, 1, 2, 2)
    assert bench.write_benchmark(quick=True, cases=[tiny], repeats=1) == 1
    lines = capsys.readouterr().out.splitlines()
    assert lines[0].split()[0] == "case"
    assert lines[1].split()[:2] == ["glauber-random-square-8-r1-t1", "8^2"]


@pytest.mark.parametrize("argv, option", [
    (["bench", "--threads", "0"], "--threads"),
    (["bench", "--threads", "two"], "--threads"),
    (["bench", "--threads", "100000"], "threads"),
    (["bench", "--fast"], "--fast"),
    (["no-such-command"], "no-such-command"),
])
def test_bad_input_exits_2_with_one_line_naming_it(argv, option, capsys):
    assert cli.main(argv) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1 and option in lines[0]
    assert "Traceback" not in captured.err


def test_version(capsys):
    assert cli.main(["--version"]) == 0
    assert capsys.readouterr().out.strip() == f"coarsen {coarsen.__version__}"


def test_cli_exports_the_kernel_cache_dir(monkeypatch):
    monkeypatch.delenv("NUMBA_CACHE_DIR", raising=False)
    cli._export_numba_cache_dir()
    assert os.environ["NUMBA_CACHE_DIR"] == numba_cache_dir()
    monkeypatch.setenv("NUMBA_CACHE_DIR", "/somewhere/else")
    cli._export_numba_cache_dir()
    assert os.environ["NUMBA_CACHE_DIR"] == "/somewhere/else"
