"""`picker sweep`: vary one value of the stage and see where each part passes."""

from __future__ import annotations

import re
from typing import Any

import click

from picker.cli.params import db_option, open_store
from picker.cli.reqopts import build_requirement, requirement_options


def _vary(text: str) -> tuple[str, float, float]:
    """``freq=1k..1meg`` -> ("freq", 1e3, 1e6), values read in the key's own unit."""
    from picker.design.sweep import VARIABLES
    from picker.errors import BadValue
    from picker.quantities import parse, parse_amplitude

    key, eq, rng = text.partition("=")
    key = key.strip().lower().replace("_", "-")
    key = {"frequency": "freq", "amplitude": "vout", "temperature": "temp"}.get(key, key)
    if not eq or key not in VARIABLES:
        raise BadValue("--vary", text, "is not KEY=LOW..HIGH with KEY one of "
                       + ", ".join(VARIABLES) + "; e.g. --vary freq=1k..1meg")
    lo, sep, hi = rng.partition("..")
    if not sep or not lo.strip() or not hi.strip():
        raise BadValue("--vary", text, "needs a range LOW..HIGH, e.g. --vary freq=1k..1meg")
    kind = VARIABLES[key].kind
    if kind == "amplitude" and not any(ch.isalpha() for ch in lo):
        # a bare low end takes the high end's form: 0.1..10Vpp is 0.1 Vpp .. 10 Vpp
        form = re.search(r"V(?:p-p|pp|rms|pk|p)?$", hi.strip(), re.IGNORECASE)
        lo = lo + (form.group(0) if form else "")
    name = f"--vary {key}"
    if kind == "amplitude":
        return key, parse_amplitude(lo, name), parse_amplitude(hi, name)
    return key, parse(lo, kind, name), parse(hi, kind, name)


@click.command()
@requirement_options
@click.option("--vary", "vary", required=True, metavar="KEY=LOW..HIGH",
              help="the value to vary: freq, vout, gain, load, source, temp or cload, "
                   "e.g. freq=1k..1meg")
@click.option("--points", type=click.IntRange(min=2, max=1000), default=50, show_default=True,
              help="how many values")
@click.option("--log/--linear", "log", default=None,
              help="spacing of the values (default: log, linear for temp)")
@click.option("--top", type=click.IntRange(min=1), help="list only the first N ranges")
@click.option("--png", "png", metavar="FILE", type=click.Path(dir_okay=False),
              help="write the chart (one strip per part) to this PNG file")
@click.option("--size", metavar="WxH", help="PNG size in pixels (default 1100x700)")
@click.option("--json", "as_json", is_flag=True, help="JSON on stdout (SI units)")
@db_option
def sweep(stage: dict[str, Any], vary: str, points: int, log: bool | None, top: int | None,
          png: str | None, size: str | None, as_json: bool, db: str | None) -> None:
    """What if: vary one value of the stage and show, for every part, the range where it
    passes and the check that stops it at each edge. The network is designed once for
    the stage as given and kept (a varied gain gets its own network). Example:

        picker sweep --topology inverting --gain 10 --vout 5V --freq 20kHz --rails ±12 --load 2k --tolerance 0.1% --vary freq=100..1meg
    """
    from picker import api
    from picker.report.sweep import sweep_text
    from picker.report.tables import to_json

    key, low, high = _vary(vary)
    req = build_requirement(stage)
    sw = api.sweep(req, open_store(db), key, low, high, points=points, log=log)
    click.echo(to_json(sw.to_json()) if as_json else sweep_text(sw, top))
    if png:
        from picker.cli.wave import _db_files, _size
        from picker.report.plots import save_png
        from picker.report.sweep import SWEEP_SIZE, sweep_figure

        save_png(sweep_figure(sw, _size(size, SWEEP_SIZE)), png, _db_files(db))
        if not as_json:
            click.echo(f"plot: {png}")
    for c in req.cautions:
        click.echo(c, err=as_json)
