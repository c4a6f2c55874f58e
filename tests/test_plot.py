"""Every figure kind renders from small real datasets, with labelled axes (coarsen.plot)."""

import warnings

import numpy as np
import pytest

import coarsen
from coarsen.cli import main
from coarsen.plot import KINDS, make_figure, plot_file, save_figure
from coarsen.plots.configurations import staggered
from coarsen.spec import parse_spec

_SPEC = """
[lattice]
kind = "square"
size = [{size}, {size}]
[dynamics]
rule = "glauber"
update = "checkerboard"
[temperature]
{temperature}
[initial]
{initial}
[measure]
times = {{ start = 1, stop = {stop}, count = 12, spacing = "{spacing}" }}
order = "{order}"
snapshots = 3
[ensemble]
replicas = 4
seed = 11
"""


def _run(tmp_path_factory, name, *, size=48, stop=200, spacing="log", order="ferro",
         temperature="relative = 0.5", initial='state = "random"'):
    from coarsen.simulate import run_spec
    from coarsen.ramp_scan import run_ramp_scan

    spec = parse_spec(_SPEC.format(size=size, stop=stop, spacing=spacing, order=order,
                                   temperature=temperature, initial=initial))
    path = tmp_path_factory.mktemp("plot") / f"{name}.nc"
    runner = run_ramp_scan if spec.is_ramp_scan else run_spec
    runner(spec, path)
    return path


@pytest.fixture(scope="module")
def quench(tmp_path_factory):
    return _run(tmp_path_factory, "quench")


@pytest.fixture(scope="module")
def fit(quench):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return coarsen.fit_growth(quench, max_steps=1500)


@pytest.fixture(scope="module")
def collapse(quench):
    return coarsen.fit_collapse(quench, quick=True, points=60)


@pytest.fixture(scope="module")
def sources(tmp_path_factory, quench, fit, collapse):
    ramp = _run(tmp_path_factory, "ramp", size=24, stop=150, spacing="linear",
                temperature="ramp = { start = 1.5, stop = 0.5, duration = [40, 80], "
                            "hold = 120, relative = true }")
    disk = _run(tmp_path_factory, "disk", size=32, stop=100, spacing="linear",
                initial='state = "disk"\nradius = 8.0')
    run = coarsen.open_dataset(quench)
    return {
        "growth": (run, fit),
        "exponent": (fit, None),
        "collapse": (collapse, None),
        "structure": (run, None),
        "snapshots": (run, None),
        "posterior": (fit, None),
        "protocol": (coarsen.open_dataset(ramp), None),
        "seeded": (coarsen.open_dataset(disk), None),
    }


def _labelled_axes(figure):
    return [ax for ax in figure.axes if ax.get_xlabel() or ax.get_ylabel()]


@pytest.mark.parametrize("kind", KINDS)
def test_every_kind_renders_with_labelled_axes(kind, sources, tmp_path):
    source, fit = sources[kind]
    figure = make_figure(kind, source, fit=fit)
    drawn = [ax for ax in figure.axes if ax.has_data()]
    assert drawn, f"{kind}: no axes with data"
    if kind == "snapshots":  # pictures: panel titles with times and the row labels
        assert all(ax.images for ax in drawn)
        assert any("t = " in ax.get_title() for ax in drawn)
        assert drawn[0].get_ylabel().startswith("replica")
    else:
        labelled = _labelled_axes(figure)
        assert labelled, f"{kind}: no axis labels"
        # units in brackets on every labelled data axis with a physical quantity
        text = " ".join(ax.get_xlabel() + " " + ax.get_ylabel() for ax in labelled)
        if kind in ("growth", "exponent", "structure", "protocol", "seeded"):
            assert "(MC sweeps)" in text or "1/lattice spacing" in text
    path = save_figure(figure, tmp_path / f"{kind}.png")
    assert path.stat().st_size > 5000
    with open(path, "rb") as handle:
        assert handle.read(8) == b"\x89PNG\r\n\x1a\n"


