"""`picker wave` and `picker bode`: predicted output waveform and closed-loop response."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import click

from picker.cli.params import db_option, open_store
from picker.cli.reqopts import build_requirement, requirement_options


def _emit(summary: dict[str, Any], text: Callable[[], str], png: str | None, as_json: bool,
          cautions: list[str]) -> None:
    """One result as JSON or text (with the plot's path), then the cautions."""
    from picker.report.tables import to_json

    if as_json:
        click.echo(to_json(summary))
    else:
        click.echo(text())
        if png:
            click.echo(f"plot: {png}")
    _cautions(cautions, as_json)


def _cautions(cautions: list[str], as_json: bool) -> None:
    for c in cautions:
        click.echo(c, err=as_json)


def _size(text: str | None, default: tuple[int, int]) -> tuple[int, int]:
    from picker.report.plots import parse_size

    return default if text is None else parse_size(text)


@click.command()
@click.argument("part", required=False)
@requirement_options
@click.option("--top", type=click.IntRange(min=1, max=20),
              help="instead of PART: the best N candidates of `picker pick`, side by side")
@click.option("--png", "png", metavar="FILE", type=click.Path(dir_okay=False),
              help="write the plot to this PNG file")
@click.option("--size", metavar="WxH", help="PNG size in pixels (default 1000x600; "
              "with --top 1200x900)")
@click.option("--step", "step", is_flag=True,
              help="filter stages: the response to a step of --vin; transimpedance: to a step of "
              "the sensor current over --iin (instead of the sine)")
@click.option("--json", "as_json", is_flag=True, help="JSON on stdout (SI units, THD as ratio)")
@db_option
def wave(part: str | None, stage: dict[str, Any], top: int | None, png: str | None,
         size: str | None, step: bool, as_json: bool, db: str | None) -> None:
    """Predict a part's output waveform in the stage.

    A sine at the top frequency (--freq) drives the stage; the output is simulated with
    the part's single-pole gain, input and output resistance, slew rate, output swing
    (rails minus headroom) and current limit, until it settles. Prints the peaks,
    peak-to-peak, THD and the active limits (clip, slew, current, bandwidth). Examples:

        picker wave bip-gp-a --topology inverting --gain 10 --vout 10V --freq 20kHz --rails ±15

        picker wave --top 4 --topology inverting --gain 10 --vout 10V --freq 20kHz --rails ±15 --png top.png
    """
    from picker import api
    from picker.report.plots import GRID_SIZE, WAVE_SIZE

    if (part is None) == (top is None):
        raise click.UsageError("give either a PART or --top N (the best N candidates)")

    req = api.built(build_requirement(stage))  # built once: every step below reuses it
    pixels = _size(size, WAVE_SIZE if top is None else GRID_SIZE)
    if req.is_filter and top is not None:
        raise click.UsageError("--top: give a PART for a filter stage (its prediction is "
                               "made one part at a time)")
    if step:
        assert part is not None
        _step(req, part, png, pixels, as_json, db)
        return
    if top is not None:
        _top(req, top, png, pixels, as_json, db)
        return
    assert part is not None
    from picker.report.waves import wave_text

    waves = api.waveform(req, open_store(db), part)
    if png:
        from picker.report.plots import save_png, wave_figure

        save_png(wave_figure(waves, 0, pixels), png, _db_files(db))
    _emit(waves.summary(0), lambda: wave_text(waves, 0, req), png, as_json, req.cautions)


def _step(req: Any, part: str, png: str | None, pixels: tuple[int, int], as_json: bool,
          db: str | None) -> None:
    from picker import api
    from picker.report.filters import step_text

    res = api.step(req, open_store(db), part)
    if png:
        from picker.report.plots import save_png, wave_figure

        save_png(wave_figure(res.waves, 0, pixels), png, _db_files(db))
    _emit(res.summary(), lambda: step_text(res, req), png, as_json, req.cautions)


def _top(req: Any, n: int, png: str | None, pixels: tuple[int, int], as_json: bool,
         db: str | None) -> None:
    from picker import api
    from picker.report.tables import to_json
    from picker.report.waves import candidates_json, candidates_text

    cands = api.candidates(req, open_store(db), n)
    if png:
        from picker.report.plots import grid_figure, save_png

        shown = [k for k in range(len(cands.status)) if cands.waves.known[k]]
        names = [f"{k + 1}. {cands.waves.labels[k]} ({cands.status[k]})" for k in shown]
        save_png(grid_figure(cands.waves, shown, pixels, names=names), png, _db_files(db))
    if as_json:
        click.echo(to_json(candidates_json(cands)))
    else:
        click.echo(candidates_text(cands, req))
        if png:
            click.echo(f"plot: {png}")
    _cautions(req.cautions, as_json)


@click.command()
@click.argument("part")
@requirement_options
@click.option("--png", "png", metavar="FILE", type=click.Path(dir_okay=False),
              help="write the Bode plot to this PNG file")
@click.option("--size", metavar="WxH", help="PNG size in pixels (default 1000x750)")
@click.option("--json", "as_json", is_flag=True, help="JSON on stdout (Hz, dB, degrees)")
@db_option
def bode(part: str, stage: dict[str, Any], png: str | None, size: str | None, as_json: bool,
         db: str | None) -> None:
    """Closed-loop gain and phase of a part in the stage, over frequency.

    The exact small-signal response (two-pole open-loop gain from the part's follower
    phase margin, input and output resistance, input capacitances, source, load, load
    capacitance and network): the -3 dB frequency, the gain and phase at the top
    frequency (--freq), and the loop's phase margin, crossover and peaking. Example:

        picker bode bip-gp-a --topology non-inverting --gain 20 --vin 0.25V --freq 20kHz --rails ±12 --png bode.png
    """
    from picker import api
    from picker.report.plots import BODE_SIZE
    from picker.report.waves import bode_text

    req = api.built(build_requirement(stage))
    pixels = _size(size, BODE_SIZE)
    resp = api.response(req, open_store(db), part)
    plain = resp.response if req.is_filter else resp  # a filter's: its Response inside
    if png:
        from picker.report.plots import bode_figure, save_png

        save_png(bode_figure(plain, 0, pixels), png, _db_files(db))
    if req.is_filter:
        from picker.report.filters import bode_text as filter_bode_text

        _emit(resp.summary(0), lambda: filter_bode_text(resp, 0, req), png, as_json,
              req.cautions)
        return
    _emit(resp.summary(0), lambda: bode_text(resp, 0, req), png, as_json, req.cautions)


def _db_files(db: str | None) -> list[Any]:
    """The stockroom's files, which a plot must never replace."""
    from picker.store.engine import resolve_url
    from picker.store.outfile import database_files

    return database_files(resolve_url(db))
