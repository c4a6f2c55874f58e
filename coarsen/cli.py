"""The ``coarsen`` command.

Exit status: 0 on success, 2 for bad input (a one-line message on stderr naming the option or
parameter), 1 for any other failure.
"""

from __future__ import annotations

import argparse
import os
import sys

import coarsen
from coarsen._cache_dir import numba_cache_dir

__all__ = ["build_parser", "main"]


def _export_numba_cache_dir() -> None:
    """Point ``NUMBA_CACHE_DIR`` at the kernel cache when unset, for child processes too."""
    if not os.environ.get("NUMBA_CACHE_DIR"):
        directory = numba_cache_dir()
        if directory is not None:
            os.environ["NUMBA_CACHE_DIR"] = directory


# At import, as early as the package allows: importing ``coarsen`` has already imported Numba,
# and ``coarsen.kernels._options`` has pointed this process's kernels at the same directory.
# Exporting it is for the processes the command starts (workers, notebooks), which inherit it.
_export_numba_cache_dir()

_PROG = "coarsen"


class _BadInput(Exception):
    """A command-line parsing error, reported as one line with exit status 2."""


class _Parser(argparse.ArgumentParser):
    def error(self, message):
        raise _BadInput(f"{self.prog}: {message}")


def _number(text: str, what: str, *, integer: bool = False, minimum: float = 0.0,
            strict: bool = False):
    """Parse an option value: a finite number (or whole number) at or above ``minimum``."""
    try:
        value = int(text) if integer else float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not {what}") from None
    if not (value > minimum if strict else value >= minimum) or value == float("inf"):
        bound = f"{'>' if strict else '>='} {minimum:g}"
        raise argparse.ArgumentTypeError(f"{text!r} must be finite and {bound}")
    return value


def _thread_count(text: str) -> int:
    return _number(text, "a whole number", integer=True, minimum=1)


def _whole_number(text: str) -> int:
    return _number(text, "a whole number", integer=True, minimum=0)


def _add_bench(subcommands) -> None:
    bench = subcommands.add_parser(
        "bench",
        help="measure the engine's speed (attempted moves per second)",
        description=(
            "Time the dynamics engine on fixed cases (lattice, rule, update, replicas, "
            "threads), with two reference implementations for comparison. The first call of "
            "each kernel (compilation or cache load) is reported apart from the rates."
        ),
    )
    bench.add_argument("--quick", action="store_true",
                       help="smaller lattices and fewer sweeps (seconds instead of a minute)")
    bench.add_argument("--json", action="store_true",
                       help="print one JSON object per case and line instead of a table")
    bench.add_argument("--threads", type=_thread_count, default=None, metavar="N",
                       help="use at most N threads in every case (default: all available)")
    bench.set_defaults(handler=_run_bench)


def _seconds(text: str) -> float:
    return _number(text, "a number of seconds", strict=True)


def _time_value(text: str) -> float:
    return _number(text, "a time in sweeps")


def _length_value(text: str) -> float:
    return _number(text, "a length in lattice spacings", strict=True)


def _add_run(subcommands) -> None:
    run = subcommands.add_parser(
        "run",
        help="simulate a spec file and write its dataset",
        description=(
            "Run the replicas of a spec file (TOML) to each measurement time, measure them "
            "and write the dataset as NetCDF. A checkpoint beside the output "
            "(OUTPUT.checkpoint) is kept up to date while the run goes; --resume continues "
            "from it, with the same result as an uninterrupted run."
        ),
    )
    run.add_argument("spec", metavar="SPEC.toml", help="the spec file")
    run.add_argument("-o", "--output", required=True, metavar="OUT.nc",
                     help="where to write the dataset (NetCDF-4)")
    run.add_argument("--threads", type=_thread_count, default=None, metavar="N",
                     help="threads for the dynamics (default: all cores); the result is the "
                          "same for any N")
    run.add_argument("--resume", action="store_true",
                     help="continue from OUTPUT.checkpoint if it exists")
    run.add_argument("--checkpoint-every", type=_seconds, default=60.0, metavar="SECONDS",
                     help="seconds between checkpoints (default: 60)")
    run.add_argument("--lengths-csv", default=None, metavar="LENGTHS.csv",
                     help="also write the replica-mean lengths (corr_half) as CSV")
    run.add_argument("--quiet", action="store_true", help="no progress bar and no summary")
    run.set_defaults(handler=_run_run)


