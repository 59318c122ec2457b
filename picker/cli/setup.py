"""`picker init`: create a stockroom."""

from __future__ import annotations

from pathlib import Path

import click

from picker.cli.params import db_option


def demo_file() -> Path:
    """The invented demo stockroom shipped in data/ (source tree) or with the package."""
    here = Path(__file__).resolve().parents[2] / "data" / "demo_stockroom.csv"
    if here.exists():
        return here
    return Path(__file__).resolve().parents[1] / "demo" / "demo_stockroom.csv"


@click.command()
@click.option("--demo", is_flag=True, help="fill it with the invented demo stockroom")
@db_option
def init(demo: bool, db: str | None) -> None:
    """Create the stockroom (or bring an existing one to the current schema)."""
    from picker.store import Store

    store = Store.create(db)
    if demo:
        from picker.store.csvio import parse_csv, read_text

        path = demo_file()
        records = parse_csv(read_text(path), path.name)
        existing = set(store.labels())
        fresh = [r for r in records if r["label"] not in existing]
        report = store.import_records(fresh, update=False)
        click.echo(f"stockroom ready at {store.where}; {report.added} demo part(s) added "
                   f"({len(records) - len(fresh)} already there)")
    else:
        click.echo(f"stockroom ready at {store.where} ({store.count()} part(s))")
