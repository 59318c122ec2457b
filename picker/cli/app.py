"""The top-level command group: lazy sub-commands and the one place errors are shown.

Sub-command modules are imported only when their command runs, so ``picker --help``
does not pay for numpy, pandas, SQLAlchemy or matplotlib.
"""

from __future__ import annotations

import importlib
import importlib.util
import sys
import warnings
from typing import Any

import click

from picker import __version__
from picker.errors import PickerError

# command name -> "module:attribute"; each module is a thin click front end
COMMANDS: dict[str, tuple[str, str]] = {
    "init": ("picker.cli.setup:init", "create a stockroom (optionally with the demo parts)"),
    "parts": ("picker.cli.parts:parts", "list, show, add, edit, remove, import, export parts"),
    "db": ("picker.cli.db:db", "schema upgrades, backup and restore of the stockroom"),
    "spec": ("picker.cli.design:spec", "the minimum op-amp specifications a stage implies"),
    "pick": ("picker.cli.design:pick", "check every part in stock against a stage, ranked"),
    "why": ("picker.cli.design:why", "the full check sheet of one part for a stage"),
    "design": ("picker.cli.designfile:design", "design files: a commented template of every requirement key"),
    "net": ("picker.cli.network:net", "design the stage's resistor network from E-series values"),
    "wave": ("picker.cli.wave:wave", "predict the output waveform of a part in the stage"),
    "bode": ("picker.cli.wave:bode", "closed-loop gain and phase over frequency"),
    "note": ("picker.cli.note:note", "write a one-page design note (HTML or Markdown)"),
    "sweep": ("picker.cli.sweep:sweep",
              "vary one value of the stage: where each part passes, what stops it"),
    "envelope": ("picker.cli.envelope:envelope",
                 "largest output amplitude each part supports, by frequency"),
    "netlist": ("picker.cli.netlist:netlist", "the stage with one part as a SPICE deck for ngspice"),
    "stock": ("picker.cli.stock:stock", "take, reserve, release, issue, return, restock and count parts; the log"),
}

EXIT_BAD_INPUT = 2


def _is_available(target: str) -> bool:
    module = target.split(":", 1)[0]
    return importlib.util.find_spec(module) is not None


class PickerGroup(click.Group):
    """A group that loads its commands lazily and turns PickerError into exit 2."""

    def list_commands(self, ctx: click.Context) -> list[str]:
        lazy = [n for n, (t, _) in COMMANDS.items() if _is_available(t)]
        return sorted(set(super().list_commands(ctx)) | set(lazy))

    def get_command(self, ctx: click.Context, cmd_name: str) -> click.Command | None:
        if cmd_name in self.commands:
            return self.commands[cmd_name]
        entry = COMMANDS.get(cmd_name)
        if entry is None or not _is_available(entry[0]):
            return None
        module, attr = entry[0].split(":", 1)
        cmd = getattr(importlib.import_module(module), attr)
        assert isinstance(cmd, click.Command)
        return cmd

    def format_commands(self, ctx: click.Context, formatter: click.HelpFormatter) -> None:
        # short help from the table above, without importing every module
        rows = [(n, COMMANDS[n][1]) for n in self.list_commands(ctx) if n in COMMANDS]
        if rows:
            with formatter.section("Commands"):
                formatter.write_dl(rows)

    def main(self, args: Any = None, prog_name: str | None = None, complete_var: str | None = None,
             standalone_mode: bool = True, **extra: Any) -> Any:
        if not standalone_mode:
            return super().main(args, prog_name, complete_var, standalone_mode=False, **extra)
        sys.exit(self.run(args, prog_name or "picker", **extra))

    def run(self, args: list[str] | None = None, prog_name: str = "picker", **extra: Any) -> int:
        """Run the command line and return its exit code (0 ok, 2 bad input, 1 bug).

        This is the one place errors become messages: a PickerError or a click usage
        error is one line on stderr and exit code 2; anything else is a bug (exit 1).
        """
        given = sys.argv[1:] if args is None else list(args)
        engine = sys.modules.get("picker.store.engine")  # not imported: nothing remembered
        if engine is not None:
            engine.forget_secrets()
        for i, arg in enumerate(given, start=1):
            if "\x00" in str(arg):  # a shell cannot pass one; a program calling us can
                _error(f"argument {i} contains a NUL character; remove it")
                return EXIT_BAD_INPUT
        # Warnings (numpy's RuntimeWarning on an overflow, say) are held while the command
        # runs: a refused command shows its one line and nothing else; a finished one shows
        # them after its output. The filters are left as they are (an "error" filter still
        # raises).
        with warnings.catch_warnings(record=True) as held:
            code = self._run(args, prog_name, **extra)
        if code == 0:
            for w in held:
                warnings.showwarning(w.message, w.category, w.filename, w.lineno, w.file, w.line)
        return code

    def _run(self, args: list[str] | None, prog_name: str, **extra: Any) -> int:
        try:
            rv = super().main(args, prog_name, standalone_mode=False, **extra)
        except click.exceptions.Exit as exc:
            return int(exc.exit_code)
        except click.UsageError as exc:
            hint = f" (see `{exc.ctx.command_path} --help`)" if exc.ctx is not None else ""
            _error(exc.format_message() + hint)
            return EXIT_BAD_INPUT
        except click.ClickException as exc:
            _error(exc.format_message())
            return EXIT_BAD_INPUT
        except click.Abort:
            click.echo("picker: stopped; nothing was changed", err=True)
            return 1
        except PickerError as exc:
            _error(str(exc))
            return EXIT_BAD_INPUT
        except Exception as exc:
            # a database that fails underneath (damaged file, server gone) is the
            # environment, not a bug: one line, exit 2; anything else propagates (exit 1)
            if not _is_database_error(exc):
                raise
            _error(f"the stockroom failed: {getattr(exc, 'orig', exc)}; check the --db file "
                   "or server (`picker db backup` and `picker db restore` move a stockroom)")
            return EXIT_BAD_INPUT
        return rv if isinstance(rv, int) else 0


def _is_database_error(exc: BaseException) -> bool:
    if "sqlalchemy" not in sys.modules:
        return False
    from sqlalchemy.exc import DBAPIError

    return isinstance(exc, DBAPIError)


def _error(message: str) -> None:
    from picker.store.engine import redact

    click.echo(f"picker: error: {redact(' '.join(message.split()))}", err=True)


@click.group(name="picker", cls=PickerGroup, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="picker")
def cli() -> None:
    """Choose op-amps from the team's own stock for an amplifier stage.

    Describe the stage (topology, gain, signal, load, rails, accuracy); picker derives
    the minimum specifications, checks every part in stock with exact circuit models,
    ranks the survivors and says why each other part fails.

    The stockroom is a SQLite file by default; --db PATH|URL or PICKER_DB chooses
    another (PostgreSQL for a team).
    """


def main() -> None:
    try:
        code = cli.run()
    except Exception:  # a bug: show it and exit 1
        import traceback

        traceback.print_exc()
        click.echo("picker: internal error (a bug); please report the lines above", err=True)
        code = 1
    sys.exit(code)
