"""The cells of one row of a small CSV file, checked against its header.

A row with more cells than the header would otherwise be cut to the header's length without a
word: with a decimal comma, ``5,1,5`` would read as 1 mm instead of 1.5 mm.
"""

from __future__ import annotations

from ..errors import StormError

__all__ = ["row_cells"]


def row_cells(record: list[str], n_header: int, where: str) -> list[str]:
    """A row's stripped cells; more non-blank cells than the header has is an error.

    Trailing blank cells (a spreadsheet's empty columns) are dropped.

    Raises
    ------
    StormError
        At ``where`` (file and row), naming the cells and the likely cause.
    """
    cells = [c.strip() for c in record]
    while len(cells) > n_header and cells[-1] == "":
        cells.pop()
    if len(cells) > n_header:
        raise StormError(where, f"has {len(cells)} cells ({','.join(cells)!r}) but the header "
                         f"has {n_header}; a decimal comma or another delimiter is the likely "
                         "cause", "separate the columns with commas and write decimals with a "
                         "point (1.5, not 1,5)")
    return cells
