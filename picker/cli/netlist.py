"""`picker netlist`: the stage with one part as a plain SPICE deck for ngspice."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import click

from picker.cli.params import db_option, open_store
from picker.cli.reqopts import build_requirement, requirement_options


@click.command()
@click.argument("part")
@requirement_options
@click.option("--out", "out", metavar="FILE.cir", type=click.Path(dir_okay=False),
              help="write the deck to this file (default: stdout)")
@db_option
def netlist(part: str, stage: dict[str, Any], out: str | None, db: str | None) -> None:
    """The stage with PART as a SPICE deck: network, source, load, macromodel, analyses.

    The designed network (as picker net), the source and its resistance, the load, and
    the part's linear macromodel (single pole from GBW and A0, Rin, Ro) with its output
    reach per rail (a behavioural source), plus .op, .tf, .ac and .tran. A value the
    macromodel needs that the part leaves blank is refused (--assume FIELD=VALUE
    supplies one). Run it with `ngspice -b FILE.cir`. Example:

    \b
        picker netlist bip-gp-a --topology inverting --gain 10 --vin 0.5V --freq 20kHz --rails ±12 --load 2k --out stage.cir
    """
    from picker import api

    store = open_store(db)
    text = api.netlist(build_requirement(stage), store, part)
    if out is None:
        click.echo(text, nl=False)
        return
    from picker.store.engine import resolve_url
    from picker.store.outfile import database_files, replacing

    with replacing(Path(out), database_files(resolve_url(db)), "--out") as tmp:
        tmp.write_text(text, encoding="utf-8")
    click.echo(f"deck: {out}", err=True)
