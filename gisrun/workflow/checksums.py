"""The files a run reads, and their SHA-256: the checksums of ``run_info`` and the cache key.

Every file GDAL reads for the subcatchment, soil and cover datasets is covered (a
shapefile's ``.dbf``, a VRT's sources, a GeoPackage's ``-wal``; see
:mod:`gisrun.io.datasets`), besides the project file, the override table and the storm files.
"""

from __future__ import annotations

import hashlib
import os
from pathlib import Path

from ..io.datasets import raster_files, vector_files
from ..project import Project

__all__ = ["dataset_files", "input_checksums", "file_sha256"]


def dataset_files(project: Project) -> dict[Path, list[Path] | None]:
    """Every file GDAL reads for the subcatchment, soil and cover datasets (sidecars too).

    Keyed by the path the project names; None where the files cannot be told
    (see :mod:`gisrun.io.datasets`).
    """
    out: dict[Path, list[Path] | None] = {
        Path(project.subcatchments.path): vector_files(project.subcatchments.path),
    }
    for source in (project.soil, project.cover):
        if source is not None:
            files = vector_files if source.is_polygons else raster_files
            out[Path(source.path)] = files(source.path)
    if project.impervious is not None and project.impervious.path is not None:
        out[Path(project.impervious.path)] = raster_files(project.impervious.path)
    return out


def input_checksums(project: Project,
                    datasets: dict[Path, list[Path] | None] | None = None) -> dict[str, str]:
    """SHA-256 of every input file, sidecars included, so a result can be traced to its inputs.

    ``datasets`` is :func:`dataset_files` when the caller has it already.
    """
    datasets = dataset_files(project) if datasets is None else datasets
    paths: list[Path] = [Path(project.path)]
    for named, files in datasets.items():
        paths += files if files is not None else [named]
    if project.overrides:
        paths.append(Path(project.overrides))
    for source in (project.soil, project.cover):  # attribute tables of keyed rasters
        if source is not None and source.attributes is not None:
            paths.append(Path(source.attributes))
    for named in project.storm_files().values():  # a folder of records: each file in it
        named = named.resolve()
        paths += sorted(p for p in named.iterdir()) if named.is_dir() else [named]
    out = {}
    for path in paths:
        if path.is_file():
            out[os.path.relpath(path, project.base_dir)] = file_sha256(path)
    return out


def file_sha256(path: str | Path) -> str:
    """SHA-256 of a file's bytes, read in 1 MB blocks."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()
