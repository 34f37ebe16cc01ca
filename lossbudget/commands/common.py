"""Pieces every command shares: one-line bad-input errors, the design argument, quantities.

Bad input of any kind (a design file, a quantity, a path) ends as one line per problem on
stderr and exit status 2; a traceback only with ``--debug``. Kept apart from
:mod:`lossbudget.cli` so that a command module imports without the group that registers it.
"""

from __future__ import annotations

import functools
import math
import signal
import sys
import traceback
from collections.abc import Callable
from pathlib import Path
from typing import Any, TypeVar

import click

from lossbudget.design import Design, load_design
from lossbudget.errors import DesignError
from lossbudget.units import DIMENSIONS, check_range, dimension_text, parse_quantity, quote_text

EXIT_OK = 0
EXIT_LIMIT_FAILED = 1
EXIT_BAD_INPUT = 2
EXIT_INTERNAL = 3
EXIT_NOTHING_SOLVED = 4
EXIT_INTERRUPTED = 128  # plus the signal number: 130 for SIGINT, 143 for SIGTERM

EXIT_STATUSES = (
    (EXIT_OK, "done"),
    (EXIT_LIMIT_FAILED, "a limit check failed (check)"),
    (EXIT_BAD_INPUT, "bad input: a design file, an option or a path, a grid above the size "
     "budget, or a file that cannot be read or written (one line each, naming the file)"),
    (EXIT_INTERNAL, "an internal error (a bug: --debug shows the traceback)"),
    (EXIT_NOTHING_SOLVED, "no point could be solved: an unsolved point, or a map or export "
     "with every point flagged (the report and files still say why)"),
    (EXIT_INTERRUPTED + 2, "interrupted by SIGINT (Ctrl-C), no partial file left"),
    (EXIT_INTERRUPTED + 15, "stopped by SIGTERM, no partial file left"),
)
"""Every exit status of the command line and its meaning (the README and --help list them)."""

PROG = "lossbudget"

F = TypeVar("F", bound=Callable[..., Any])


class BadInput(click.ClickException):
    """A one-line error about the user's input; exit status 2."""

    exit_code = EXIT_BAD_INPUT

    def show(self, file: Any = None) -> None:
        click.echo(f"{PROG}: {self.format_message()}", err=True)


class Interrupted(BaseException):
    """SIGINT or SIGTERM arrived: unwind (removing staged files) and exit 128 + signal."""

    def __init__(self, signum: int):
        super().__init__(signum)
        self.signum = signum


def _interrupt(signum: int, _frame: Any) -> None:
    raise Interrupted(signum)


def interrupts_unwind() -> dict[int, Any]:
    """Make SIGINT and SIGTERM raise :class:`Interrupted`; return the previous handlers.

    Only possible in the main thread; elsewhere nothing changes and ``{}`` is returned.
    """
    previous: dict[int, Any] = {}
    for signum in (signal.SIGINT, getattr(signal, "SIGTERM", None)):
        if signum is None:
            continue
        try:
            previous[signum] = signal.signal(signum, _interrupt)
        except ValueError:  # not the main thread
            break
    return previous


def restore_handlers(previous: dict[int, Any]) -> None:
    """Put back the handlers :func:`interrupts_unwind` replaced."""
    for signum, handler in previous.items():
        signal.signal(signum, handler)


class NothingSolved(click.ClickException):
    """No point of what was asked could be solved; exit status 4 (after the report)."""

    exit_code = EXIT_NOTHING_SOLVED

    def show(self, file: Any = None) -> None:
        click.echo(f"{PROG}: {self.format_message()}", err=True)


def nothing_solved(points: int, flagged: int) -> None:
    """Raise :class:`NothingSolved` (exit 4) when every one of ``points`` is flagged."""
    if points and flagged == points:
        raise NothingSolved(
            f"no point could be solved: all {points:,} flagged (the reasons are above "
            "and in the tables)"
        )


