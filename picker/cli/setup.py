"""`picker init`: create a stockroom."""

from __future__ import annotations

import click

from picker.cli.params import closed_at_exit, db_option
from picker.data import demo_stockroom


@click.command()
@click.option("--demo", is_flag=True, help="fill it with the invented demo stockroom")
@db_option
def init(demo: bool, db: str | None) -> None:
    """Create the stockroom (or bring an existing one to the current schema)."""
    from picker.store import Store

    store = closed_at_exit(Store.create(db))
    if demo:
        from picker.store.csvio import parse_csv

        demo_csv = demo_stockroom()
        records = parse_csv(demo_csv.read_text(encoding="utf-8"), demo_csv.name)
        existing = set(store.labels())
        fresh = [r for r in records if r["label"] not in existing]
        report = store.import_records(fresh, update=False)
        click.echo(f"stockroom ready at {store.where}; {report.added} demo part(s) added "
                   f"({len(records) - len(fresh)} already there)")
    else:
        click.echo(f"stockroom ready at {store.where} ({store.count()} part(s))")
