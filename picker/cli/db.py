"""`picker db ...`: schema upgrades, backup and restore."""

from __future__ import annotations

from pathlib import Path

import click

from picker.cli.params import db_option
from picker.cli.stock import opened
from picker.errors import StoreError


@click.group()
def db() -> None:
    """Schema upgrades, backup and restore of the stockroom."""


@db.command()
@db_option
def upgrade(db: str | None) -> None:
    """Bring the stockroom's schema up to this version of picker (keeps every row)."""
    from picker.store.migrate import HEAD, REVISIONS, revision

    with opened(db, check=False) as store:
        before = revision(store.engine, store.where)
        if before is not None and before not in REVISIONS:
            raise StoreError(f"{store.where} has schema {before}, made by a newer picker than "
                             f"this one ({HEAD}); upgrade picker instead")
        store.upgrade()
        click.echo(f"{store.where}: schema {before or 'empty'} -> {HEAD}")


@db.command()
@click.argument("file", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--portable", is_flag=True,
              help="write picker's JSON-lines backup (any SQLite or PostgreSQL stockroom "
              "can restore it); always used for PostgreSQL")
@db_option
def backup(file: Path, portable: bool, db: str | None) -> None:
    """Back the whole stockroom up to FILE, safely while others keep working.

    A SQLite stockroom is copied with SQLite's online backup API into a SQLite file;
    a PostgreSQL stockroom is exported to a portable JSON-lines file (see the README
    for the server's own pg_dump).
    """
    from picker.store.backup import backup as run_backup

    _must_exist(db)
    with opened(db, check=False) as store:
        report = run_backup(store, file, portable=portable)
        rows = ", ".join(f"{n} {t}" for t, n in sorted(report.rows.items()))
        click.echo(f"backed up {store.where} (schema {report.schema}; {rows}) to "
                   f"{report.path} "
                   f"({'portable JSON lines' if report.kind == 'portable' else 'SQLite file'})")


@db.command()
@click.argument("file", type=click.Path(exists=True, dir_okay=False, path_type=Path))
@db_option
def restore(file: Path, db: str | None) -> None:
    """Restore a backup FILE into a new, empty stockroom: every row or nothing.

    The target must be empty (a new file or database) or freshly created with no
    parts; a backup from an older picker is brought up to this schema on the way.
    """
    from picker.store.restore import restore as run_restore

    with opened(db, check=False) as store:
        report = run_restore(store, file)
        rows = ", ".join(f"{n} {t}" for t, n in sorted(report.rows.items()))
        click.echo(f"restored {rows} from {file} into {store.where} "
                   f"(schema {report.schema_from} -> {report.schema_to})")


def _must_exist(db: str | None) -> None:
    """A backup needs a stockroom: do not create an empty SQLite file for a mistyped path."""
    from picker.store.backup import sqlite_path
    from picker.store.engine import is_sqlite, resolve_url

    url = resolve_url(db)
    path = sqlite_path(url) if is_sqlite(url) else None
    if path is not None and not path.exists():
        raise StoreError(f"no stockroom at {path}; nothing to back up")
