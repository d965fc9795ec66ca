"""Command-line interface: ``saltplan COMMAND ...``.

Each command lives in its own module of this package, parses options, calls one library
function and prints. Commands are imported lazily (fast start-up). Domain errors
(:class:`~saltplan.errors.SaltplanError`) become a one-line message on stderr and exit 1
in exactly one place, :meth:`SaltplanGroup.invoke`; usage errors exit 2 (click).
"""
from __future__ import annotations

import importlib
import sys

import click

from .._version import __version__

#: command name -> "module:attribute"; modules that do not exist yet are skipped.
COMMANDS = {
    "parent": "saltplan.cli.parent:parent",
    "library": "saltplan.cli.library:library",
    "sites": "saltplan.cli.sites:sites",
    "plan": "saltplan.cli.plan:plan",
    "solvents": "saltplan.cli.screen:solvents",
    "screen": "saltplan.cli.screen:screen",
    "batch": "saltplan.cli.batch:batch",
    "select": "saltplan.cli.select:select",
    "demo": "saltplan.cli.demo:demo",
    "serve": "saltplan.cli.serve:serve",
    "ledger": "saltplan.cli.ledger:ledger",
}


class SaltplanGroup(click.Group):
    def list_commands(self, ctx):
        return [name for name in COMMANDS if self.get_command(ctx, name) is not None]

    def get_command(self, ctx, name):
        target = COMMANDS.get(name)
        if target is None:
            return None
        module, _, attr = target.partition(":")
        try:
            mod = importlib.import_module(module)
        except ModuleNotFoundError as exc:
            if exc.name == module:
                return None
            raise
        return getattr(mod, attr)

    def invoke(self, ctx):
        from .._io import stop_on_signals
        from ..errors import Interrupted

        # SIGINT / SIGTERM: the run unwinds (workers stopped, temporaries removed), one
        # line says how far it got, exit 128 + signal number (130, 143)
        try:
            with stop_on_signals():
                return self._invoke(ctx)
        except Interrupted as exc:
            click.echo(f"saltplan: {exc.one_line()}", err=True)
            ctx.exit(exc.exit_code)

    def _invoke(self, ctx):
        from ..errors import SaltplanError

        try:
            return super().invoke(ctx)
        except (click.exceptions.Exit, click.Abort, click.ClickException):
            raise
        except SaltplanError as exc:
            if _verbose(ctx):
                raise
            raise click.ClickException(exc.one_line()) from None
        except (KeyboardInterrupt, BrokenPipeError):
            raise
        except Exception as exc:  # a bug: say so plainly, traceback only with --verbose
            if _verbose(ctx):
                raise
            first = str(exc).splitlines()[0] if str(exc) else ""
            raise click.ClickException(
                f"internal error ({type(exc).__name__}: {first}); run again with --verbose "
                "for the traceback and please report it") from None


def _verbose(ctx) -> bool:
    obj = ctx.find_root().obj or {}
    return bool(obj.get("verbose"))


@click.group(cls=SaltplanGroup, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, "--version", prog_name="saltplan")
@click.option("--verbose", is_flag=True, help="Show tracebacks on errors.")
@click.pass_context
def main(ctx, verbose):
    """Plan the salt forms of a drug candidate.

    From a structure: ionizable sites and pKa estimates, a ranked counterion shortlist
    (ΔpKa rule, acceptability, liabilities), a salt-screen design with amounts and a plate
    map, reports for the CMC file, and the decision record after the screen.

    A planning aid, not a measurement: confirm pKa, salt formation and solid form by
    experiment, and defer to the pharmacopoeias (USP-NF, Ph. Eur.), ICH guidance, local
    regulation and qualified staff.
    """
    ctx.ensure_object(dict)
    ctx.obj["verbose"] = ctx.obj.get("verbose", False) or verbose


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
