"""The worked notebooks in notebooks/ run from top to bottom and are stored without outputs.

Each notebook is executed in a fresh "python3" kernel (the ipykernel of this environment, so
the same Python and the same tfhrv) with the notebooks/ folder as working directory, as a
reader would run it.  Expected behaviour: no cell raises (source: the notebooks themselves).
"""

from __future__ import annotations

from pathlib import Path

import pytest

NOTEBOOK_DIR = Path(__file__).resolve().parents[1] / "notebooks"
NOTEBOOKS = (
    "01_fit_for_fft_slope.ipynb",
    "02_scaling_through_the_day.ipynb",
    "03_small_cohort.ipynb",
)
CELL_TIMEOUT_S = 300


def _nbformat():
    return pytest.importorskip("nbformat", reason="nbformat is needed to read the notebooks "
                               "(pip install -e '.[test]')")


@pytest.mark.parametrize("name", NOTEBOOKS)
def test_notebook_is_stored_without_outputs(name):
    nbformat = _nbformat()
    nb = nbformat.read(NOTEBOOK_DIR / name, as_version=4)
    nbformat.validate(nb)
    code = [c for c in nb.cells if c.cell_type == "code"]
    assert code
    assert all(c.execution_count is None and c.outputs == [] for c in code)
    assert nb.metadata["kernelspec"]["name"] == "python3"


@pytest.mark.parametrize("name", NOTEBOOKS)
def test_notebook_opens_with_the_research_use_caution(name):
    nb = _nbformat().read(NOTEBOOK_DIR / name, as_version=4)
    first = nb.cells[0]
    assert first.cell_type == "markdown"
    assert "research use only" in first.source.lower()
    assert "not for diagnosis" in first.source.lower()


@pytest.mark.parametrize("name", NOTEBOOKS)
def test_notebook_runs_without_errors(name, monkeypatch):
    nbformat = _nbformat()
    nbclient = pytest.importorskip("nbclient", reason="nbclient is needed to execute the "
                                   "notebooks (pip install -e '.[test]')")
    pytest.importorskip("ipykernel", reason="ipykernel provides the python3 kernel "
                        "(pip install -e '.[test]')")
    # Single-threaded BLAS in the kernel, as the tfhrv command line uses.
    monkeypatch.setenv("OPENBLAS_NUM_THREADS", "1")
    nb = nbformat.read(NOTEBOOK_DIR / name, as_version=4)
    client = nbclient.NotebookClient(nb, kernel_name="python3", timeout=CELL_TIMEOUT_S,
                                     resources={"metadata": {"path": str(NOTEBOOK_DIR)}})
    client.execute()  # raises CellExecutionError naming the failing cell
    errors = [out for cell in nb.cells if cell.cell_type == "code" for out in cell.outputs
              if out.output_type == "error"]
    assert errors == []
    ran = [cell.execution_count for cell in nb.cells if cell.cell_type == "code"]
    assert all(n is not None for n in ran)
