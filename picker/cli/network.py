"""`picker net`: the stage's resistor network from standard E-series values."""

from __future__ import annotations

from typing import Any

import click

from picker.cli.params import db_option, open_store
from picker.cli.reqopts import (
    build_requirement,
    requirement_options,
    save_option,
    save_requirement,
)


class SeriesParam(click.ParamType):
    """An IEC 60063 series name: E3, E6, E12, E24, E48, E96, E192 (or just 24)."""

    name = "series"

    def convert(self, value: Any, param: click.Parameter | None, ctx: click.Context | None) -> Any:
        from picker.design.series import parse_series
        from picker.errors import PickerError

        try:
            return parse_series(value, "--series")
        except PickerError as exc:
            self.fail(str(exc).removeprefix("--series: "), param, ctx)


@click.command()
@requirement_options
@click.option("--series", type=SeriesParam(), default="E24", show_default=True,
              help="IEC 60063 series of the resistors: E3 E6 E12 E24 E48 E96 E192")
@click.option("--check", is_flag=True,
              help="analyse the network given in full (--rf and --rg, or the design file's "
              "network) as built: gain, error, worst case, Monte Carlo, input impedance, power")
@click.option("--part", metavar="LABEL",
              help="take the limits (output current, bias and noise currents, Rin, A0, "
              "GBW) from this part and show its exact closed-loop gain")
@click.option("--json", "as_json", is_flag=True, help="JSON on stdout (SI base units)")
@save_option
@db_option
def net(stage: dict[str, Any], series: str, check: bool,
        part: str | None, as_json: bool, save: str | None, db: str | None) -> None:
    """Design the stage's resistor network from standard values.

    Searches every pair of the series' values in the 1 kΩ..1 MΩ window inside the
    limits (output load, bias-current offset, noise and input-resistance shares of
    their budgets, --zin, default max(10 kΩ, 10 x source)); gain error counts down to
    what the tolerance swamps, then the lowest impedance with common values wins. Shows
    the worst case and a Monte Carlo spread for the resistor tolerance, the input
    impedance and each resistor's power at the peak. --rf and --rg (--rin) are kept
    exactly; with both, or with --check, the network is analysed as built. Example:

    \b
        picker net --topology inverting --gain 4.7 --vin 1V --freq 20kHz --rails ±12
    """
    from picker import api
    from picker.design.network import exact_gain
    from picker.report.network import render
    from picker.report.tables import to_json

    req = build_requirement(stage)
    if req.is_filter or req.is_tia or req.topology == "level-shift":
        _own_net(req, series, part, as_json)
        save_requirement(stage, save, db)
        return
    row = open_store(db).get(part) if part else None
    network = api.design_network(req, row, series=series,  # type: ignore[arg-type]
                                 check=check)
    if as_json:
        click.echo(to_json(network.as_json()))
        for c in req.cautions:
            click.echo(c, err=True)
        save_requirement(stage, save, db)
        return
    exact = exact_gain(req, network.network, row) if row is not None else None
    click.echo(render(network, part=part, exact=exact, freq_hz=req.freq_hz,
                      cautions=req.cautions))
    save_requirement(stage, save, db)


def _own_net(req: Any, series: str, part: str | None, as_json: bool) -> None:
    """``picker net`` for a stage type that designs its own network: a filter
    (capacitors, resistors and their spread), a transimpedance stage (rf, cf and the GBW
    they ask) or a level-shift stage (the divider, its levels and its errors)."""
    from picker import api
    from picker.errors import BadValue
    from picker.report.filters import net_text
    from picker.report.levelshift import level_text
    from picker.report.tables import to_json

    if part is not None:
        raise BadValue("--part", part, "applies to the gain-pair stages; for this stage, "
                       "`picker why PART` checks the part in it")
    network = api.design_network(req, series=series)  # type: ignore[arg-type]
    if as_json:
        click.echo(to_json(network.as_json()))
        for c in req.cautions:
            click.echo(c, err=True)
        return
    if req.is_tia:
        click.echo(network.text(req.cautions))
    elif req.is_filter:
        click.echo(net_text(network, req.cautions))
    else:
        click.echo(level_text(network, req.cautions))
