"""`picker note`: a one-page design note (HTML, or Markdown with PNGs beside it)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import click

from picker.cli.params import db_option, open_store
from picker.cli.reqopts import build_requirement, requirement_options


@click.command()
@requirement_options
@click.option("--part", metavar="LABEL", help="the part to write up (default: the best)")
@click.option("--out", "out", required=True, metavar="NOTE.html|NOTE.md",
              type=click.Path(dir_okay=False, path_type=Path),
              help="the note to write: .html (one self-contained page) or .md (PNG files "
                   "beside it)")
@click.option("--title", help="the note's title (default: the stage in a few words)")
@db_option
def note(stage: dict[str, Any], part: str | None, out: Path, title: str | None,
         db: str | None) -> None:
    """Write a design note for a stage: requirement, minimum specifications with formulas,
    the chosen part and its margins, the other candidates and why each fails, the
    resistor network with its tolerance, the predicted waveform, frequency response and
    operating envelope, cautions, stock on hand, the date and the database it read (no
    password). Example:

        picker note --topology inverting --gain 10 --vout 5V --freq 20kHz --rails ±12 --load 2k --tolerance 0.1% --out amp.html
    """
    from picker import api
    from picker.errors import BadValue
    from picker.report.note import note_html, note_markdown
    from picker.store.engine import display_url, resolve_url
    from picker.store.outfile import database_files, replacing

    suffix = out.suffix.lower()
    if suffix not in (".html", ".htm", ".md"):
        raise BadValue("--out", str(out), "must end in .html or .md (the note's format)")
    url = resolve_url(db)
    protected = database_files(url)
    n = api.note(build_requirement(stage), open_store(db), part, database=display_url(url),
                 title=title)
    if suffix == ".md":
        text, files = note_markdown(n, lambda sid: f"{out.stem}.{sid}.png")
        for name, data in files.items():
            with replacing(out.with_name(name), protected, "--out") as tmp:
                tmp.write_bytes(data)
    else:
        text, files = note_html(n), {}
    with replacing(out, protected, "--out") as tmp:
        tmp.write_text(text, encoding="utf-8")
    click.echo(f"note: {out}" + (f" (with {len(files)} PNG files beside it)" if files else ""))
    for c in n.cautions:
        click.echo(c, err=True)
