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


@pytest.mark.slow
def test_running_the_quickstart_where_it_lives_writes_nothing_there(tmp_path: Path) -> None:
    """Notebook 01 run in notebooks/ itself (as JupyterLab runs it), then its explorer's
    save button pressed with the default path: the file goes to TILTWELL_OUTPUT, and the
    notebooks folder holds exactly what it held (its listing compared before and after)."""
    folder = NOTEBOOKS[0].parent
    before = sorted(p.name for p in folder.iterdir())
    book = nbformat.read(NOTEBOOKS[0], as_version=4)
    book.cells.insert(0, nbformat.v4.new_code_cell(f"import os; os.environ['TILTWELL_OUTPUT'] = {str(tmp_path)!r}"))
    book.cells.append(nbformat.v4.new_code_cell("saved = app.save_scenario(app.actions['scenario_path'].value)\n"
                                                "print(saved)"))
    client = nbclient.NotebookClient(book, timeout=600, kernel_name="python3",
                                     resources={"metadata": {"path": str(folder)}})
    client.execute()
    assert sorted(p.name for p in folder.iterdir() if p.name != ".ipynb_checkpoints") == [
        name for name in before if name != ".ipynb_checkpoints"]
    assert (tmp_path / "scenario.toml").is_file()
    assert str(tmp_path / "scenario.toml") in book.cells[-1].outputs[0]["text"]