def test_growth_draws_every_estimator_the_band_and_both_reference_slopes(sources):
    run, fit = sources["growth"]
    ax = make_figure("growth", run, fit=fit).axes[0]
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    for name in ("C(r) zero", "C(r) = 1/2", "S(k) moment", "wall density", "95% band"):
        assert name in labels
    assert any(f"n = {fit.exponent['median']:.3f}" in label for label in labels)
    annotations = [t.get_text() for t in ax.texts]
    assert "$t^{1/2}$" in annotations and "$t^{1/3}$" in annotations
    assert ax.get_xscale() == "log" and ax.get_yscale() == "log"


def test_growth_keeps_each_estimators_style_when_only_some_are_drawn(sources):
    from coarsen.plots.growth import plot_growth

    run, _ = sources["growth"]

    def styles(figure):
        # the estimators are drawn as error bars: one container per estimator
        return {bars.get_label(): (bars.lines[0].get_color(), bars.lines[0].get_marker(),
                                   bars.lines[0].get_markerfacecolor())
                for bars in figure.axes[0].containers}

    every = styles(plot_growth(run))
    some = styles(plot_growth(run, estimators=("corr_half", "wall")))
    assert set(some) == {"C(r) = 1/2", "wall density"}
    assert all(some[name] == every[name] for name in some)
    with pytest.raises(ValueError, match="estimator: 'bogus'"):
        plot_growth(run, estimators=("bogus",))


def test_fit_band_brackets_its_median_and_follows_the_power_law(fit):
    from coarsen.plots.growth import fit_band

    band = fit_band(fit)
    assert np.all(band["low"] <= band["median"]) and np.all(band["median"] <= band["high"])
    # log-log slope of the median law equals the posterior median of n only approximately
    # (median of a curve family), but it lies inside the 95% HDI of n
    slope = np.polyfit(np.log(band["time"]), np.log(band["median"]), 1)[0]
    low, high = fit.exponent["hdi95"]
    assert low <= slope <= high


def test_exponent_draws_reference_lines_at_one_half_and_one_third(sources):
    ax = make_figure("exponent", sources["exponent"][0]).axes[0]
    levels = sorted(round(line.get_ydata()[0], 6) for line in ax.lines
                    if len(set(line.get_ydata())) == 1)
    assert round(1 / 3, 6) in levels and 0.5 in levels


def test_structure_figure_is_log_log_with_the_porod_slope(sources):
    ax = make_figure("structure", sources["structure"][0]).axes[0]
    assert ax.get_xscale() == "log" and ax.get_yscale() == "log"
    assert any("Porod" in t.get_text() for t in ax.texts)
    porod = [line for line in ax.lines if line.get_linestyle() == "--"][0]
    x, y = porod.get_xdata(), porod.get_ydata()
    assert np.log(y[1] / y[0]) / np.log(x[1] / x[0]) == pytest.approx(-3.0)


def test_posterior_corner_has_a_panel_per_parameter_pair(fit):
    figure = make_figure("posterior", fit)
    free = len(fit.main.model.free)
    assert len(figure.axes) == free * free
    visible = [ax for ax in figure.axes if ax.axison]
    assert len(visible) == free * (free + 1) // 2


def test_neel_snapshots_show_the_staggered_field():
    checkerboard = np.where(np.indices((6, 6)).sum(axis=0) % 2 == 0, 1, -1).astype(np.int8)
    assert np.all(staggered(checkerboard[np.newaxis]) == 1)


def test_protocol_reads_the_schedule_from_the_spec_and_marks_the_crossings(sources):
    ds = sources["protocol"][0]
    figure = make_figure("protocol", ds)
    top = figure.axes[0]
    assert len([line for line in top.lines if len(line.get_xdata()) == 600]) == 2
    crossings = sorted({round(float(line.get_xdata()[0]), 6) for line in top.lines
                        if line.get_linestyle() == "--"})
    assert crossings == sorted(round(float(v), 6) for v in ds["crossing_time"].values)


