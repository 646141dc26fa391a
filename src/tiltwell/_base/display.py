"""Rich notebook output for result objects: a titled two-column HTML table."""

from __future__ import annotations

import html
from collections.abc import Sequence


def html_table(title: str, rows: Sequence[tuple[str, str]]) -> str:
    """``title`` in bold over a table of (quantity, value-with-unit) rows, all escaped.

    >>> html_table("Well", [("depth", "1 mK")])
    '<b>Well</b><table><tr><td>depth</td><td>1 mK</td></tr></table>'
    """
    cells = "".join(f"<tr><td>{html.escape(k)}</td><td>{html.escape(v)}</td></tr>" for k, v in rows)
    return f"<b>{html.escape(title)}</b><table>{cells}</table>"
