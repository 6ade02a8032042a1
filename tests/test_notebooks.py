"""The notebooks in notebooks/ run top to bottom on the bundled (synthetic) data.

Each is executed with nbclient in a kernel that runs this very interpreter (a kernel spec
written to a temporary folder, so nothing is installed in the user's Jupyter folders), with the
notebook's folder as working directory.  Regression checks: a notebook that raises fails.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import pytest

NOTEBOOKS = Path(__file__).resolve().parents[1] / "notebooks"
NAMES = sorted(p.name for p in NOTEBOOKS.glob("*.ipynb"))
KERNEL = "fitdrag-test-python"


@pytest.fixture(scope="module")
def kernel_dir(tmp_path_factory):
    d = tmp_path_factory.mktemp("jupyter")
    spec = d / "kernels" / KERNEL
    spec.mkdir(parents=True)
    (spec / "kernel.json").write_text(json.dumps({
        "argv": [sys.executable, "-m", "ipykernel_launcher", "-f", "{connection_file}"],
        "display_name": "fitdrag tests", "language": "python",
    }))  # fmt: skip
    return d


def test_there_are_the_three_notebooks():
    """regression: fit a track, build a budget, compare models."""
    assert NAMES == ["01_fit_a_track.ipynb", "02_uncertainty_budget.ipynb",
                     "03_compare_models.ipynb"]  # fmt: skip


@pytest.mark.parametrize("name", NAMES)
def test_notebook_runs(name, kernel_dir, monkeypatch, tmp_path):
    """regression: every cell runs without error and the notebook's last cell prints."""
    import nbformat
    from nbclient import NotebookClient

    monkeypatch.setenv("JUPYTER_PATH", str(kernel_dir))
    monkeypatch.setenv("MPLBACKEND", "module://matplotlib_inline.backend_inline")
    nb = nbformat.read(NOTEBOOKS / name, as_version=4)
    assert nb.metadata["kernelspec"]["name"] == "python3"
    client = NotebookClient(
        nb, timeout=180, kernel_name=KERNEL, resources={"metadata": {"path": str(NOTEBOOKS)}}
    )
    client.execute()
    code = [c for c in nb.cells if c.cell_type == "code"]
    assert all(c.get("execution_count") for c in code)
    errors = [o for c in code for o in c.outputs if o.output_type == "error"]
    assert not errors
    # the notebooks are stored without outputs (they are made when you run them)
    stored = nbformat.read(NOTEBOOKS / name, as_version=4)
    assert all(not c.get("outputs") for c in stored.cells if c.cell_type == "code")
