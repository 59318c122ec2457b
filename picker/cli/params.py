"""Shared click pieces: one parameter type for every physical value, --db, output."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any, TypeVar

import click

from picker.errors import PickerError
from picker.quantities import Kind, parse, parse_amplitude, parse_rails

F = TypeVar("F", bound=Callable[..., Any])


class QuantityParam(click.ParamType):
    """A physical value written the way engineers write it, converted to SI."""

    def __init__(self, kind: Kind, *, allow_negative: bool | None = None, positive: bool = False):
        self.kind = kind
        self.name = kind
        self.allow_negative = allow_negative
        self.positive = positive

    def convert(self, value: Any, param: click.Parameter | None, ctx: click.Context | None) -> Any:
        if isinstance(value, float):
            return value
        where = _where(param)
        try:
            if self.kind == "amplitude":
                return parse_amplitude(value, where)
            return parse(
                value, self.kind, where,
                allow_negative=self.allow_negative, allow_zero=not self.positive,
            )
        except PickerError as exc:
            self.fail(_strip_where(str(exc), where), param, ctx)


class RailsParam(click.ParamType):
    name = "rails"

    def convert(self, value: Any, param: click.Parameter | None, ctx: click.Context | None) -> Any:
        if isinstance(value, tuple):
            return value
        where = _where(param)
        try:
            return parse_rails(value, where)
        except PickerError as exc:
            self.fail(_strip_where(str(exc), where), param, ctx)


def _where(param: click.Parameter | None) -> str:
    if param is None:
        return "value"
    opts = getattr(param, "opts", None)
    return opts[-1] if opts else str(param.name)


def _strip_where(message: str, where: str) -> str:
    # click already names the option ("Invalid value for '--freq': ..."); avoid saying it twice
    prefix = f"{where}: "
    return message[len(prefix):] if message.startswith(prefix) else message


def db_option(f: F) -> F:
    """--db PATH|URL (or PICKER_DB): which stockroom to use."""
    return click.option(
        "--db",
        envvar="PICKER_DB",
        metavar="PATH|URL",
        help="stockroom: a SQLite file path or a SQLAlchemy URL (default: PICKER_DB, "
        "else picker.db in the user data folder)",
    )(f)


def format_option(f: F) -> F:
    """--json / --csv / (default) table."""
    f = click.option("--csv", "fmt", flag_value="csv", help="CSV on stdout")(f)
    f = click.option("--json", "fmt", flag_value="json", help="JSON on stdout (SI units)")(f)
    return click.option("--table", "fmt", flag_value="table", default=True, hidden=True)(f)


def open_store(db: str | None):  # type: ignore[no-untyped-def]
    """Open the stockroom named by --db/PICKER_DB (checks its schema version); its
    connections are closed when the command ends (not left to the garbage collector)."""
    from picker.store import Store

    return closed_at_exit(Store.open(db))


def closed_at_exit(store: Any) -> Any:
    """``store``, disposed of when the running click command ends (if there is one)."""
    ctx = click.get_current_context(silent=True)
    if ctx is not None:
        ctx.call_on_close(store.dispose)
    return store
