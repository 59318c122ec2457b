"""`picker stock ...`: take, return, restock, count and reserve parts; the movement log."""

from __future__ import annotations

import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import Any, TypeVar

import click

from picker.cli.params import db_option, format_option, open_store
from picker.errors import BadValue

F = TypeVar("F", bound=Callable[..., Any])

_QTY = click.IntRange(min=1, max=1_000_000_000)


@contextmanager
def opened(db: str | None, *, check: bool = True) -> Iterator[Any]:
    """The stockroom for one command, its connections closed when the command ends."""
    from picker.store import Store

    store = open_store(db) if check else Store.open(db, check=False)
    try:
        yield store
    finally:
        store.dispose()


def who(by: str | None) -> str:
    """--by, or the name of the person logged in to this computer."""
    if by:
        return by
    import getpass

    try:
        return getpass.getuser()
    except (OSError, KeyError):  # no user name in the environment or password database
        raise BadValue("--by", "", "is needed: picker cannot tell who you are; give --by NAME") from None


def by_option(f: F) -> F:
    return click.option(
        "--by", metavar="NAME", help="who moves the parts (default: your login name)"
    )(f)


def note_option(f: F) -> F:
    return click.option("--note", metavar="TEXT", help="free text kept in the log")(f)


def remaining(mv: Any) -> str:
    """What is left after a movement: '5 left', or '3 left (5 on hand, 2 reserved)'."""
    if mv.reserved_after:
        return (f"{mv.available_after} left ({mv.qty_after} on hand, "
                f"{mv.reserved_after} reserved)")
    return f"{mv.available_after} left"


def warn_if_low(mv: Any) -> None:
    """One warning line on stderr when the part's available packages reached its reorder
    level (not an error: the movement was made)."""
    if mv.reorder_due:
        click.echo(f"picker: warning: {mv.part} is down to {mv.available_after} available, "
                   f"at or under its reorder level of {mv.reorder_level}; "
                   "`picker stock low` lists what to reorder", err=True)


def project_option(help_text: str) -> Callable[[F], F]:
    return click.option("--for", "project", required=True, metavar="PROJECT", help=help_text)


@click.group()
def stock() -> None:
    """Take, return, restock, count and reserve parts; the movement log and low stock.

    Every change of a quantity on hand or reserved is written together with its row in
    the movement log (when, who, part, change, project, reason), so the log always
    explains the stock. Available = on hand - reserved: what can be taken or reserved.
    """


@stock.command()
@click.argument("part")
@click.argument("qty", type=_QTY)
@click.option("--for", "project", required=True, metavar="PROJECT",
              help="the project or board the parts go to")
@by_option
@note_option
@db_option
def take(part: str, qty: int, project: str, by: str | None, note: str | None,
         db: str | None) -> None:
    """Take QTY packages of PART out of the stockroom for a project (only packages that
    no project has reserved; see `stock issue` for reserved ones)."""
    from picker.store import stock as ops

    with opened(db) as store:
        mv = ops.take(store, part, qty, project, who(by), note)
    click.echo(f"took {qty} of {mv.part} for {mv.project}; {remaining(mv)}")
    warn_if_low(mv)


@stock.command()
@click.argument("part")
@click.argument("qty", type=_QTY)
@project_option("the project the packages are set aside for")
@by_option
@note_option
@db_option
def reserve(part: str, qty: int, project: str, by: str | None, note: str | None,
            db: str | None) -> None:
    """Set QTY packages of PART aside for a project; they stay on hand but cannot be
    taken or reserved by anyone else."""
    from picker.store import reservations as ops

    with opened(db) as store:
        mv = ops.reserve(store, part, qty, project, who(by), note)
    click.echo(f"reserved {qty} of {mv.part} for {mv.project}; {remaining(mv)}")
    warn_if_low(mv)


@stock.command()
@click.argument("part")
@click.argument("qty", type=_QTY)
@project_option("the project whose reservation shrinks")
@by_option
@note_option
@db_option
def release(part: str, qty: int, project: str, by: str | None, note: str | None,
            db: str | None) -> None:
    """Give back QTY reserved packages of PART (no more than the project has reserved)."""
    from picker.store import reservations as ops

    with opened(db) as store:
        mv = ops.release(store, part, qty, project, who(by), note)
    click.echo(f"released {qty} of {mv.part} from {mv.project}; {remaining(mv)}")


@stock.command()
@click.argument("part")
@click.argument("qty", type=_QTY)
@project_option("the project whose reserved packages are handed out")
@by_option
@note_option
@db_option
def issue(part: str, qty: int, project: str, by: str | None, note: str | None,
          db: str | None) -> None:
    """Hand out QTY packages of PART that a project has reserved: they leave the
    stockroom (on hand and reserved both drop)."""
    from picker.store import reservations as ops

    with opened(db) as store:
        mv = ops.issue(store, part, qty, project, who(by), note)
    click.echo(f"issued {qty} of {mv.part} to {mv.project}; {remaining(mv)}")
    warn_if_low(mv)


