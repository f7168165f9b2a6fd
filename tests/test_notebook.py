"""The walkthrough notebook runs from top to bottom (nbclient, the notebook's own kernel)."""

from pathlib import Path

import pytest

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")

NOTEBOOK = Path(__file__).resolve().parents[1] / "notebooks" / "walkthrough.ipynb"


@pytest.mark.slow
@pytest.mark.filterwarnings("ignore")
def test_walkthrough_executes():
    nb = nbformat.read(NOTEBOOK, as_version=4)
    for cell in nb.cells:
        assert not cell.get("outputs"), "commit the notebook without outputs"
    client = nbclient.NotebookClient(nb, timeout=300, kernel_name="python3",
                                     resources={"metadata": {"path": str(NOTEBOOK.parent)}})
    client.execute()
    text = "".join(o.get("text", "") for c in nb.cells if c.cell_type == "code"
                   for o in c.get("outputs", []))
    assert "reaches:    5 of 5 processed" in text and "bankfull stage" in text
    assert "normal depth of 10" in text
    # the plots render inline (no forced non-display backend): PNG outputs exist
    pngs = [o for c in nb.cells if c.cell_type == "code" for o in c.get("outputs", [])
            if "image/png" in o.get("data", {})]
    assert len(pngs) >= 3
    # the notebook uses the same one-call entry point as the README and the CLI
    assert "reachgauge.run(" in "".join(c.source for c in nb.cells)
