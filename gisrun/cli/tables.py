"""``gisrun tables [NAME]``: the shipped parameter tables and their sources."""

from __future__ import annotations

import click

from ..errors import GisrunError
from ..parameters import list_tables

__all__ = ["tables"]


@click.command(short_help="List the shipped parameter tables and their sources.")
@click.argument("name", required=False)
def tables(name: str | None) -> None:
    """List the shipped parameter tables and their sources (or print table NAME)."""
    found = list_tables()
    if name is None:
        for table in found:
            click.echo(f"{table.name}: {table.title}")
            for line in table.source_lines:
                click.echo(f"    {line}")
        return
    for table in found:
        if table.name == name:
            click.echo(f"{table.name}: {table.title}")
            for line in table.source_lines:
                click.echo(f"# {line}")
            click.echo(table.frame.to_string(index=False))
            return
    names = [t.name for t in found]
    raise GisrunError(f"table {name!r}", "is not a shipped table", f"use one of {names}")
