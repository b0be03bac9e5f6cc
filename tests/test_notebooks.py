"""Every notebook in notebooks/ runs top to bottom in a real Jupyter kernel without an error.

The kernel is this test's own interpreter: a ``python3`` kernelspec is written into a temporary
folder with ipykernel's API and used through its own spec manager, so neither a kernel installed
on the machine nor a missing one changes what runs. The notebooks are committed without outputs,
and running them leaves nothing in their working folder (generated files go to a temporary one).
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

import pytest

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")
pytest.importorskip("ipykernel")

from ipykernel.kernelspec import write_kernel_spec  # noqa: E402
from jupyter_client.kernelspec import KernelSpecManager  # noqa: E402
from jupyter_client.manager import KernelManager  # noqa: E402

REPO = Path(__file__).resolve().parents[1]
NOTEBOOKS = sorted((REPO / "notebooks").glob("*.ipynb"))
#: per-cell guard against a hung kernel, not a speed target (those live in benchmarks/): on a
#: shared, loaded machine a figure-heavy cell can take tens of seconds
CELL_TIMEOUT = 300


@pytest.fixture(scope="module")
def kernel_specs(tmp_path_factory) -> KernelSpecManager:
    folder = tmp_path_factory.mktemp("kernels")
    write_kernel_spec(
        path=str(folder / "python3")
    )  # argv: this sys.executable -m ipykernel_launcher
    return KernelSpecManager(kernel_dirs=[str(folder)])


def test_there_are_four_notebooks():
    assert [p.name for p in NOTEBOOKS] == [
        "01_calibration_degree.ipynb",
        "02_diabetes_feature_count.ipynb",
        "03_selector_pipeline.ipynb",
        "04_calibration_bands.ipynb",
    ]


@pytest.mark.parametrize("path", NOTEBOOKS, ids=[p.stem for p in NOTEBOOKS])
def test_notebook_is_committed_without_outputs(path):
    book = nbformat.read(path, as_version=4)
    nbformat.validate(book)
    for cell in book.cells:
        if cell.cell_type == "code":
            assert cell.outputs == [] and cell.execution_count is None, f"{path.name} has outputs"


@pytest.mark.parametrize("path", NOTEBOOKS, ids=[p.stem for p in NOTEBOOKS])
def test_notebook_runs(path, kernel_specs, tmp_path, monkeypatch):
    # the kernel process inherits this environment: make the source tree importable even
    # without an installed package, and keep matplotlib away from any display
    monkeypatch.setenv("PYTHONPATH", os.pathsep.join([str(REPO), os.environ.get("PYTHONPATH", "")]))
    monkeypatch.setenv("MPLBACKEND", "module://matplotlib_inline.backend_inline")
    spec = kernel_specs.get_kernel_spec("python3")
    assert spec.argv[0] == sys.executable
    book = nbformat.read(path, as_version=4)
    manager = KernelManager(kernel_name="python3", kernel_spec_manager=kernel_specs)
    client = nbclient.NotebookClient(
        book,
        km=manager,
        timeout=CELL_TIMEOUT,
        allow_errors=False,
        resources={"metadata": {"path": str(tmp_path)}},  # files the notebook writes go here
    )
    client.execute()
    errors = [
        o
        for c in book.cells
        if c.cell_type == "code"
        for o in c.outputs
        if o.output_type == "error"
    ]
    assert errors == []
    # the figures came out as images, not as text reprs of Figure objects
    images = [
        o
        for c in book.cells
        if c.cell_type == "code"
        for o in c.outputs
        if "image/png" in o.get("data", {})
    ]
    assert images, f"{path.name} displayed no figure"
    # the working folder stays as it was: generated files (the report) went to a temporary one
    assert sorted(p.name for p in tmp_path.iterdir()) == [], f"{path.name} wrote files"
