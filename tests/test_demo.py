"""``coarsen demo --quick`` runs end to end and writes every figure and the summary."""

from coarsen.cli import main
from coarsen.demo import DEMO_FIGURES, demo_specs
from coarsen.plot import KINDS
from coarsen.spec import parse_spec


def test_demo_specs_are_valid_and_cover_both_dynamics_a_ramp_and_a_seed():
    for quick in (False, True):
        specs = {name: parse_spec(text) for name, text in demo_specs(quick).items()}
        assert specs["nonconserved"].rule == "glauber"
        assert specs["conserved"].rule == "kawasaki"
        assert specs["ramp"].temperature.at(0.0) > specs["ramp"].temperature.at(1e6)
        assert specs["seeded"].initial.state == "disk"


def test_every_kind_is_in_the_demo():
    assert set(DEMO_FIGURES.values()) == set(KINDS)


def test_quick_demo_writes_every_figure_and_the_summary(tmp_path, capsys):
    out = tmp_path / "demo"
    assert main(["demo", "-o", str(out), "--quick"]) == 0
    printed = capsys.readouterr().out
    for name in DEMO_FIGURES:
        path = out / name
        assert path.is_file() and path.stat().st_size > 5000, name
    summary = (out / "summary.txt").read_text()
    assert summary == printed
    for words in ("non-conserved (Glauber)", "conserved (Kawasaki)", "95% interval",
                  "consistent with", "Run time:", "Ramp and hold", "Seeded disk"):
        assert words in summary
    for name in ("nonconserved", "conserved", "ramp", "seeded"):
        assert (out / f"{name}.nc").is_file() and (out / f"{name}.toml").is_file()


def test_demo_output_needs_an_existing_parent(tmp_path, capsys):
    assert main(["demo", "-o", str(tmp_path / "no" / "such"), "--quick"]) == 2
    assert "parent directory does not exist" in capsys.readouterr().err
