"""Errors and warnings for problems a user can fix.

Every user-facing problem is a :class:`GisrunError`. Its message is one line,
``<where>: <what is wrong>; <what to do>``, so the command line can print it
as is and exit with status 2. Children also subclass a builtin so callers can
catch them the ordinary way (``except ValueError``).
"""

from __future__ import annotations

__all__ = [
    "GisrunError",
    "InputError",
    "ProjectFileError",
    "CRSError",
    "RasterError",
    "VectorError",
    "ParameterError",
    "StormError",
    "OutputError",
    "OutputExistsError",
    "GisrunWarning",
]


class GisrunError(Exception):
    """A problem the user can fix; the CLI prints it on one line and exits 2.

    Parameters
    ----------
    where : str
        The file, layer, field, row or id at fault (``"soil.tif"``,
        ``"project.toml:[soil]"``, ``"subcatchments.gpkg:id=S12"``).
    problem : str
        What is wrong, in plain words.
    fix : str
        What the user should do about it.
    """

    def __init__(self, where: str, problem: str, fix: str) -> None:
        one_line = " ".join(f"{where}: {problem}; {fix}".split())
        super().__init__(one_line)
        self.where = where
        self.problem = problem
        self.fix = fix


class InputError(GisrunError, ValueError):
    """A bad input file, layer, field or value."""


class ProjectFileError(InputError):
    """A project file that is missing, malformed or names something unknown."""


class CRSError(InputError):
    """A missing, unusable or inconsistent coordinate reference system."""


class RasterError(InputError):
    """A raster that cannot be used (codes, transform, nodata, extent)."""


class VectorError(InputError):
    """A subcatchment layer that cannot be used (ids, geometry, fields)."""


class ParameterError(InputError):
    """A parameter table or value that is missing or out of its range."""


class StormError(InputError):
    """A storm (hyetograph or design storm definition) that cannot be used."""


class OutputError(GisrunError, OSError):
    """An output that cannot be written."""


class OutputExistsError(OutputError):
    """An output that already exists and may not be replaced."""


class GisrunWarning(UserWarning):
    """Something a user should know about; recorded in the run table."""
