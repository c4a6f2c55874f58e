"""Shared test configuration: the ``--run-slow`` option, the hypothesis profile, Agg plots."""

import os

# Before anything imports matplotlib: tests never open windows.
os.environ["MPLBACKEND"] = "Agg"

import pytest  # noqa: E402
from hypothesis import settings  # noqa: E402

# The first example of a property test may compile a kernel, far past hypothesis' default
# 200 ms deadline; deadlines are off everywhere.
settings.register_profile("coarsen", deadline=None)
settings.load_profile("coarsen")


def pytest_addoption(parser):
    parser.addoption(
        "--run-slow",
        action="store_true",
        default=False,
        help="also run the tests marked slow (validation runs of minutes)",
    )


def pytest_collection_modifyitems(config, items):
    if config.getoption("--run-slow"):
        return
    skip_slow = pytest.mark.skip(reason="slow validation run; use --run-slow")
    for item in items:
        if item.get_closest_marker("slow") is not None:
            item.add_marker(skip_slow)
