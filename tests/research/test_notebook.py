"""docs/exposure-trends.ipynb: committed without outputs; executed here (nbclient, a real
ipykernel) against the audited demo-like warehouse, read-only, drawing three plotly figures."""

from __future__ import annotations

import hashlib
import shutil

import pytest

from queries import ROOT

NOTEBOOK = ROOT.parent / "docs" / "exposure-trends.ipynb"
PLOTLY = "application/vnd.plotly.v1+json"


@pytest.fixture(scope="module")
def nbformat_module():
    import os

    # jupyter_core warns (DeprecationWarning) unless told to use the platformdirs locations
    os.environ.setdefault("JUPYTER_PLATFORM_DIRS", "1")
    import nbformat

    return nbformat


def test_notebook_is_committed_without_outputs(nbformat_module):
    nb = nbformat_module.read(NOTEBOOK, as_version=4)
    nbformat_module.validate(nb)
    code = [c for c in nb.cells if c.cell_type == "code"]
    assert len(code) == 4
    assert [c.outputs for c in code] == [[]] * len(code)
    assert [c.execution_count for c in code] == [None] * len(code)
    assert nb.metadata.kernelspec.name == "python3"


def test_notebook_runs_read_only_and_draws_three_figures(nbformat_module, audited, tmp_path, monkeypatch):
    import nbclient

    db = tmp_path / "kerma.duckdb"
    shutil.copyfile(audited[0], db)
    before = hashlib.sha256(db.read_bytes()).hexdigest()
    monkeypatch.setenv("KERMA_WAREHOUSE", str(db))       # the kernel inherits the environment
    nb = nbformat_module.read(NOTEBOOK, as_version=4)
    nbclient.NotebookClient(nb, timeout=180, kernel_name="python3",
                            resources={"metadata": {"path": str(ROOT.parent)}}).execute()

    outputs = [o for c in nb.cells if c.cell_type == "code" for o in c.outputs]
    assert not [o for o in outputs if o.output_type == "error"]
    assert f"warehouse: {db}" in "".join(o.get("text", "") for o in outputs if o.output_type == "stream")
    figures = [o.data[PLOTLY] for o in outputs if PLOTLY in o.get("data", {})]
    titles = [f["layout"]["title"]["text"] for f in figures]
    assert titles == ["Median DLP per study, adult CT", "Monthly median kVp, radiography",
                      "Fluoroscopy time per procedure, by quarter"]
    for figure in figures:
        assert figure["data"] and all(len(trace["x"]) > 0 for trace in figure["data"])
    # the fluoroscopy figure holds the XA and RF exam types of the demo network
    assert {t["name"] for t in figures[2]["data"]} >= {"xa_coronary_angiography", "rf_barium_swallow"}
    assert hashlib.sha256(db.read_bytes()).hexdigest() == before
