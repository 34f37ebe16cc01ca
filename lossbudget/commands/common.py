"""Pieces every command shares: one-line bad-input errors, the design argument, quantities.

Bad input of any kind (a design file, a quantity, a path) ends as one line per problem on
stderr and exit status 2; a traceback only with ``--debug``. Kept apart from
:mod:`lossbudget.cli` so that a command module imports without the group that registers it.
"""

from __future__ import annotations

import functools
import math
import sys
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

PROG = "lossbudget"

F = TypeVar("F", bound=Callable[..., Any])


class BadInput(click.ClickException):
    """A one-line error about the user's input; exit status 2."""

    exit_code = EXIT_BAD_INPUT

    def show(self, file: Any = None) -> None:
        click.echo(f"{PROG}: {self.format_message()}", err=True)


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
            if _debug():
                raise
            for line in exc.problems:
                click.echo(line, err=True)
            sys.exit(EXIT_BAD_INPUT)
        except OSError as exc:
            if _debug():
                raise
            name = exc.filename if exc.filename is not None else ""
            click.echo(f"{PROG}: {name}: {exc.strerror or exc}".replace(": : ", ": "), err=True)
            sys.exit(EXIT_BAD_INPUT)
        except Exception as exc:
            if _debug():
                raise
            click.echo(
                f"{PROG}: internal error ({type(exc).__name__}: {exc}); "
                "run again with --debug for the traceback",
                err=True,
            )
            sys.exit(EXIT_INTERNAL)

    return wrapper  # type: ignore[return-value]


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