def _add_measure(subcommands) -> None:
    measure = subcommands.add_parser(
        "measure",
        help="measure lab snapshots (.npy, .npz, .nc) with the observables of a run",
        description=(
            "Measure a stack of snapshots (shots x sites per axis, values 0/1 or -1/+1, "
            "optional times and mask in a .npz) and write a dataset with the variables of a "
            "run; shots at the same time play the role of replicas."
        ),
    )
    measure.add_argument("snapshots", metavar="SNAPSHOTS", help=".npy, .npz or .nc file")
    measure.add_argument("-o", "--output", required=True, metavar="OUT.nc",
                         help="where to write the dataset (NetCDF-4)")
    measure.add_argument("--order", choices=("ferro", "neel"), default="ferro",
                         help="order parameter: the spins, or the staggered field (neel)")
    measure.add_argument("--boundary", choices=("open", "periodic"), default="open",
                         help="edges of the snapshots (default: open)")
    measure.add_argument("--times", type=_time_value, nargs="+", default=None, metavar="T",
                         help="one time per shot (or one for all), replacing the file's")
    measure.add_argument("--lattice", choices=("chain", "square", "triangular", "cubic"),
                         default=None,
                         help="lattice kind (default: chain, square or cubic by dimension)")
    measure.add_argument("--lengths-csv", default=None, metavar="LENGTHS.csv",
                         help="also write the shot-mean lengths (corr_half) as CSV")
    measure.add_argument("--snapshots", type=_whole_number, default=None, metavar="N",
                         dest="keep_snapshots",
                         help="keep the configurations of at most N times, evenly chosen, in "
                              "the dataset's snapshot variable (0: none; default: all)")
    measure.add_argument("--quiet", action="store_true", help="no summary")
    measure.set_defaults(handler=_run_measure)


def _peak_memory_mb() -> float:
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def _run_run(args) -> int:
    from coarsen._progress import wants_progress
    from coarsen.dataset import write_lengths_csv
    from coarsen.simulate import RunInterrupted, run_spec
    from coarsen.spec import load_spec

    spec = load_spec(args.spec)

    def notify(message):
        if not args.quiet:
            print(f"{_PROG} run: {message}", file=sys.stderr)

    try:
        result = run_spec(spec, args.output, threads=args.threads, resume=args.resume,
                          checkpoint_every=args.checkpoint_every,
                          progress=wants_progress(args.quiet), notify=notify)
    except RunInterrupted as stop:
        print(f"{_PROG} run: interrupted at sweep {stop.clock}; the state is saved in "
              f"{str(stop.checkpoint)!r}. Resume with: {_PROG} run {args.spec} -o "
              f"{args.output} --resume", file=sys.stderr)
        return 1
    if args.lengths_csv:
        write_lengths_csv(result.dataset, args.lengths_csv)
    if not args.quiet:
        ds = result.dataset
        busy = result.dynamics_seconds + result.measuring_seconds
        share = 100.0 * result.measuring_seconds / busy if busy > 0 else 0.0
        print(f"wrote {args.output}: {ds.attrs['lattice']}, {spec.rule} {spec.acceptance} "
              f"{spec.update}, {spec.replicas} replicas, {ds.sizes['time']} times up to "
              f"{spec.final_time} sweeps; dynamics {result.dynamics_seconds:.1f} s, "
              f"measurements {result.measuring_seconds:.1f} s ({share:.0f}%), "
              f"peak memory {_peak_memory_mb():.0f} MB")
    return 0


