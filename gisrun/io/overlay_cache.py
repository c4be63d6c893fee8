"""On-disk cache of the overlay, keyed by the files and settings it reads.

The overlay (unit areas per subcatchment, soil class and cover class, and the
nodata share per subcatchment) does not depend on storms or loss methods, and
on large rasters it is the slow part of a run. With ``[project] overlay_cache =
"<folder>"`` a run stores its overlay in that folder under a key made from the
SHA-256 of the subcatchment, soil and cover files and every setting of the
``[subcatchments]``, ``[soil]``, ``[cover]`` and ``[nodata]`` tables; a later
run with the same key (a new storm, another method) reads it instead.

Each entry is a folder ``overlay-<key>/`` with ``units.parquet``,
``coverage.parquet`` and ``notes.json``, written to a temporary folder and
renamed into place (:func:`gisrun.io.files.staged_folder`), so a cache entry is
either complete or absent. Delete the folder to clear the cache.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import pandas as pd

from .._version import __version__
from ..errors import OutputError
from .files import staged_folder
from .locks import OutputBusyError

__all__ = ["overlay_key", "load_overlay", "save_overlay", "entry_folder"]

#: Bump when the stored layout or the overlay's results change.
_FORMAT = 2


def overlay_key(project: Any, file_digests: Sequence[str]) -> str:
    """Key of a project's overlay: its input files' SHA-256 and its overlay settings.

    Any setting of the tables the overlay reads changes the key (also ones it
    does not use, such as the initial saturation): a stale entry is never read.
    """
    parts = {
        "format": _FORMAT,
        "version": __version__,
        "files": list(file_digests),
        "subcatchments": repr(project.subcatchments),
        "soil": repr(project.soil),
        "cover": repr(project.cover),
        "nodata": [project.nodata_rule, project.max_nodata_fraction],
    }
    impervious = getattr(project, "impervious", None)
    if impervious is not None and impervious.path is not None:  # the units carry its shares
        parts["impervious"] = [str(impervious.path), impervious.scale, impervious.crs]
    text = json.dumps(parts, sort_keys=True, default=str)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:32]


def entry_folder(folder: Path, key: str) -> Path:
    """Where the entry of ``key`` lives."""
    return Path(folder) / f"overlay-{key}"


def load_overlay(folder: Path, key: str) -> tuple[pd.DataFrame, pd.DataFrame, list[str]] | None:
    """The stored (units, coverage, notes) of ``key``, or None if there is no entry."""
    entry = entry_folder(folder, key)
    try:
        units = pd.read_parquet(entry / "units.parquet")
        coverage = pd.read_parquet(entry / "coverage.parquet")
        notes = json.loads((entry / "notes.json").read_text(encoding="utf-8"))
    except FileNotFoundError:
        return None
    except (OSError, ValueError) as err:
        raise OutputError(str(entry), f"overlay cache entry cannot be read ({err})",
                          "delete that folder and run again") from None
    return units, coverage, [str(n) for n in notes]


def save_overlay(folder: Path, key: str, units: pd.DataFrame, coverage: pd.DataFrame,
                 notes: Sequence[str]) -> Path:
    """Store an overlay under ``key`` (complete or not at all); returns the entry folder.

    An entry that is already there (stored by an earlier or a concurrent run with
    the same key) is kept as it is.
    """
    entry = entry_folder(folder, key)
    if entry.exists():
        return entry
    try:
        with staged_folder(entry, overwrite=False) as tmp:
            units.to_parquet(tmp / "units.parquet", index=False)
            coverage.to_parquet(tmp / "coverage.parquet", index=False)
            (tmp / "notes.json").write_text(json.dumps(list(notes)), encoding="utf-8")
    except OSError as err:  # OutputError is one too
        if entry.exists() or isinstance(err, OutputBusyError):  # another run stores it
            return entry
        where, problem = ((err.where, f"overlay cache {err.problem}")
                          if isinstance(err, OutputError) else
                          (str(entry), f"overlay cache entry cannot be written ({err})"))
        raise OutputError(where, problem, "check the path of [project] overlay_cache") from None
    return entry
