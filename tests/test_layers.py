"""The package's house rules, read from its own source tree (STYLE.md 1, 10, 11).

- imports point downwards only: a subpackage imports its own layer or the ones below;
- no module imports another module's private name (``from .x import _name``);
- no module passes the size at which STYLE.md says to split it.

These read the source with the standard library's ``ast`` parser; nothing is imported.
"""

from __future__ import annotations

import ast
import re
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "src" / "tiltwell"

#: The layers of DESIGN.md, bottom up: a module may import from its own rank or lower ranks.
#: The views are ranked among themselves so that they never import each other upwards
#: (the command line may draw figures; figures and the explorer never run the command line).
RANK = {
    "_base": 0,
    "physics": 1,
    "wells": 2,
    "coils": 3,
    "dynamics": 4,
    "workflows": 5,
    "figures": 6,
    "explorer": 7,
    "cli": 8,
}

#: STYLE.md 10: "a file past ~400 lines is a sign to split". The tolerance of "about" is
#: ours: ten per cent.
MAX_LINES = 440

MODULES = sorted(path for path in PACKAGE.rglob("*.py"))


def module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def resolve(path: Path, node: ast.ImportFrom) -> str:
    """The absolute dotted name a ``from ... import`` statement in ``path`` reads from."""
    if node.level == 0:
        return node.module or ""
    package = module_name(path).split(".")
    if path.name != "__init__.py":
        package = package[:-1]
    base = package[: len(package) - (node.level - 1)]
    return ".".join(base + ([node.module] if node.module else []))


def imports(path: Path) -> list[tuple[int, str, str]]:
    """(line, module read from, name imported) of every tiltwell import in ``path``."""
    found = []
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom):
            source = resolve(path, node)
            if source == "tiltwell" or source.startswith("tiltwell."):
                found.extend((node.lineno, source, alias.name) for alias in node.names)
        elif isinstance(node, ast.Import):
            found.extend((node.lineno, alias.name, "") for alias in node.names
                         if alias.name.startswith("tiltwell"))
    return found


def layer(dotted: str) -> str | None:
    parts = dotted.split(".")
    return parts[1] if len(parts) > 1 and parts[1] in RANK else None


def ids(paths: list[Path]) -> list[str]:
    return [str(path.relative_to(PACKAGE)) for path in paths]


def test_every_subpackage_has_a_rank() -> None:
    folders = {path.parent.name for path in PACKAGE.glob("*/__init__.py")}
    assert folders == set(RANK)


@pytest.mark.parametrize("path", MODULES, ids=ids(MODULES))
def test_no_private_name_is_imported_across_modules(path: Path) -> None:
    private = [f"line {line}: from {source} import {name}" for line, source, name in imports(path)
               if name.startswith("_") and not name.startswith("__")]
    assert private == []


@pytest.mark.parametrize("path", MODULES, ids=ids(MODULES))
def test_imports_point_downwards(path: Path) -> None:
    own = layer(module_name(path))
    if own is None:  # tiltwell/__init__.py and __main__.py stand above every layer
        return
    upward = []
    for line, source, name in imports(path):
        target = layer(source) or layer(f"{source}.{name}")
        if target is None and source == "tiltwell":
            upward.append(f"line {line}: from tiltwell import {name} (the top package)")
        elif target is not None and RANK[target] > RANK[own]:
            upward.append(f"line {line}: {own} imports {target} ({source})")
    assert upward == []


@pytest.mark.parametrize("path", MODULES, ids=ids(MODULES))
def test_modules_stay_small(path: Path) -> None:
    assert len(path.read_text(encoding="utf-8").splitlines()) <= MAX_LINES


def test_resolve_reads_relative_imports() -> None:
    """The resolver against imports written out by hand (a check of the checker)."""
    tree = ast.parse("from ..physics.fields import Coil\nfrom . import views\nfrom .model import Model\n")
    nodes = [node for node in tree.body if isinstance(node, ast.ImportFrom)]
    app = PACKAGE / "explorer" / "app.py"
    init = PACKAGE / "explorer" / "__init__.py"
    assert [resolve(app, node) for node in nodes] == ["tiltwell.physics.fields", "tiltwell.explorer",
                                                      "tiltwell.explorer.model"]
    assert resolve(init, nodes[2]) == "tiltwell.explorer.model"


def readme_map() -> dict[str, set[str]]:
    """Folder -> modules as the README's map "What is inside" lists them."""
    text = (PACKAGE.parents[1] / "README.md").read_text(encoding="utf-8")
    section = text.split("## What is inside", 1)[1].split("\n## ", 1)[0]
    rows = {}
    for line in section.splitlines():
        cells = [cell.strip() for cell in re.split(r"(?<!\\)\|", line.strip().strip("|"))]  # \| escapes
        if len(cells) == 4 and cells[0].startswith("`") and cells[0].endswith("/`"):
            rows[cells[0].strip("`/")] = {name.strip().strip("`") for name in cells[2].split(",")}
    return rows


def test_readme_map_matches_the_tree() -> None:
    tree = {folder: {path.stem for path in (PACKAGE / folder).glob("*.py") if path.stem != "__init__"}
            for folder in RANK}
    assert readme_map() == tree