def _run_measure(args) -> int:
    from coarsen.dataset import write_dataset, write_lengths_csv
    from coarsen.labdata import load_snapshots, measure_snapshots

    output = os.path.abspath(args.output)
    if not os.path.isdir(os.path.dirname(output)):
        raise ValueError(f"output {args.output!r}: the directory does not exist")
    snapshots = load_snapshots(args.snapshots, boundary=args.boundary, times=args.times,
                               kind=args.lattice)
    ds = measure_snapshots(snapshots, order=args.order, keep_snapshots=args.keep_snapshots)
    write_dataset(ds, args.output)
    if args.lengths_csv:
        write_lengths_csv(ds, args.lengths_csv)
    if not args.quiet:
        print(f"wrote {args.output}: {ds.attrs['lattice']}, {len(snapshots.times)} shots at "
              f"{ds.sizes['time']} time{'s' if ds.sizes['time'] != 1 else ''}")
    return 0


def _run_bench(args) -> int:
    from coarsen.bench import write_benchmark

    write_benchmark(quick=args.quick, as_json=args.json, threads=args.threads)
    return 0


def _fixed_value(text: str) -> tuple[str, float]:
    name, sep, value = text.partition("=")
    if not sep or not name.strip():
        raise argparse.ArgumentTypeError(f"{text!r} is not NAME=VALUE (for example n=0.3333)")
    try:
        number = float(value)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r}: {value!r} is not a number") from None
    return name.strip(), number


def _add_fit(subcommands) -> None:
    fit = subcommands.add_parser(
        "fit",
        help="fit a growth law L(t) to the lengths of a dataset or a CSV length table",
        description=(
            "Fit L = A t^n (power), L0 + A t^n (offset) or A (t + t0)^n (shifted) to ln L "
            "with emcee, the covariance between times taken from the replicas. Prints the "
            "median and highest-density intervals, a WAIC comparison of the three models and "
            "whether n is consistent with 1/2 (non-conserved) or 1/3 (conserved)."
        ),
    )
    fit.add_argument("input", metavar="INPUT",
                     help="a dataset (.nc) from coarsen run/measure, or a CSV length table "
                          "(columns time, length, optional length_err)")
    fit.add_argument("--estimator", default=None,
                     choices=("corr_zero", "corr_half", "sk_moment", "wall"),
                     help="the dataset's length estimator (default: corr_half)")
    fit.add_argument("--model", choices=("power", "offset", "shifted"), default="power",
                     help="the reported model (default: power)")
    fit.add_argument("--tmin", type=_time_value, default=None, metavar="T",
                     help="first time to fit (default: automatic, drops the transient)")
    fit.add_argument("--tmax", type=_time_value, default=None, metavar="T",
                     help="last time to fit (default: automatic, drops finite-size saturation)")
    fit.add_argument("-o", "--output", default=None, metavar="FIT.nc",
                     help="write the fit (posterior draws, n_eff, comparison) as NetCDF")
    fit.add_argument("--json", action="store_true", help="print one JSON object")
    fit.add_argument("--fix", type=_fixed_value, action="append", default=[],
                     metavar="NAME=VALUE", help="hold a parameter fixed, e.g. --fix n=0.3333 "
                                                "(repeatable)")
    fit.add_argument("--extra-scatter", action="store_true",
                     help="fit an extra scatter in ln L (error bars may be underestimated)")
    fit.add_argument("--no-compare", action="store_true",
                     help="fit only the chosen model (no WAIC comparison)")
    fit.add_argument("--effective", action="store_true",
                     help="also print the effective exponent n_eff(t)")
    fit.add_argument("--system-size", type=_length_value, default=None, metavar="L",
                     help="smallest side of the system (lattice spacings) for the automatic "
                          "late cut, when the input does not say")
    fit.add_argument("--max-steps", type=_thread_count, default=40000, metavar="N",
                     help="step cap of each chain (default: 40000)")
    fit.add_argument("--seed", type=int, default=None, help="sampler seed (default: fixed)")
    fit.add_argument("--quiet", action="store_true", help="no printed summary")
    fit.set_defaults(handler=_run_fit)