def test_cli_plot_writes_each_format_and_rejects_bad_input(quench, fit, tmp_path, capsys):
    fit_path = tmp_path / "fit.nc"
    coarsen.write_dataset(fit.to_dataset(), fit_path)
    for suffix in ("png", "pdf", "svg"):
        out = tmp_path / f"growth.{suffix}"
        assert main(["plot", str(quench), "-o", str(out), "--fit", str(fit_path)]) == 0
        assert out.stat().st_size > 1000
    assert main(["plot", str(fit_path), "-o", str(tmp_path / "p.png"), "--kind",
                 "posterior"]) == 0
    capsys.readouterr()
    assert main(["plot", str(quench), "-o", str(tmp_path / "x.jpg")]) == 2
    assert ".png, .pdf or .svg" in capsys.readouterr().err
    assert main(["plot", str(quench), "-o", str(tmp_path / "s.png"), "--kind", "seeded"]) == 2
    assert "seed_area" in capsys.readouterr().err
    assert main(["plot", str(quench), "-o", str(tmp_path / "s.png"), "--kind", "posterior"]) == 2
    assert main(["plot", str(quench), "-o", str(tmp_path / "g.png"), "--fit",
                 str(quench)]) == 2
    assert "not a growth fit" in capsys.readouterr().err
    assert main(["plot", str(tmp_path / "missing.nc"), "-o", str(tmp_path / "m.png")]) == 2


def test_saved_png_is_the_same_bytes_for_the_same_figure(sources, tmp_path):
    run, _ = sources["structure"]
    a = save_figure(make_figure("structure", run), tmp_path / "a.png").read_bytes()
    b = save_figure(make_figure("structure", run), tmp_path / "b.png").read_bytes()
    assert a == b


def test_palette_stays_distinguishable_under_colour_vision_deficiency():
    """Smallest CIELAB distance between line colours, simulated dichromacy: the matrices of
    Machado, Oliveira & Fernandes, IEEE TVCG 15, 1291 (2009), at full severity (recalled
    from memory); a distance of 10 as "plainly visible" is common practice, no source."""
    import matplotlib.colors as mc

    from coarsen.plots.style import LINE_COLOURS

    simulations = {
        "normal": np.eye(3),
        "protan": [[0.152286, 1.052583, -0.204868], [0.114503, 0.786281, 0.099216],
                   [-0.003882, -0.048116, 1.051998]],
        "deutan": [[0.367322, 0.860646, -0.227968], [0.280085, 0.672501, 0.047413],
                   [-0.011820, 0.042940, 0.968881]],
        "tritan": [[1.255528, -0.076749, -0.178779], [-0.078411, 0.930809, 0.147602],
                   [0.004733, 0.691367, 0.303900]],
    }

    def lab(linear):
        xyz = np.array([[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722],
                        [0.0193, 0.1192, 0.9505]]) @ linear / np.array([0.9505, 1.0, 1.089])
        f = np.where(xyz > 0.008856, np.cbrt(xyz), 7.787 * xyz + 16 / 116)
        return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])

    for name, matrix in simulations.items():
        colours = []
        for colour in LINE_COLOURS:
            c = np.array(mc.to_rgb(colour))
            linear = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
            colours.append(lab(np.clip(np.asarray(matrix) @ linear, 0, 1)))
        distances = [np.linalg.norm(colours[i] - colours[j])
                     for i in range(len(colours)) for j in range(i + 1, len(colours))]
        assert min(distances) > 10, name


def _masked_lab_file(tmp_path):
    """A small synthetic stack: 3 times x 2 shots of 12x10 sites, a masked 3x3 block."""
    rng = np.random.default_rng(5)
    spins = rng.choice(np.array([0, 1], dtype=np.int8), size=(6, 12, 10))
    mask = np.ones((12, 10), dtype=bool)
    mask[2:5, 4:7] = False
    path = tmp_path / "lab.npz"
    np.savez(path, spins=spins, times=np.repeat([10.0, 20.0, 40.0], 2), mask=mask)
    return path, spins, mask