def _debug() -> bool:
    ctx = click.get_current_context(silent=True)
    return bool(ctx is not None and ctx.find_root().params.get("debug"))


def reports_bad_input(func: F) -> F:
    """Turn bad input into one line per problem on stderr and exit 2 (traceback with --debug).

    A :class:`DesignError` prints each of its problems; an ``OSError`` (a file that cannot be
    read or written) prints its path and reason. Any other exception is a bug: one line and
    exit 3, unless ``--debug`` asks for the traceback.
    """

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        try:
            return func(*args, **kwargs)
        except (click.ClickException, click.exceptions.Exit, click.Abort, BrokenPipeError):
            raise  # click reports these itself (a closed pipe ends quietly)
        except DesignError as exc:
            _traceback_if_debug()
            for line in exc.problems:
                click.echo(line, err=True)
            sys.exit(EXIT_BAD_INPUT)
        except OSError as exc:
            _traceback_if_debug()
            name = exc.filename if exc.filename is not None else ""
            click.echo(f"{PROG}: {name}: {exc.strerror or exc}".replace(": : ", ": "), err=True)
            sys.exit(EXIT_BAD_INPUT)
        except MemoryError:
            _traceback_if_debug()
            click.echo(
                f"{PROG}: out of memory: the grid is too large for this machine (use fewer "
                "points; nothing was written)",
                err=True,
            )
            sys.exit(EXIT_BAD_INPUT)
        except Exception as exc:
            _traceback_if_debug()
            if _debug():
                sys.exit(EXIT_INTERNAL)
            click.echo(
                f"{PROG}: internal error ({type(exc).__name__}: {exc}); "
                "run again with --debug for the traceback",
                err=True,
            )
            sys.exit(EXIT_INTERNAL)

    return wrapper  # type: ignore[return-value]


def _traceback_if_debug() -> None:
    """With --debug, print the traceback of the exception being handled (the status stays)."""
    if _debug():
        traceback.print_exc(file=sys.stderr)


design_argument = click.argument(
    "design", metavar="DESIGN", type=click.Path(dir_okay=False, path_type=Path)
)
"""The positional design-file argument every design command takes."""


def read_design(path: Path) -> Design:
    """Load a design file for a command (errors are reported by :func:`reports_bad_input`)."""
    return load_design(path)


def quantity(
    text: str | None, dimension: str, option: str, *, nonnegative: bool = False
) -> float | None:
    """Parse a command-line quantity ("24 V" or a bare SI number) or raise BadInput.

    The value is range-checked like a design-file value: finite, inside the dimension's
    stated range (:func:`lossbudget.units.check_range`), and above zero (at least zero with
    ``nonnegative``; an absolute temperature only by its range). A sign is never dropped.
    """
    if text is None:
        return None
    try:
        value: object = float(text)
    except ValueError:
        value = text
    try:
        number = parse_quantity(value, dimension, where=option)
        check_range(number, dimension, where=option, raw=text)
    except ValueError as exc:
        raise BadInput(str(exc)) from None
    if dimension != "temperature" and (number < 0 or (number == 0 and not nonnegative)):
        bound = "at least 0" if nonnegative else "above 0"
        raise BadInput(
            f"{option}: expected {dimension_text(DIMENSIONS[dimension])} {bound}, "
            f"got {quote_text(text)}"
        )
    return number


LOAD_PCT_MAX = 1000.0
"""Largest ``--load-pct`` accepted: ten times the rated current (beyond it, a typing slip)."""


def load_percent(value: float | None, option: str = "--load-pct") -> float | None:
    """A load in percent of rated from the command line, as a fraction; BadInput unless it
    is finite, above 0 and at most :data:`LOAD_PCT_MAX`."""
    if value is None:
        return None
    if not (math.isfinite(value) and 0 < value <= LOAD_PCT_MAX):
        raise BadInput(
            f"{option}: expected a load in percent of rated, above 0 and at most "
            f"{LOAD_PCT_MAX:g}, got {value!r}"
        )
    return value / 100.0