def _check_separate_output(args, what: str) -> None:
    """A fit or collapse writes its own file: never the input, only into an existing directory."""
    if args.output is None:
        return
    output = os.path.abspath(args.output)
    same = os.path.exists(output) and os.path.exists(args.input) and \
        os.path.samefile(output, args.input)
    if same or output == os.path.abspath(args.input):
        raise ValueError(f"output {args.output!r}: is the input; a {what} is written to its "
                         f"own file")
    if not os.path.isdir(os.path.dirname(output)):
        raise ValueError(f"output {args.output!r}: the directory does not exist")


def _run_fit(args) -> int:
    import json
    import warnings

    from coarsen.dataset import write_dataset
    from coarsen.fit import fit_growth
    from coarsen.fit.sampling import DEFAULT_SEED

    _check_separate_output(args, "fit")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = fit_growth(args.input, estimator=args.estimator, model=args.model,
                            fixed=dict(args.fix), tmin=args.tmin, tmax=args.tmax,
                            extra_scatter=args.extra_scatter, compare=not args.no_compare,
                            seed=DEFAULT_SEED if args.seed is None else args.seed,
                            max_steps=args.max_steps, system_size=args.system_size)
    for warning in caught:
        print(f"{_PROG} fit: warning: {_one_line(warning.message)}", file=sys.stderr)
    if args.output is not None:
        write_dataset(result.to_dataset(), args.output)
    if args.json:
        print(json.dumps(result.to_json()))
    elif not args.quiet:
        print(result.format_table())
        if args.effective:
            print()
            print(result.format_effective_exponent())
        if args.output is not None:
            print(f"wrote {args.output}")
    return 0


def _bounds_value(text: str) -> tuple[str, tuple[float, float]]:
    name, sep, value = text.partition("=")
    low, comma, high = value.partition(",")
    if not sep or not comma or not name.strip():
        raise argparse.ArgumentTypeError(f"{text!r} is not NAME=LOW,HIGH (for example b=0,1)")
    try:
        return name.strip(), (float(low), float(high))
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r}: {value!r} is not two numbers") from None


def _x_value(text: str) -> float:
    return _number(text, "a number", minimum=-float("inf"))