def test_measured_lab_data_keeps_its_configurations_with_missing_sites_as_zero(tmp_path):
    path, spins, mask = _masked_lab_file(tmp_path)
    ds = coarsen.measure_snapshots(coarsen.load_snapshots(path))
    snap = ds["snapshot"]
    assert snap.dims == ("snapshot_time", "replica", "x", "y") and snap.dtype == np.int8
    assert list(ds["snapshot_time"].values) == [10.0, 20.0, 40.0]
    expected = np.where(spins == 1, 1, -1).reshape(3, 2, 12, 10)
    assert np.array_equal(snap.values[..., mask], expected[..., mask])
    assert np.all(snap.values[..., ~mask] == 0)
    limited = coarsen.measure_snapshots(coarsen.load_snapshots(path), keep_snapshots=2)
    assert list(limited["snapshot_time"].values) == [10.0, 40.0]
    assert "snapshot" not in coarsen.measure_snapshots(coarsen.load_snapshots(path),
                                                       keep_snapshots=0)
    with pytest.raises(ValueError, match="keep_snapshots"):
        coarsen.measure_snapshots(coarsen.load_snapshots(path), keep_snapshots=-1)


def test_snapshots_figure_of_a_measured_lab_file_greys_the_missing_sites(tmp_path, capsys):
    from coarsen.plots.style import PHASE_COLOURS

    path, _, mask = _masked_lab_file(tmp_path)
    out = tmp_path / "lab.nc"
    assert main(["measure", str(path), "-o", str(out), "--quiet"]) == 0
    figure = make_figure("snapshots", coarsen.open_dataset(out))
    picture = figure.axes[0].images[0]
    colours = picture.cmap(picture.norm(np.asarray(picture.get_array())))
    grey = np.array(matplotlib_colour(PHASE_COLOURS["missing"]))
    shown = np.all(np.isclose(colours[..., :3], grey[:3]), axis=-1)
    assert np.array_equal(shown, ~mask.T)  # image rows are y, columns x
    assert figure.axes[0].get_ylabel() == "shot 0"
    assert main(["plot", str(out), "-o", str(tmp_path / "s.png"), "--kind",
                 "snapshots"]) == 0
    none = tmp_path / "none.nc"
    assert main(["measure", str(path), "-o", str(none), "--quiet", "--snapshots", "0"]) == 0
    capsys.readouterr()
    assert main(["plot", str(none), "-o", str(tmp_path / "n.png"), "--kind",
                 "snapshots"]) == 2
    assert "snapshot" in capsys.readouterr().err
    bad = tmp_path / "bad.nc"
    assert main(["measure", str(path), "-o", str(bad), "--quiet", "--snapshots", "-1"]) == 2
    err = capsys.readouterr().err
    assert "--snapshots" in err and err.count("\n") == 1 and not bad.exists()


def matplotlib_colour(name):
    from matplotlib.colors import to_rgba

    return to_rgba(name)


def test_a_power_laws_own_effective_exponent_is_its_n_at_every_time(fit):
    from coarsen.plots.growth import model_effective_exponent

    curve = model_effective_exponent(fit, [5.0, 50.0, 500.0])
    ds = fit.to_dataset()
    names = [str(v) for v in ds["parameter_power"].values]
    n = ds["posterior_power"].values[:, names.index("n")]
    # d ln(A t^n) / d ln t = n exactly, so the band is n's own central 95 % interval (the
    # curve thins the draws to at most 2000, which moves the median by well under 0.1 sd)
    assert np.allclose(curve["median"], np.median(n), rtol=0, atol=0.1 * np.std(n))
    assert np.allclose(curve["low"][0], curve["low"]) and curve["low"][0] < np.median(n)
