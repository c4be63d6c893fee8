"""``gisrun check PROJECT``: check every input without running; one line per problem."""

from __future__ import annotations

from pathlib import Path

import click

from ..workflow.check import check_project
from .options import project_argument

__all__ = ["check"]


@click.command(short_help="Check every input of PROJECT without running it.")
@project_argument
def check(project: Path) -> None:
    """Check every input of PROJECT without running it; report each problem on one line."""
    facts: list[str] = []
    problems, notes, outputs = check_project(project, facts)
    for fact in facts:
        click.echo(f"polygon layer {fact}")
    for note in notes:
        click.echo(f"gisrun: warning: {note}", err=True)
    for problem in problems:
        click.echo(f"gisrun: error: {problem}", err=True)
    if problems:
        click.echo(f"{len(problems)} problem(s) found.", err=True)
        raise click.exceptions.Exit(2)
    for line in outputs:
        click.echo(line)
    click.echo("No problems found.")