def _add_collapse(subcommands) -> None:
    collapse = subcommands.add_parser(
        "collapse",
        help="scaling collapse of C(r, t), S(k, t) or a family of curves, with posteriors",
        description=(
            "Rescale curves onto one master curve and sample the exponents that do it "
            "together with a Gaussian-process master curve (Harada 2011), with emcee. "
            "Forms: dynamic (C = f(r/L), S = L^d g(kL), L = (t/t_ref)^n, n free), measured "
            "(L from a length estimator), power (y = t^a F(x t^-b)) and family "
            "(y = p^a F((t - t_c)/p^b) across ramp times or another parameter). Default "
            "windows: r from 1 to 3 L, k <= 2, times with L >= 2 lattice spacings and below "
            "finite-size saturation."
        ),
    )
    collapse.add_argument("input", metavar="INPUT",
                          help="a dataset (.nc) from coarsen run/measure or a ramp scan, or a "
                               "CSV curve table (columns parameter, x, y, y_err)")
    collapse.add_argument("--observable", choices=("correlation", "structure_factor", "length"),
                          default=None,
                          help="what to collapse from a dataset (default: correlation; length "
                               "for a ramp scan)")
    collapse.add_argument("-o", "--output", default=None, metavar="OUT.nc",
                          help="write the collapse (posterior, master curve and band, rescaled "
                               "data, quality) as NetCDF")
    collapse.add_argument("--json", action="store_true", help="print one JSON object")
    collapse.add_argument("--form", choices=("dynamic", "measured", "power", "family"),
                          default=None, help="scaling form (default: dynamic for C and S, "
                                             "family for ramp scans, power for tables)")
    collapse.add_argument("--estimator", default="corr_half",
                          choices=("corr_zero", "corr_half", "sk_moment", "wall"),
                          help="length estimator for the windows and the measured form "
                               "(default: corr_half)")
    collapse.add_argument("--fix", type=_fixed_value, action="append", default=[],
                          metavar="NAME=VALUE", help="hold an exponent fixed, e.g. --fix a=0 "
                                                     "(repeatable)")
    collapse.add_argument("--bounds", type=_bounds_value, action="append", default=[],
                          metavar="NAME=LOW,HIGH",
                          help="uniform prior bounds of an exponent (repeatable)")
    collapse.add_argument("--shift", action="store_true",
                          help="power/family: also fit a shift of x (x_c, or t_c)")
    collapse.add_argument("--tmin", type=_time_value, default=None, metavar="T",
                          help="first time kept (default: L >= 2 lattice spacings)")
    collapse.add_argument("--tmax", type=_time_value, default=None, metavar="T",
                          help="last time kept (default: below finite-size saturation)")
    collapse.add_argument("--xmin", type=_x_value, default=None, metavar="X",
                          help="smallest x kept: r/L for C, kL for S, x otherwise")
    collapse.add_argument("--xmax", type=_x_value, default=None, metavar="X",
                          help="largest x kept (default for C: r/L <= 3)")
    collapse.add_argument("--kmax", type=_x_value, default=None, metavar="K",
                          help="largest |k| of a structure factor (default: 2)")
    collapse.add_argument("--points", type=_thread_count, default=160, metavar="N",
                          help="fitted points in all, each curve thinned evenly (default: 160)")
    collapse.add_argument("--plain-k", action="store_true",
                          help="collapse S against the shell centre k instead of the lattice "
                               "wave number 2 sin(k/2)")
    collapse.add_argument("--no-extra-scatter", action="store_true",
                          help="no extra scatter term in the master curve (the errors must "
                               "account for all the scatter)")
    collapse.add_argument("--quick", action="store_true",
                          help="only minimise the Houdayer-Hartmann quality (seconds; rough "
                               "profile intervals, no posterior)")
    collapse.add_argument("--max-steps", type=_thread_count, default=20000, metavar="N",
                          help="step cap of the chain (default: 20000)")
    collapse.add_argument("--seed", type=int, default=None, help="sampler seed (default: fixed)")
    collapse.add_argument("--quiet", action="store_true", help="no printed summary")
    collapse.set_defaults(handler=_run_collapse)


def _run_collapse(args) -> int:
    import json
    import warnings

    from coarsen.dataset import write_dataset
    from coarsen.fit.collapse import fit_collapse
    from coarsen.fit.sampling import DEFAULT_SEED

    _check_separate_output(args, "collapse")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = fit_collapse(args.input, observable=args.observable, form=args.form,
                              estimator=args.estimator, fixed=dict(args.fix),
                              bounds=dict(args.bounds), shift=args.shift, tmin=args.tmin,
                              tmax=args.tmax, xmin=args.xmin, xmax=args.xmax, kmax=args.kmax,
                              points=args.points,
                              wave_number="plain" if args.plain_k else "lattice",
                              extra_scatter=not args.no_extra_scatter, quick=args.quick,
                              seed=DEFAULT_SEED if args.seed is None else args.seed,
                              max_steps=args.max_steps)
    for warning in caught:
        print(f"{_PROG} collapse: warning: {_one_line(warning.message)}", file=sys.stderr)
    if args.output is not None:
        write_dataset(result.to_dataset(), args.output)
    if args.json:
        print(json.dumps(result.to_json()))
    elif not args.quiet:
        print(result.format_table())
        if args.output is not None:
            print(f"wrote {args.output}")
    return 0


