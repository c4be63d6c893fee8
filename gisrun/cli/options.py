"""Arguments and options shared by more than one command, defined once."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import click
from click.decorators import FC

from ..options import UNIT_SYSTEMS

__all__ = ["project_argument", "overwrite_option", "units_option", "plot_option"]

#: The project file, or a folder holding ``gisrun.toml`` (``run``, ``check``).
project_argument = click.argument(
    "project", type=click.Path(path_type=Path), metavar="PROJECT",
)

#: Unit system of a storm command's input and output (``storm make``, ``storm show``).
units_option = click.option(
    "--units", "units_name", type=click.Choice(list(UNIT_SYSTEMS)), default="si", show_default=True,
    help="si: depths mm, intensities mm/h; us: depths in, intensities in/h.",
)

#: A PNG bar chart of the storm (``storm make``, ``storm show``).
plot_option = click.option(
    "--plot", "plot_path", type=click.Path(dir_okay=False, path_type=Path),
    help="Also draw the storm as a bar chart into this PNG file.",
)


def overwrite_option(what: str) -> Callable[[FC], FC]:
    """``--overwrite``: replace an existing ``what`` (``"output"``, ``"CSV"``)."""
    return click.option("--overwrite", is_flag=True, help=f"Replace an existing {what}.")
