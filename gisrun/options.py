"""Every string option gisrun accepts, in one place, and the one way names are matched.

A choice typed by a user (``"Green-Ampt"``, ``"green ampt"``, ``"GREEN_AMPT"``) goes
through :func:`normalize_name` wherever it is read, so it means the same everywhere;
an unknown one gets the hint from :func:`did_you_mean`.

Examples
--------
>>> normalize_name(" Green-Ampt ")
'green_ampt'
>>> did_you_mean("hortn", ["green_ampt", "horton"])
"did you mean 'horton'?"
>>> did_you_mean("zzz", ["b", "a"])
"use one of ['a', 'b']"
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable

__all__ = ["normalize_name", "did_you_mean"]


def normalize_name(text: object) -> str:
    """Lower case, with runs of spaces, dashes and underscores made one ``_``."""
    return "_".join(str(text).strip().lower().replace("-", " ").replace("_", " ").split())


def did_you_mean(value: object, valid: Iterable[str], *, cutoff: float = 0.5) -> str:
    """A hint naming the nearest valid choice, or listing them all when none is near."""
    choices = sorted(dict.fromkeys(str(v) for v in valid))
    near = difflib.get_close_matches(str(value), choices, n=1, cutoff=cutoff)
    return f"did you mean {near[0]!r}?" if near else f"use one of {choices}"