def _add_sweep(subcommands) -> None:
    sweep = subcommands.add_parser(
        "sweep",
        help="run a parameter grid of specs as Dask tasks and combine the results",
        description=(
            "Run every (grid point, replica batch) of a sweep file as one Dask task, on a "
            "LocalCluster with one single-threaded worker per core or on a running scheduler "
            "(--scheduler). Each task writes DIR/parts/point-PPPP-batch-BBB.nc atomically and "
            "is recorded in DIR/manifest.json; --resume skips the finished parts. At the end "
            "the parts are combined into DIR/combined.nc (coarsen.open_sweep(DIR) in Python)."
        ),
    )
    sweep.add_argument("sweep", metavar="SWEEP.toml", help="the sweep file")
    sweep.add_argument("-o", "--output", required=True, metavar="DIR",
                       help="the sweep directory (created; its parent must exist)")
    sweep.add_argument("--scheduler", default=None, metavar="ADDRESS",
                       help="a running Dask scheduler: tcp://host:port or a scheduler file "
                            "(default: start a LocalCluster here)")
    sweep.add_argument("--workers", type=_thread_count, default=None, metavar="N",
                       help="LocalCluster worker processes, one thread each (default: one "
                            "per core)")
    sweep.add_argument("--resume", action="store_true",
                       help="continue the sweep in DIR, skipping its finished parts")
    sweep.add_argument("--retries", type=int, default=2, metavar="N",
                       help="extra attempts for a failing task before it is reported "
                            "(default: 2)")
    sweep.add_argument("--no-combine", action="store_true",
                       help="do not write DIR/combined.nc")
    sweep.add_argument("--quiet", action="store_true",
                       help="no dashboard address, progress bar or summary")
    sweep.set_defaults(handler=_run_sweep)


def _run_sweep(args) -> int:
    from coarsen._progress import wants_progress
    from coarsen.sweep import SweepFailed, run_sweep
    from coarsen.sweep_file import load_sweep

    sweep = load_sweep(args.sweep)

    def notify(message):
        if not args.quiet:
            print(f"{_PROG} sweep: {message}", file=sys.stderr, flush=True)

    try:
        report = run_sweep(sweep, args.output, scheduler=args.scheduler, workers=args.workers,
                           resume=args.resume, retries=args.retries,
                           combine=not args.no_combine, progress=wants_progress(args.quiet),
                           notify=notify)
    except SweepFailed as failed:
        print(f"{_PROG} sweep: {_one_line(failed)}. Resume with: {_PROG} sweep {args.sweep} "
              f"-o {args.output} --resume", file=sys.stderr)
        return 1
    if not args.quiet:
        combined = f", combined into {report.combined}" if report.combined else ""
        print(f"wrote {args.output}: {report.points} points, {report.tasks} tasks "
              f"({report.ran} run now in {report.seconds:.1f} s, {report.reused} already "
              f"finished){combined}")
    return 0


def _add_plot(subcommands) -> None:
    from coarsen.plot import KINDS

    plot = subcommands.add_parser(
        "plot",
        help="draw a run, fit or collapse dataset as a figure (.png, .pdf, .svg)",
        description=(
            "Draw one kind of figure from a dataset: growth (L(t) per estimator, with a fit's "
            "median and 95% band from --fit), exponent (n_eff(t)), collapse, structure "
            "(S(k, t)), snapshots, posterior (corner plot of a fit or collapse), protocol "
            "(T(t) above L(t)) or seeded (seeded-domain area and interfaces)."
        ),
    )
    plot.add_argument("input", metavar="INPUT",
                      help="a run, lab, ramp-scan, fit or collapse dataset (.nc)")
    plot.add_argument("-o", "--output", required=True, metavar="FIG",
                      help="the figure: .png, .pdf or .svg")
    plot.add_argument("--kind", choices=KINDS, default=None,
                      help="what to draw (default: collapse for a collapse, growth otherwise)")
    plot.add_argument("--fit", default=None, metavar="FIT.nc",
                      help="growth: a fit from coarsen fit -o to draw over the lengths")
    plot.add_argument("--estimator", default=None,
                      choices=("corr_zero", "corr_half", "sk_moment", "wall"),
                      help="growth: only this estimator; exponent/protocol: the estimator "
                           "(default corr_half)")
    plot.add_argument("--title", default=None, help="a title for the figure")
    plot.add_argument("--quiet", action="store_true", help="no printed summary")
    plot.set_defaults(handler=_run_plot)


def _run_plot(args) -> int:
    from coarsen.plot import plot_file

    path = plot_file(args.input, args.output, kind=args.kind, fit=args.fit,
                     estimator=args.estimator, title=args.title)
    if not args.quiet:
        print(f"wrote {path}")
    return 0


