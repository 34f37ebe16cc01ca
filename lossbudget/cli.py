"""The command line: a thin click shell over the public API.

Each command turns its options into arguments, makes one library call and prints or writes.
No physics lives here. Bad input of any kind (a design file, a quantity, a path, click's own
usage errors) ends as one line per problem on stderr and exit status 2; a traceback is shown
only with ``--debug``. The heavy libraries (scipy, pandas, matplotlib, openpyxl) load inside
the commands that need them, so ``lossbudget --help`` stays fast.

Exit status: 0 done, 1 a limit check failed, 2 bad input (or a file that cannot be read or
written), 3 an internal error (a bug), 4 no point could be solved, 130 interrupted by SIGINT,
143 stopped by SIGTERM (:data:`lossbudget.commands.common.EXIT_STATUSES`).
"""

from __future__ import annotations

import signal
import sys
import textwrap
from collections.abc import Callable
from pathlib import Path
from typing import Any

import click

from lossbudget import __version__
from lossbudget.commands.common import (
    EXIT_BAD_INPUT,
    EXIT_INTERNAL,
    EXIT_INTERRUPTED,
    EXIT_LIMIT_FAILED,
    EXIT_NOTHING_SOLVED,
    EXIT_OK,
    EXIT_STATUSES,
    PROG,
    BadInput,
    Interrupted,
    design_argument,
    interrupts_unwind,
    read_design,
    reports_bad_input,
    restore_handlers,
)
from lossbudget.output.tables import aligned_table

__all__ = [
    "EXIT_BAD_INPUT",
    "EXIT_INTERNAL",
    "EXIT_LIMIT_FAILED",
    "EXIT_NOTHING_SOLVED",
    "EXIT_OK",
    "PROG",
    "BadInput",
    "design_argument",
    "main",
    "read_design",
    "reports_bad_input",
]


EXIT_EPILOG = "\b\nExit status:\n" + "\n".join(
    textwrap.fill(text, width=78, initial_indent=f"  {code:>3}  ", subsequent_indent=" " * 7)
    for code, text in EXIT_STATUSES
)
"""The exit statuses as the help of the group and of every command lists them."""


class _Group(click.Group):
    """A group whose usage errors (its own and its commands') print as one line."""

    def make_context(self, info_name: str | None, args: list[str], parent=None, **extra):
        return _one_line_usage(super().make_context, info_name, args, parent=parent, **extra)

    def resolve_command(self, ctx: click.Context, args: list[str]):
        return _one_line_usage(super().resolve_command, ctx, args)

    def invoke(self, ctx: click.Context) -> Any:
        return _one_line_usage(super().invoke, ctx)

    def main(self, *args: Any, **kwargs: Any) -> Any:
        """Run a command; SIGINT and SIGTERM unwind it (staged files removed) and exit 128 + n.

        The signals raise :class:`~lossbudget.commands.common.Interrupted` rather than
        KeyboardInterrupt, so that click does not turn them into its own status 1.
        """
        previous = interrupts_unwind()
        try:
            return super().main(*args, **kwargs)
        except Interrupted as exc:
            name = signal.Signals(exc.signum).name
            click.echo(f"{PROG}: interrupted by {name}; no partial file is left", err=True)
            sys.exit(EXIT_INTERRUPTED + exc.signum)
        finally:
            restore_handlers(previous)


def _one_line_usage(call: Callable[..., Any], *args: Any, **kwargs: Any) -> Any:
    try:
        return call(*args, **kwargs)
    except click.exceptions.NoArgsIsHelpError:
        raise  # prints the help, as asked
    except click.UsageError as exc:
        ctx = exc.ctx
        where = ctx.command_path if ctx is not None else PROG
        raise BadInput(f"{exc.format_message()} (see '{where} -h')") from exc


@click.group(
    cls=_Group,
    context_settings={"help_option_names": ["-h", "--help"]},
    epilog=EXIT_EPILOG,
)
@click.version_option(__version__, "--version", prog_name=PROG, message="%(prog)s %(version)s")
@click.option("--debug", is_flag=True, help="Show the traceback of an error.")
def main(debug: bool) -> None:
    """Loss and thermal budgets of DC-DC converter stages from a design file.

    Every loss of a boost, buck or inverting buck-boost stage, from datasheet-level
    parameters, coupled to a thermal-resistance network and checked against limits.
    """


@main.command()
@design_argument
@reports_bad_input
def validate(design: Path) -> None:
    """Check a design file and print every resolved parameter with its unit.

    Defaults that were applied are listed after the parameters; warnings go to stderr.
    Every quantity must lie inside its dimension's stated range (README, "Ranges"; for
    example resistances from 1e-06 to 1e+09 ohm, absolute temperatures from -250 to 1000
    degC), counts of parallel parts at most 1,000.
    """
    d = read_design(design)
    click.echo(f"{d.name} ({d.source}): valid")
    rect = "synchronous rectifier" if d.rectifier_kind == "sync" else "diode rectifier"
    click.echo(f"{d.topology}, {rect}; sha256 {d.checksum[:16]}")
    click.echo()
    click.echo(aligned_table(("parameter", "value"), d.resolved))
    if d.defaults:
        click.echo()
        click.echo(aligned_table(("default applied", "value"), d.defaults))
    from lossbudget.solver import not_modelled

    missing = not_modelled(d)
    if missing:
        click.echo()
        click.echo(aligned_table(("not modelled", "the key that would enable it"),
                                 [(f"{c} {m}", key) for c, m, key in missing]))
    for line in d.warnings:
        click.echo(f"warning: {line}", err=True)


from lossbudget.commands.point import point  # noqa: E402

main.add_command(point)

from lossbudget.commands.checking import check  # noqa: E402

main.add_command(check)

from lossbudget.commands.mapping import demo_command, map_command  # noqa: E402

main.add_command(map_command)
main.add_command(demo_command)

from lossbudget.commands.exporting import export  # noqa: E402

main.add_command(export)

from lossbudget.commands.comparing import compare_command  # noqa: E402

main.add_command(compare_command)

from lossbudget.commands.calibrating import calibrate_command  # noqa: E402

main.add_command(calibrate_command)

for _command in main.commands.values():
    _command.epilog = _command.epilog or EXIT_EPILOG
