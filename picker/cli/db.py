"""`picker db ...`: schema upgrades (and, later, backup and restore)."""

from __future__ import annotations

import click

from picker.cli.params import db_option


@click.group()
def db() -> None:
    """Schema upgrades, backup and restore of the stockroom."""


@db.command()
@db_option
def upgrade(db: str | None) -> None:
    """Bring the stockroom's schema up to this version of picker (keeps every row)."""
    from picker.store import Store
    from picker.store.migrate import HEAD, current

    store = Store.open(db, check=False)
    before = current(store.engine)
    store.upgrade()
    click.echo(f"{store.where}: schema {before or 'empty'} -> {HEAD}")
