"""The notebooks run from top to bottom, and are committed without outputs."""

from __future__ import annotations

from pathlib import Path

import pytest

pytestmark = pytest.mark.slow  # runs every notebook (make test-fast leaves them out)

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")

FOLDER = Path(__file__).resolve().parents[1] / "notebooks"
NOTEBOOKS = sorted(FOLDER.glob("*.ipynb"))


def test_the_four_notebooks_are_there() -> None:
    assert [p.stem for p in NOTEBOOKS] == [
        "01-quickstart", "02-deceleration-tradeoffs", "03-trap-from-coils", "04-monte-carlo-check"]


@pytest.mark.parametrize("path", NOTEBOOKS, ids=[p.stem for p in NOTEBOOKS])
def test_committed_without_outputs(path: Path) -> None:
    book = nbformat.read(path, as_version=4)
    for cell in book.cells:
        if cell.cell_type == "code":
            assert cell.outputs == [] and cell.execution_count is None, f"{path.name} carries outputs"
    assert path.stat().st_size < 50_000


@pytest.mark.parametrize("path", NOTEBOOKS, ids=[p.stem for p in NOTEBOOKS])
def test_notebook_runs(path: Path, tmp_path: Path) -> None:
    book = nbformat.read(path, as_version=4)
    client = nbclient.NotebookClient(book, timeout=600, kernel_name="python3",
                                     resources={"metadata": {"path": str(tmp_path)}})
    client.execute()
    errors = [o for c in book.cells if c.cell_type == "code" for o in c.outputs if o.output_type == "error"]
    assert not errors
