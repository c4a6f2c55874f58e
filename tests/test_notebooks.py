"""The notebooks in notebooks/: saved without outputs, and each one executes without error.

They run with nbclient in a kernel named ``python3`` that is this interpreter (a kernel spec
written to a temporary JUPYTER_PATH, which comes before any other), in the notebooks'
directory, so they find ``../data/lab``. nbclient, nbformat and ipykernel are in the ``test``
extra.
"""

import json
import sys
from pathlib import Path

import nbformat
import pytest
from nbclient import NotebookClient

NOTEBOOKS = Path(__file__).resolve().parent.parent / "notebooks"
PATHS = sorted(NOTEBOOKS.glob("*.ipynb"))


def test_there_are_four_notebooks():
    assert [p.stem for p in PATHS] == ["01_nonconserved_baseline", "02_fitting_lab_data",
                                       "03_scaling_collapse", "04_ramp_and_hold"]


@pytest.mark.parametrize("path", PATHS, ids=[p.stem for p in PATHS])
def test_notebook_is_saved_without_outputs(path):
    book = nbformat.read(path, as_version=4)
    nbformat.validate(book)
    for cell in book.cells:
        if cell.cell_type == "code":
            assert cell.outputs == [] and cell.execution_count is None, path.name


@pytest.fixture(scope="module")
def this_interpreter_as_python3(tmp_path_factory, monkeypatch_module):
    kernels = tmp_path_factory.mktemp("jupyter")
    spec = kernels / "kernels" / "python3"
    spec.mkdir(parents=True)
    (spec / "kernel.json").write_text(json.dumps({
        "argv": [sys.executable, "-m", "ipykernel_launcher", "-f", "{connection_file}"],
        "display_name": "Python 3 (coarsen tests)", "language": "python"}))
    monkeypatch_module.setenv("JUPYTER_PATH", str(kernels))
    return "python3"


@pytest.fixture(scope="module")
def monkeypatch_module():
    patch = pytest.MonkeyPatch()
    yield patch
    patch.undo()


@pytest.mark.parametrize("path", PATHS, ids=[p.stem for p in PATHS])
def test_notebook_executes(path, this_interpreter_as_python3):
    book = nbformat.read(path, as_version=4)
    client = NotebookClient(book, kernel_name=this_interpreter_as_python3, timeout=120,
                            resources={"metadata": {"path": str(NOTEBOOKS)}})
    client.execute()  # raises CellExecutionError, with the cell and traceback, on any error
    errors = [output for cell in book.cells if cell.cell_type == "code"
              for output in cell.outputs if output.output_type == "error"]
    assert not errors
