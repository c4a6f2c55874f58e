"""The bad-input corpus (tests/data/bad/): every file gives exit 2 and one clear line.

Each case of ``tests/data/bad/EXPECTED.csv`` runs through the real command line
(:func:`coarsen.cli.main`) on a copy of the corpus, and must

* exit with status 2 (bad input),
* print exactly one line on stderr, naming the file or the key and containing the case's
  message fragment, with no traceback,
* leave nothing behind: the output directory stays empty (no dataset, checkpoint or temporary
  file) and no file of the corpus is changed (the output can never overwrite an input).

``make_bad_inputs.py`` in that directory writes the files and the manifest.
"""

from __future__ import annotations

import csv
import hashlib
import shlex
import shutil
from pathlib import Path

import pytest

from coarsen.cli import main

BAD = Path(__file__).parent / "data" / "bad"


def _cases():
    with open(BAD / "EXPECTED.csv", encoding="utf-8") as handle:
        rows = [line for line in handle if not line.startswith("#")]
    return [pytest.param(row["file"], row["command"], row["fragment"], id=row["file"])
            for row in csv.DictReader(rows)]


CASES = _cases()


def _digests(folder: Path) -> dict[str, str]:
    return {path.name: hashlib.sha256(path.read_bytes()).hexdigest()
            for path in sorted(folder.iterdir()) if path.is_file()}


@pytest.fixture(scope="module")
def corpus_copy(tmp_path_factory):
    folder = tmp_path_factory.mktemp("bad") / "bad"
    shutil.copytree(BAD, folder)
    return folder


def test_corpus_is_large_and_covers_every_command():
    """The issue asks for at least 40 bad inputs across specs, lab files, tables, sweeps."""
    commands = {command.split()[0] for _, command, _ in (case.values for case in CASES)}
    assert len(CASES) >= 40
    assert commands == {"run", "measure", "fit", "collapse", "sweep"}
    for file, _, fragment in (case.values for case in CASES):
        assert fragment, f"{file}: no expected message fragment"


@pytest.mark.parametrize(("file", "command", "fragment"), CASES)
def test_bad_input_exits_2_with_one_line(file, command, fragment, corpus_copy, tmp_path,
                                         capsys):
    out_dir = tmp_path / "out"
    out_dir.mkdir()
    output = out_dir / ("sweep" if command.startswith("sweep") else "result.nc")
    before = _digests(corpus_copy)
    argv = [part.format(file=corpus_copy / file, out=output, dir=corpus_copy)
            for part in shlex.split(command)]
    status = main(argv + (["--quiet"] if "--quiet" not in argv else []))
    captured = capsys.readouterr()
    lines = captured.err.strip().splitlines()
    assert status == 2, captured.err
    assert len(lines) == 1, captured.err
    message = lines[0]
    assert "Traceback" not in captured.err
    assert fragment in message
    named = Path(file).name in message or any(
        key in message for key in (fragment.split(":")[0],) if "." in key)
    assert named, f"the message names neither the file nor the key: {message}"
    assert list(out_dir.iterdir()) == []
    assert _digests(corpus_copy) == before
