"""The example notebooks run top to bottom without error (each cell within its timeout).

They are run from a scratch folder (their exports land there), with nbclient and the
``python3`` kernel, as CI does.
"""

import shutil
from importlib import resources
from pathlib import Path

import nbformat
import pytest
from nbclient import NotebookClient

NOTEBOOKS = ["quick_look.ipynb", "high_z_lines.ipynb", "first_session.ipynb"]


def installed(name):
    return Path(str(resources.files("cubeloupe.example_notebooks") / name))


def test_notebooks_are_up_to_date(tmp_path):
    """The shipped notebooks are what build_notebooks.py writes (no hand edits, no outputs)."""
    from cubeloupe.example_notebooks import build_notebooks

    build_notebooks.build(tmp_path)
    for name in NOTEBOOKS:
        fresh = nbformat.read(tmp_path / name, as_version=4)
        shipped = nbformat.read(installed(name), as_version=4)
        assert fresh == shipped, f"{name} differs: run python example_notebooks/build_notebooks.py"
        assert all(not cell.get("outputs") for cell in shipped.cells)


@pytest.mark.slow
@pytest.mark.parametrize("name", NOTEBOOKS)
def test_notebook_runs(name, tmp_path):
    shutil.copy(installed(name), tmp_path / name)
    notebook = nbformat.read(tmp_path / name, as_version=4)
    client = NotebookClient(notebook, timeout=120, kernel_name="python3",
                            resources={"metadata": {"path": str(tmp_path)}})
    client.execute()   # raises CellExecutionError, with the cell and traceback, on any error
    errors = [out for cell in notebook.cells for out in cell.get("outputs", []) if out.output_type == "error"]
    assert not errors
