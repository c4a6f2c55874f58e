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


def _thread_count(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"{value} must be at least 1")
    return value


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


def _run_bench(args) -> int:
    from coarsen.bench import write_benchmark

    write_benchmark(quick=args.quick, as_json=args.json, threads=args.threads)
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
        description="Kinetic Ising coarsening: Glauber and Kawasaki dynamics on lattices.",
    )
    parser.add_argument("--version", action="version",
                        version=f"{_PROG} {coarsen.__version__}")
    subcommands = parser.add_subparsers(title="commands", dest="command", metavar="COMMAND",
                                        parser_class=_Parser)
    subcommands.required = True
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
