"""Read a user's parameter override CSV.

The file is a CSV with a header row; lines starting with ``#`` and blank lines
are skipped. Its columns are described in :mod:`gisrun.parameters.overrides`:
keys (``subcatchment_id``, ``soil_class``, ``cover_class``, ``surface``) and
parameters with their unit in the name (``ks_mm_per_h``, ``suction_head_mm``,
``ks_m_per_s`` ...). Values are converted to SI here, at the edge.

Example file::

    # measured at the park, 2024
    soil_class,cover_class,ks_mm_per_h,suction_head_mm
    B,open_space_good,12.5,110
"""

from __future__ import annotations

import csv
import io
from pathlib import Path

import pandas as pd

from ..errors import ParameterError
from ..parameters.overrides import normalize_overrides

__all__ = ["read_parameter_overrides"]


def read_parameter_overrides(path: str | Path) -> pd.DataFrame:
    """Read, check and convert a parameter override CSV to SI.

    Parameters
    ----------
    path : str or Path
        The CSV file.

    Returns
    -------
    DataFrame
        As :func:`gisrun.parameters.overrides.normalize_overrides`; the
        ``override_source`` column reads ``"<path>:line <n>"``.

    Raises
    ------
    ParameterError
        If the file is missing, unreadable, empty, or has a bad column or
        value; the message names the file, line and column.
    """
    path = Path(path)
    lines = _read_lines(path)
    numbered = [(n, line) for n, line in enumerate(lines, start=1)
                if line.strip() and not line.lstrip().startswith("#")]
    if len(numbered) < 2:
        raise ParameterError(str(path), "has no header and data rows",
                             "add a header row and at least one row of values")
    header_fields = next(csv.reader([numbered[0][1]]))
    names = [f.strip() for f in header_fields]
    twice = next((f for f in names if names.count(f) > 1), None)
    if twice is not None:
        raise ParameterError(f"{path}:line {numbered[0][0]}:{twice}", "column appears twice in "
                             "the header", "keep one column of each name")
    for n, line in numbered[1:]:
        if len(next(csv.reader([line]))) != len(header_fields):
            raise ParameterError(
                f"{path}:line {n}", f"has a different number of fields than the header"
                f" ({len(header_fields)})", "give every row the header's columns (commas)")
    text = "\n".join(line for _, line in numbered)
    frame = pd.read_csv(io.StringIO(text), dtype=str, keep_default_na=False)
    return normalize_overrides(frame, where=str(path),
                               row_names=[f"line {n}" for n, _ in numbered[1:]])


def _read_lines(path: Path) -> list[str]:
    try:
        return path.read_text(encoding="utf-8-sig").splitlines()
    except FileNotFoundError:
        raise ParameterError(str(path), "does not exist",
                             "check the [parameters] overrides path (relative to the project file)"
                             ) from None
    except UnicodeDecodeError:
        raise ParameterError(str(path), "is not UTF-8 text", "save the file as UTF-8 CSV") from None
    except OSError as err:
        raise ParameterError(str(path), f"cannot be read ({err.strerror})",
                             "check that it is a readable file") from None
