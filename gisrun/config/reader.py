"""The one reader of the project file's tables: typed look-ups with one-line errors.

Every table of the project file, the ``[[storms]]`` tables included, is read
through a :class:`TableReader`: it knows the table's location for messages
(``gisrun.toml:[soil]``, ``gisrun.toml:[[storms]] 2``), checks keys against a
schema, and raises a :class:`~gisrun.errors.ProjectFileError` (for a storm
table, :class:`StormTableError`, which is also a
:class:`~gisrun.errors.StormError`) naming the key, what is wrong and what to do.
"""

from __future__ import annotations

import math
from collections.abc import Collection, Mapping
from pathlib import Path
from typing import Any

from ..errors import ProjectFileError, StormError
from ..options import Choices, did_you_mean

__all__ = ["TableReader", "StormTableError"]


class StormTableError(ProjectFileError, StormError):
    """A bad ``[[storms]]`` table: a project-file error that is also a storm error."""


class TableReader:
    """Typed look-ups in one parsed TOML table.

    Parameters
    ----------
    table : mapping
        The parsed table (``{}`` when it is absent).
    at : str
        Its location in messages; a key ``k`` is at ``f"{at}.{k}"``.
    base_dir : Path
        Folder relative paths are resolved against (the project file's folder).
    error : type
        The :class:`ProjectFileError` class to raise.
    top_level : bool
        The file's top level: a key ``k`` is at ``f"{at}:[{k}]"``.
    """

    def __init__(self, table: Mapping[str, Any], at: str, base_dir: Path, *,
                 error: type[ProjectFileError] = ProjectFileError,
                 top_level: bool = False) -> None:
        self.data, self.at, self.base_dir, self.error = table, at, Path(base_dir), error
        self.top_level = top_level

    def where(self, key: str | None = None) -> str:
        """The location of ``key`` (or of the table)."""
        if key is None:
            return self.at
        return f"{self.at}:[{key}]" if self.top_level else f"{self.at}.{key}"

    def fail(self, key: str | None, problem: str, fix: str) -> None:
        """Raise this reader's error at ``key``."""
        raise self.error(self.where(key), problem, fix)

    def check_keys(self, valid: Collection[str], *, elsewhere: Collection[str] = (),
                   elsewhere_problem: str = "does not apply here",
                   elsewhere_fix: str = "remove it") -> None:
        """Stop on a key not in ``valid``; ``elsewhere`` are keys valid in other variants."""
        for key in self.data:
            if key in valid:
                continue
            if key in elsewhere:
                self.fail(key, elsewhere_problem, elsewhere_fix)
            self.fail(key, "is not a known key", did_you_mean(key, [*valid, *elsewhere]))

    def sub(self, key: str, at: str | None = None, *, required: bool = False) -> TableReader:
        """A reader of the sub-table ``key`` (``{}`` when absent and not ``required``)."""
        value = self.data.get(key)
        if value is None and not required:
            value = {}
        if not isinstance(value, Mapping):
            self.fail(key, f"{value!r} is not a table", f"write it as a table of keys ({key})")
        return TableReader(value, at or self.where(key), self.base_dir, error=self.error)

    def string(self, key: str, *, default: str | None = None, required: bool = True) -> str:
        """A non-empty text, stripped."""
        value = self.data.get(key, default)
        if value is None:
            if required:
                self.fail(key, "is missing", "add it")
            return None  # type: ignore[return-value]
        if not isinstance(value, str) or not value.strip():
            self.fail(key, f"must be a non-empty text, got {value!r}", "write it in quotes")
        return value.strip()

    def number(self, key: str, *, default: float | None = None, low: float = -math.inf,
               high: float = math.inf, low_open: bool = False) -> float:
        """A finite number in the range (``low`` exclusive when ``low_open``)."""
        value = self.data.get(key, default)
        if value is None:
            self.fail(key, "is missing", f"add {key} = ...")
        rng = _range_text(low, high, low_open)
        if isinstance(value, bool) or not isinstance(value, int | float):
            self.fail(key, f"{value!r} is not a number", f"write a number {rng}")
        inside = value > low if low_open else value >= low
        if not (math.isfinite(value) and inside and value <= high):
            span = f"{'(' if low_open else '['}{low:g}, {high:g}{']' if high < math.inf else ')'}"
            self.fail(key, f"is {value!r}, outside {span}", f"give a number {rng}")
        return float(value)

    def allowed(self, key: str, allowed: tuple[float, ...], *, default: float) -> float:
        """A number that must be one of ``allowed``."""
        value = self.number(key, default=default)
        if value not in allowed:
            self.fail(key, f"is {value:g}", f"use one of {[f'{a:g}' for a in allowed]}")
        return value

    def strings(self, key: str, example: str) -> tuple[str, ...]:
        """A list of non-empty texts (``[]`` when absent)."""
        value = self.data.get(key, [])
        if not isinstance(value, list) or not all(isinstance(v, str) and v for v in value):
            self.fail(key, f"must be a list of field names, got {value!r}", f"write e.g. {example}")
        return tuple(value)

    def flag(self, key: str, *, default: bool) -> bool:
        """``true`` or ``false``."""
        value = self.data.get(key, default)
        if not isinstance(value, bool):
            self.fail(key, f"must be true or false, got {value!r}",
                      "write true or false without quotes")
        return value

    def choice(self, key: str, valid: Choices) -> str:
        """One of ``valid``, spelled any way :func:`~gisrun.options.normalize_name` allows."""
        value = self.string(key, default=valid.default)
        return valid.pick(value, where=self.where(key), error=self.error)

    def path(self, key: str, *, default: str | None = None, required: bool = True
             ) -> Path | None:
        """A path, relative to ``base_dir`` unless absolute (None when absent, not required)."""
        value = self.string(key, default=default, required=required)
        if value is None:
            return None
        path = Path(value).expanduser()
        return path if path.is_absolute() else (self.base_dir / path).resolve()

    def codes(self, section: str) -> dict[int, str]:
        """The ``codes`` sub-table: whole-number raster codes to class names."""
        raw = self.data.get("codes")
        if not isinstance(raw, dict) or not raw:
            self.fail("codes", "is missing or empty",
                      f"add a [{section}.codes] table mapping raster codes to classes")
        table = self.sub("codes", at=f"{self.at[:-1]}.codes]")
        codes: dict[int, str] = {}
        keys: dict[int, str] = {}
        for key, label in raw.items():
            try:
                code = int(str(key).strip())
            except ValueError:
                table.fail(str(key), "is not a whole-number raster code",
                           "use integer codes as keys, e.g. \"1\" = \"A\"")
            if not _INT64_MIN <= code <= _INT64_MAX:
                table.fail(str(key), "is beyond any raster band's whole numbers (64 bits)",
                           "use the code the raster holds (check the raster's values)")
            if not isinstance(label, str) or not label.strip():
                table.fail(str(key), f"maps to {label!r}",
                           "map each code to a class name in quotes")
            if code in keys:  # "1" and "01" are the same raster code: never let one win
                raise self.error(f'{table.at}."{key}"', f"is raster code {code} again "
                                 f"(already given as \"{keys[code]}\" = {codes[code]!r})",
                                 "keep one entry per raster code")
            codes[code], keys[code] = label.strip(), str(key)
        return codes


_INT64_MIN, _INT64_MAX = -(2**63), 2**63 - 1


def _range_text(low: float, high: float, low_open: bool) -> str:
    parts = [] if low == -math.inf else [f"{'>' if low_open else '>='} {low:g}"]
    parts += [] if high == math.inf else [f"<= {high:g}"]
    return " and ".join(parts)
