"""`picker envelope`: the largest output amplitude each part supports, by frequency."""

from __future__ import annotations

from typing import Any

import click

from picker.cli.params import db_option, open_store
from picker.cli.reqopts import build_requirement, requirement_options


def _span(text: str | None) -> tuple[float | None, float | None]:
    """``10Hz..1MHz`` -> (10, 1e6); None -> the default span."""
    from picker.errors import BadValue
    from picker.quantities import parse

    if text is None:
        return None, None
    lo, sep, hi = text.partition("..")
    if not sep:
        raise BadValue("--span", text, "is not a range low..high, e.g. 10Hz..1MHz")
    hi_unit = "".join(ch for ch in hi if ch.isalpha())
    lo = lo if any(ch.isalpha() for ch in lo) else lo + hi_unit
    return (parse(lo, "frequency", "--span", allow_zero=False),
            parse(hi, "frequency", "--span", allow_zero=False))


@click.command()
@click.argument("parts", nargs=-1, metavar="[PART]...")
@requirement_options
@click.option("--top", type=click.IntRange(min=1, max=9), default=4, show_default=True,
              help="without PART: the first N candidates in pick's order")
@click.option("--span", metavar="LOW..HIGH",
              help="frequency span, e.g. 10Hz..1MHz (default: 1/1000 to 100 x --freq)")
@click.option("--png", "png", metavar="FILE", type=click.Path(dir_okay=False),
              help="write the log-log chart to this PNG file")
@click.option("--size", metavar="WxH", help="PNG size in pixels (default 1100x800)")
@click.option("--json", "as_json", is_flag=True, help="JSON on stdout (V peak, Hz)")
@db_option
def envelope(parts: tuple[str, ...], stage: dict[str, Any], top: int, span: str | None,
             png: str | None, size: str | None, as_json: bool, db: str | None) -> None:
    """The operating envelope: for each part, the largest output amplitude it supports
    in the stage at each frequency, and the check that sets it (swing under load, slew
    rate, output current, input common mode; a gain-accuracy or other
    amplitude-independent failure ends it). The parts' own limits (margin 1), with the
    requirement marked. Example:

        picker envelope bip-gp-a jfet-gp-a --topology inverting --gain 10 --vout 5V --freq 20kHz --rails ±12 --load 2k --tolerance 0.1% --png env.png
    """
    from picker import api
    from picker.report.envelope import envelope_text
    from picker.report.tables import to_json

    low, high = _span(span)
    req = build_requirement(stage)
    env = api.envelope(req, open_store(db), parts, top=top, low_hz=low, high_hz=high)
    click.echo(to_json(env.to_json()) if as_json else envelope_text(env))
    if png:
        from picker.cli.wave import _db_files, _size
        from picker.report.envelope import ENVELOPE_SIZE, envelope_figure
        from picker.report.plots import save_png

        save_png(envelope_figure(env, _size(size, ENVELOPE_SIZE)), png, _db_files(db))
        if not as_json:
            click.echo(f"plot: {png}")
    for c in req.cautions:
        click.echo(c, err=as_json)
