"""`picker design new`: a commented TOML design file to fill in."""

from __future__ import annotations

from pathlib import Path

import click

from picker.cli.params import db_option


@click.group()
def design() -> None:
    """Design files: a stage's requirement kept in TOML (--design FILE reads one)."""


@design.command("new")
@click.argument("file", type=click.Path(dir_okay=False))
@click.option("--force", is_flag=True, help="replace FILE if it exists")
@db_option
def new(file: str, force: bool, db: str | None) -> None:
    """Write a commented design file listing every requirement key, its unit and default.

    An example stage is filled in; the other keys are commented out at their defaults.
    An existing FILE is kept unless --force; the stockroom's own files never. Example:

        picker design new stage.toml && picker spec --design stage.toml
    """
    from picker.design.designfile import template, write_design
    from picker.store.engine import resolve_url
    from picker.store.outfile import database_files

    write_design(Path(file), template(), database_files(resolve_url(db)), overwrite=force)
    click.echo(f"design: {file}")
