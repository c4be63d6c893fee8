"""The ``gisrun`` command group, its exit codes and the console script.

:func:`main` runs the group and turns what happened into an exit code: 0
success, 2 a :class:`~gisrun.errors.GisrunError` (printed on one line), 1 an
internal error (a one-line hint to report it; ``--debug`` shows the
traceback), 130 / 143 when stopped by Ctrl-C / SIGTERM.
"""

from __future__ import annotations

import signal
import sys
import threading
import traceback
from collections.abc import Iterator
from contextlib import contextmanager

import click

from .._version import __version__
from ..errors import GisrunError
from ..io.commit import InterruptedAfterCommit
from .check import check
from .run import run
from .storm import storm
from .tables import tables

__all__ = ["cli", "main", "INTERRUPTED"]

#: Said when a run is stopped by Ctrl-C or SIGTERM: each output is written to a temporary file
#: and moved into place only when complete, so none is ever half-written.
INTERRUPTED = ("gisrun: interrupted; the output being written was discarded and any earlier "
               "version of it is unchanged")


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="gisrun")
@click.option("--debug", is_flag=True, help="Show tracebacks for errors.")
def cli(debug: bool) -> None:
    """Infiltration and runoff for every subcatchment, from soil and land-cover rasters.

    Planning-level estimates: check results against local codes and agency
    methods, and have them reviewed by a licensed engineer.
    """


for _command in (run, check, tables, storm):
    cli.add_command(_command)


class Terminated(BaseException):
    """Raised in the main thread on SIGTERM so that cleanup code (``finally``) runs.

    A ``BaseException``, like ``KeyboardInterrupt``, so ``except Exception`` does not catch it.
    """


def _raise_terminated(signum: int, _frame: object) -> None:
    raise Terminated(signum)


@contextmanager
def _sigterm_raises() -> Iterator[None]:
    """Turn SIGTERM into :class:`Terminated` while the command runs (main thread only)."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous = signal.signal(signal.SIGTERM, _raise_terminated)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


def main(argv: list[str] | None = None) -> int:
    """Run the command line; return the exit code (also used as the console script).

    Exit codes: 0 success, 2 a problem the user can fix, 1 an internal error,
    130 interrupted by Ctrl-C (SIGINT), 143 stopped by SIGTERM (128 + signal
    number, common practice).
    """
    try:
        with _sigterm_raises():
            return _main(argv)
    except Terminated:
        click.echo(INTERRUPTED, err=True)
        return 128 + signal.SIGTERM
    except InterruptedAfterCommit as late:
        paths = ", ".join(str(p) for p in late.paths) or "the outputs"
        click.echo(f"gisrun: interrupted while the finished outputs were moved into place; "
                   f"they are complete ({paths})", err=True)
        return 128 + late.signum


def _main(argv: list[str] | None) -> int:
    args = list(sys.argv[1:] if argv is None else argv)
    debug = "--debug" in args
    try:
        code = cli.main(args=args, prog_name="gisrun", standalone_mode=False)
    except GisrunError as err:
        click.echo(f"gisrun: error: {err}", err=True)
        if debug:
            traceback.print_exc()
        return 2
    except click.exceptions.Abort:
        click.echo(INTERRUPTED, err=True)
        return 130
    except click.ClickException as err:
        err.show()
        return err.exit_code
    except KeyboardInterrupt:
        click.echo(INTERRUPTED, err=True)
        return 130
    except Exception as err:  # noqa: BLE001 - the last line of defence
        if debug:
            traceback.print_exc()
        click.echo(
            f"gisrun: internal error ({type(err).__name__}: {err}); please report it with the "
            "command and project file (run again with --debug for the traceback)", err=True,
        )
        return 1
    return code if isinstance(code, int) else 0


def _entry() -> None:  # pragma: no cover - console script wrapper
    sys.exit(main())
