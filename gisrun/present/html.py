"""Small HTML pieces of the report: escaped text, tables that fit the page, embedded images."""

from __future__ import annotations

import base64
import html
import re

import pandas as pd

__all__ = ["esc", "section", "table", "image", "anchor"]


def esc(text: object) -> str:
    """Text escaped for HTML (quotes too, so it is safe in attributes)."""
    return html.escape(str(text), quote=True)


def anchor(*parts: object) -> str:
    """An id made of letters, digits and ``-`` from the parts (``plot-kv-001-storm``)."""
    text = "-".join(str(p) for p in parts).lower()
    return "".join(ch if ch.isalnum() else "-" for ch in text).strip("-")


def section(sid: str, title: str, body: str) -> str:
    """One report section with its id and heading."""
    return f'<section id="{sid}"><h2>{esc(title)}</h2>\n{body}\n</section>'


_NUMBER = re.compile(r"^-?[\d,]+(\.\d+)?$|^-$|^(\d[\d,.]*)–(\d[\d,.]*)$")


def _numeric(values: pd.Series) -> bool:
    """True when every cell reads as a number (or a range, or ``-``): aligned right."""
    return all(_NUMBER.match(str(v)) for v in values.astype(str).tolist())


def table(frame: pd.DataFrame, *, empty: str = "", left: int = 1) -> str:
    """A table of text cells (from :func:`gisrun.present.display.display_frame`).

    The first ``left`` columns (names, ids) and every column of text are left-aligned,
    columns of numbers right-aligned. Cells of text wrap; an empty frame gives the
    ``empty`` sentence instead of a table of headers only. The table sits in a
    wrapper that scrolls sideways only if a window is narrower than it can wrap to.
    """
    if frame.empty:
        return f"<p>{esc(empty)}</p>" if empty else ""
    align = ["r" if i >= left and _numeric(frame.iloc[:, i]) else "l"
             for i in range(frame.shape[1])]
    at = [' class="r"' if a == "r" else "" for a in align]  # cells are left-aligned by default
    heads = "".join(f"<th{a}>{esc(c)}</th>" for a, c in zip(at, frame.columns, strict=True))
    rows = []
    for values in frame.itertuples(index=False, name=None):
        cells = "".join(f"<td{a}>{esc(v)}</td>" for a, v in zip(at, values, strict=True))
        rows.append(f"<tr>{cells}</tr>")
    return (f'<div class="table-wrap"><table><thead><tr>{heads}</tr></thead>'
            f"<tbody>{''.join(rows)}</tbody></table></div>")


def image(png: bytes, caption: str, *, ident: str = "") -> str:
    """A PNG embedded as a ``data:`` URI, with its caption."""
    data = base64.b64encode(png).decode("ascii")
    at = f' id="{esc(ident)}"' if ident else ""
    return (f'<figure{at}><img alt="{esc(caption)}" src="data:image/png;base64,{data}">'
            f"<figcaption>{esc(caption)}</figcaption></figure>")
