"""Whether the optional dask extra a run asks for is installed, before any work."""

from __future__ import annotations

import importlib.util

from ..errors import InputError

__all__ = ["require_dask"]


def require_dask(workers: int | None, scheduler: str | None) -> None:
    """Stop before any work when ``--workers`` or ``--scheduler`` asks for dask and it is absent.

    Raises
    ------
    InputError
        Naming the option and the extra to install.
    """
    if not workers and not scheduler:
        return
    local = scheduler in ("synchronous", "threads", "sync", "processes") and not workers
    needed = ("dask",) if local else ("dask", "distributed")
    missing = [name for name in needed if importlib.util.find_spec(name) is None]
    if missing:
        option = "--workers" if workers else "--scheduler"
        raise InputError(option, f"needs {' and '.join(missing)}, which is not installed",
                         'install the extra: pip install "gisrun[dask]", or run without it')
