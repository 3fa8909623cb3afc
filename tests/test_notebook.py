"""The walkthrough notebook runs end to end, so it cannot rot."""

from pathlib import Path

import nbformat
import pytest
from nbclient import NotebookClient

NB = Path(__file__).resolve().parent.parent / "notebooks" / "walkthrough.ipynb"


@pytest.mark.slow
def test_walkthrough_notebook_runs():
    nb = nbformat.read(NB, as_version=4)
    client = NotebookClient(nb, timeout=600, kernel_name="python3", resources={"metadata": {"path": str(NB.parent)}})
    client.execute()
    outputs = "\n".join(
        o.get("text", "") for c in nb.cells if c.cell_type == "code" for o in c.get("outputs", []) if o.output_type == "stream"
    )
    assert "AUC per fold, blocks:" in outputs
    assert "appendix.html" in outputs
    assert not any(o.output_type == "error" for c in nb.cells if c.cell_type == "code" for o in c.get("outputs", []))