@stock.command("return")
@click.argument("part")
@click.argument("qty", type=_QTY)
@click.option("--for", "project", required=True, metavar="PROJECT",
              help="the project the parts come back from")
@by_option
@note_option
@db_option
def return_(part: str, qty: int, project: str, by: str | None, note: str | None,
            db: str | None) -> None:
    """Put QTY packages of PART back (no more than the project has out)."""
    from picker.store import stock as ops

    with opened(db) as store:
        mv = ops.return_(store, part, qty, project, who(by), note)
    click.echo(f"returned {qty} of {mv.part} from {mv.project}; {remaining(mv)}")


@stock.command("add")
@click.argument("part")
@click.argument("qty", type=_QTY)
@by_option
@note_option
@db_option
def add(part: str, qty: int, by: str | None, note: str | None, db: str | None) -> None:
    """Restock: add QTY new packages of PART (a delivery)."""
    from picker.store import stock as ops

    with opened(db) as store:
        mv = ops.restock(store, part, qty, who(by), note)
    click.echo(f"added {qty} of {mv.part}; {remaining(mv)}")


@stock.command()
@click.argument("part")
@click.argument("qty", type=click.IntRange(min=0, max=1_000_000_000))
@by_option
@note_option
@db_option
def count(part: str, qty: int, by: str | None, note: str | None, db: str | None) -> None:
    """Set PART's quantity after a physical count; the log keeps the difference."""
    from picker.store import stock as ops

    with opened(db) as store:
        mv = ops.count(store, part, qty, who(by), note)
    click.echo(f"counted {mv.qty_after} of {mv.part} ({mv.delta:+d} against the books)")


@stock.command()
@click.argument("part", required=False)
@click.option("--since", metavar="DATE",
              help="only movements from this date or time on (2026-01-31, 2026-01-31T14:00 in "
              "local time; or back from now: 12h, 7d, 2w)")
@format_option
@db_option
def log(part: str | None, since: str | None, fmt: str, db: str | None) -> None:
    """The movement log, oldest first: every part, or only PART."""
    from picker.report.stock import log_csv, log_records, log_table
    from picker.report.tables import to_json
    from picker.store import stock as ops

    when = ops.parse_since(since) if since is not None else None
    with opened(db) as store:
        moves = ops.log(store, part, when)
    if fmt == "json":
        click.echo(to_json(log_records(moves)))
    elif fmt == "csv":
        log_csv(moves, sys.stdout)
    else:
        click.echo(log_table(moves))
        click.echo(f"{len(moves)} movement(s)", err=True)


@stock.command()
@click.argument("project", required=False)
@format_option
@db_option
def projects(project: str | None, fmt: str, db: str | None) -> None:
    """What each project (or only PROJECT) has out and reserved, part by part."""
    from picker.report.stock import projects_csv, projects_table
    from picker.report.tables import to_json
    from picker.store import reservations as ops

    with opened(db) as store:
        rows = ops.projects(store, project)
    if fmt == "json":
        click.echo(to_json([r.as_dict() for r in rows]))
    elif fmt == "csv":
        projects_csv(rows, sys.stdout)
    else:
        click.echo(projects_table(rows))
        click.echo(f"{len(rows)} part(s) out or reserved", err=True)


@stock.command()
@click.option("--below", type=click.IntRange(min=0, max=1_000_000_000), metavar="N",
              help="every part with fewer than N available, whatever its reorder level")
@format_option
@db_option
def low(below: int | None, fmt: str, db: str | None) -> None:
    """Parts whose available packages (on hand - reserved) are at or under their reorder
    level (set one with `parts edit P reorder_level=N`)."""
    from picker.report.stock import low_csv, low_table
    from picker.report.tables import to_json
    from picker.store import stock as ops

    with opened(db) as store:
        rows = ops.low(store, below)
    if fmt == "json":
        click.echo(to_json(rows))
    elif fmt == "csv":
        low_csv(rows, sys.stdout)
    else:
        click.echo(low_table(rows))
        click.echo(f"{len(rows)} part(s) to reorder", err=True)


def reserve_top(store: Any, sel: Any, project: str | None, yes: bool, quiet_stdout: bool) -> None:
    """`picker pick --reserve`: reserve what the library plans for the accepted parts.

    Asks for confirmation unless yes; with JSON output every word goes to stderr.
    """
    from picker.store import reservations as ops

    if not project:
        raise BadValue("--for", "", "is needed with --reserve: the project the parts go to")
    plan = ops.plan(store, [c.part for c in sel.accepted], sel.requirement.qty)
    if plan.skipped:
        click.echo(f"the {plan.skipped} better-ranked accepted part(s) have too few packages "
                   f"available; {plan.part} is the best one that has enough", err=True)
    if not yes:
        click.confirm(f"reserve {plan.packages} of {plan.part} for {project}?", abort=True,
                      err=True)
    mv = ops.reserve(store, plan.part, plan.packages, project, who(None),
                     note="reserved by picker pick")
    click.echo(f"reserved {plan.packages} of {plan.part} for {project}; {remaining(mv)}",
               err=quiet_stdout)
    warn_if_low(mv)
