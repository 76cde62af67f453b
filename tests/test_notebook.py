"""The walkthrough notebook runs, top to bottom, so that it cannot fall out of date.

Executed with nbclient (the Jupyter project's notebook runner, test-only) in a temporary folder
that links the demo data, so that its report is written there and not into the checkout.
"""

from __future__ import annotations

import os
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
NOTEBOOK = ROOT / "notebooks_excluded" / "walkthrough.ipynb"


def test_walkthrough_notebook_runs(tmp_path):
    nbformat = pytest.importorskip("nbformat", reason="nbformat is a test dependency")
    nbclient = pytest.importorskip("nbclient", reason="nbclient is a test dependency")
    (tmp_path / "data_demo").symlink_to(ROOT / "data_demo", target_is_directory=True)
    nb = nbformat.read(NOTEBOOK, as_version=4)
    env = dict(os.environ, MPLBACKEND="Agg", PYTHONPATH=str(ROOT))
    client = nbclient.NotebookClient(
        nb, timeout=600, kernel_name="python3", resources={"metadata": {"path": str(tmp_path)}}
    )
    old = dict(os.environ)
    os.environ.update(env)
    try:
        client.execute()
    finally:
        os.environ.clear()
        os.environ.update(old)
    errors = [
        out
        for cell in nb.cells
        if cell.cell_type == "code"
        for out in cell.get("outputs", [])
        if out.get("output_type") == "error"
    ]
    assert not errors
    assert (tmp_path / "demo_report" / "report.html").exists()