def _add_demo(subcommands) -> None:
    demo = subcommands.add_parser(
        "demo",
        help="run the whole job on embedded defaults: runs, fits, collapses, figures, summary",
        description=(
            "Run a non-conserved and a conserved quench, a ramp through Tc with a hold and a "
            "shrinking seeded disk, fit their growth laws and scaling collapses, draw every "
            "kind of figure and write summary.txt into DIR (a few minutes on two cores; "
            "--quick: small lattices and short chains, for tests)."
        ),
    )
    demo.add_argument("-o", "--output", default="coarsen-demo", metavar="DIR",
                      help="where to write (created; default: coarsen-demo)")
    demo.add_argument("--quick", action="store_true",
                      help="small lattices and short chains (seconds; numbers not meaningful)")
    demo.add_argument("--threads", type=_thread_count, default=None, metavar="N",
                      help="engine threads (default: all cores)")
    demo.add_argument("--quiet", action="store_true", help="no progress lines or summary")
    demo.set_defaults(handler=_run_demo)


def _run_demo(args) -> int:
    from coarsen.demo import run_demo

    def notify(message):
        if not args.quiet:
            print(f"{_PROG} demo: {message}", file=sys.stderr, flush=True)

    result = run_demo(args.output, quick=args.quick, threads=args.threads, notify=notify)
    if not args.quiet:
        print(result.summary, end="")
    return 0


def build_parser() -> argparse.ArgumentParser:
    """Build the argument parser of the ``coarsen`` command.

    Returns
    -------
    argparse.ArgumentParser
        The parser; its subcommands set ``handler``, the function that runs them.
    """
    parser = _Parser(
        prog=_PROG,
        description=("Kinetic Ising coarsening: simulate Glauber and Kawasaki dynamics, "
                     "measure simulated and lab configurations alike."),
    )
    parser.add_argument("--version", action="version",
                        version=f"{_PROG} {coarsen.__version__}")
    subcommands = parser.add_subparsers(title="commands", dest="command", metavar="COMMAND",
                                        parser_class=_Parser)
    subcommands.required = True
    _add_run(subcommands)
    _add_measure(subcommands)
    _add_fit(subcommands)
    _add_collapse(subcommands)
    _add_sweep(subcommands)
    _add_plot(subcommands)
    _add_demo(subcommands)
    _add_bench(subcommands)
    return parser


def _one_line(error: BaseException) -> str:
    text = " ".join(str(error).split())
    return text or type(error).__name__


def _silence_stdout() -> None:
    """Send what is left of stdout to the null device, so closing it at exit stays quiet."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError, AttributeError):
        pass


def main(argv: list[str] | None = None) -> int:
    """Run the ``coarsen`` command.

    Parameters
    ----------
    argv : list of str, optional
        Arguments without the program name (default: ``sys.argv[1:]``).

    Returns
    -------
    int
        Exit status: 0 on success, 2 for bad input, 1 for any other failure.
    """
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except _BadInput as error:
        print(_one_line(error), file=sys.stderr)
        return 2
    except SystemExit as done:  # --help and --version
        return done.code if isinstance(done.code, int) else 0
    try:
        return args.handler(args)
    except (ValueError, TypeError) as error:
        print(f"{_PROG} {args.command}: {_one_line(error)}", file=sys.stderr)
        return 2
    except (FileNotFoundError, PermissionError, IsADirectoryError, NotADirectoryError) as error:
        where = f"{error.filename!r}: " if error.filename else ""
        print(f"{_PROG} {args.command}: {where}{error.strerror or _one_line(error)}",
              file=sys.stderr)
        return 2
    except BrokenPipeError:  # the reader went away (``coarsen bench | head``)
        _silence_stdout()
        return 1
    except KeyboardInterrupt:
        print(f"{_PROG} {args.command}: interrupted", file=sys.stderr)
        return 1
    except Exception as error:  # noqa: BLE001 - the exit status contract
        print(f"{_PROG} {args.command}: {type(error).__name__}: {_one_line(error)}",
              file=sys.stderr)
        return 1


if __name__ == "__main__":
    sys.exit(main())
