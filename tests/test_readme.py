"""The README's tour works as written when pasted into Python."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

README = Path(__file__).resolve().parents[1] / "README.md"


def _python_blocks() -> list[str]:
    return re.findall(r"```python\n(.*?)```", README.read_text(encoding="utf-8"), flags=re.S)


def test_readme_has_a_tour_and_the_two_commands() -> None:
    text = README.read_text(encoding="utf-8")
    assert "make test" in text and "make lab" in text
    assert _python_blocks()


@pytest.mark.slow
@pytest.mark.parametrize("index", range(len(_python_blocks())))
def test_readme_python_block_runs(index: int, capsys: pytest.CaptureFixture[str], tmp_path: Path,
                                  monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)  # a block that saves figures writes them here, not into the checkout
    namespace: dict[str, object] = {}
    exec(compile(_python_blocks()[index], f"README.md block {index}", "exec"), namespace)
    assert capsys.readouterr().out  # the tour prints its numbers
    if "write_figures" in _python_blocks()[index]:  # the figures a block draws reach files
        assert sorted(p.name for p in (tmp_path / "tour-figures").iterdir()) == [
            "arrivals.png", "currents.png", "phase-scan.png", "phase-space.png", "survival.png"]
    kept = namespace.get("kept")
    if isinstance(kept, float):
        assert 0.0 < kept <= 1.0
