"""Write results: GeoPackage layers and tables, CSV, always atomically.

Every output is first written to a temporary file beside its target (same
folder, so the final move is a rename on one file system) and moved into
place with :func:`os.replace` only once it is complete. A run that fails or
is interrupted leaves the previous output untouched and no temporary file
behind. An existing output is replaced only when ``overwrite`` is true.
"""

from __future__ import annotations

import os
import shutil
import tempfile
from collections.abc import Iterator, Mapping
from contextlib import contextmanager
from pathlib import Path

import geopandas as gpd
import pandas as pd
import pyogrio

from ..errors import OutputError, OutputExistsError

__all__ = ["atomic_target", "write_geopackage", "write_csv", "write_layers_into", "append_table"]


@contextmanager
def atomic_target(target: str | Path, *, overwrite: bool) -> Iterator[Path]:
    """Yield a temporary path beside ``target``; move it onto ``target`` on success.

    Parameters
    ----------
    target : path
        The final output path.
    overwrite : bool
        Whether an existing ``target`` may be replaced.

    Raises
    ------
    OutputExistsError
        If ``target`` exists and ``overwrite`` is false.
    OutputError
        If the folder cannot be created or written.
    """
    target = Path(target)
    if target.exists() and not overwrite:
        raise OutputExistsError(
            str(target), "already exists", "pass --overwrite or choose another output path"
        )
    if target.is_dir():
        raise OutputError(str(target), "is a folder", "give a file path for the output")
    blocker = _file_in_the_way(target.parent)
    if blocker is not None:
        raise OutputError(str(blocker), "is a file, not a folder, so the output cannot go under it",
                          "choose another output path")
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        fd, name = tempfile.mkstemp(
            prefix=f".{target.stem}.", suffix=f".partial{target.suffix}", dir=target.parent
        )
    except OSError as err:
        raise OutputError(
            str(target.parent), f"cannot be written ({err.strerror or err})",
            "choose a folder you can write to",
        ) from None
    os.close(fd)
    tmp = Path(name)
    tmp.unlink()  # writers create the file themselves (GDAL will not open an empty file)
    try:
        yield tmp
        os.replace(tmp, target)
    except OSError as err:
        if isinstance(err, OutputError):
            raise
        raise OutputError(
            str(target), f"could not be written ({err.strerror or err})",
            "check free disk space and permissions, then run again",
        ) from None
    finally:
        _remove(tmp)


def _file_in_the_way(folder: Path) -> Path | None:
    """The nearest existing ancestor of ``folder`` (itself included) if it is not a folder."""
    for path in (folder, *folder.parents):
        if path.exists():
            return None if path.is_dir() else path
    return None


def _remove(path: Path) -> None:
    for extra in (path, Path(f"{path}-journal"), Path(f"{path}-wal"), Path(f"{path}-shm")):
        try:
            extra.unlink()
        except FileNotFoundError:
            pass
        except IsADirectoryError:
            shutil.rmtree(extra, ignore_errors=True)


def write_geopackage(
    target: str | Path,
    layers: Mapping[str, pd.DataFrame | gpd.GeoDataFrame],
    *,
    overwrite: bool = False,
) -> Path:
    """Write several layers (spatial or plain tables) into one new GeoPackage, atomically.

    Parameters
    ----------
    target : path
        The GeoPackage to write.
    layers : mapping of str to DataFrame or GeoDataFrame
        Layer name to content, written in order; a plain DataFrame becomes a
        table without geometry.
    overwrite : bool
        Replace an existing file.

    Returns
    -------
    Path
        ``target``.
    """
    target = Path(target)
    with atomic_target(target, overwrite=overwrite) as tmp:
        for name, frame in layers.items():
            _write_layer(tmp, name, frame)
    return target


def _write_layer(path: Path, name: str, frame: pd.DataFrame) -> None:
    frame = _plain_columns(frame)
    kwargs = {"driver": "GPKG", "layer": name}
    if isinstance(frame, gpd.GeoDataFrame):
        kwargs["promote_to_multi"] = True
    pyogrio.write_dataframe(frame, path, **kwargs)


def _plain_columns(frame: pd.DataFrame) -> pd.DataFrame:
    """Make column types GDAL can store (strings as object, no categoricals)."""
    frame = frame.copy()
    for col in frame.columns:
        if col == getattr(frame, "_geometry_column_name", None):
            continue
        dtype = frame[col].dtype
        if isinstance(dtype, pd.CategoricalDtype) or pd.api.types.is_string_dtype(dtype):
            frame[col] = frame[col].astype(object).where(frame[col].notna(), None)
    return frame


def write_csv(target: str | Path, frame: pd.DataFrame, *, overwrite: bool = False) -> Path:
    """Write a CSV file atomically (no index column)."""
    target = Path(target)
    with atomic_target(target, overwrite=overwrite) as tmp:
        frame.to_csv(tmp, index=False)
    return target


def write_layers_into(path: str | Path, layers: Mapping[str, pd.DataFrame]) -> None:
    """Add layers to a GeoPackage being built (e.g. the temporary file of :func:`atomic_target`)."""
    for name, frame in layers.items():
        _write_layer(Path(path), name, frame)


def append_table(path: str | Path, name: str, frame: pd.DataFrame) -> None:
    """Append rows to a table of a GeoPackage being built, creating it on first use."""
    path = Path(path)
    exists = path.exists() and name in {row[0] for row in pyogrio.list_layers(path)}
    frame = _plain_columns(frame)
    pyogrio.write_dataframe(frame, path, driver="GPKG", layer=name, append=exists)
