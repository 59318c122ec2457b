"""`picker spec`, `picker pick`, `picker why`: a stage against the parts in stock."""

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


def _cautions_to_stderr(cautions: list[str]) -> None:
    # with --json, stdout stays machine-readable; the caution still reaches the person
    for c in cautions:
        click.echo(c, err=True)


@click.command()
@requirement_options
@click.option("--explain", is_flag=True, help="each minimum with its formula and numbers")
@click.option("--json", "as_json", is_flag=True, help="JSON on stdout (SI base units)")
@save_option
@db_option
def spec(stage: dict[str, Any], explain: bool, as_json: bool, save: str | None,
         db: str | None) -> None:
    """The minimum op-amp specifications a stage needs.

    Noise and signal gain, slew rate, gain-bandwidth product, open-loop gain, input
    resistance, output swing, output current, common-mode range and supply span,
    including the design margin. Example:

        picker spec --topology inverting --gain 10 --vin 0.5Vpk --freq 20kHz --rails ±12
    """
    from picker import api
    from picker.report.checks import spec_text
    from picker.report.tables import to_json

    s = api.spec(build_requirement(stage))
    if as_json:
        click.echo(to_json(s.to_json()))
        _cautions_to_stderr(s.cautions)
    else:
        click.echo(spec_text(s, explain))
    save_requirement(stage, save, db)


@click.command()
@requirement_options
@click.option("--by", type=click.Choice(["margin", "price", "stock"]), default="margin",
              show_default=True, help="order of the accepted parts")
@click.option("--top", type=click.IntRange(min=1, max=1_000_000_000), help="show only the best N accepted parts")
@click.option("--strict", is_flag=True, help="reject parts with unknown parameters")
@click.option("--misses", type=click.IntRange(min=0, max=50), metavar="N",
              help="how far the stage would have to move for each of the N closest rejected "
                   "parts to pass (default: 3 when nothing passes, else none)")
@click.option("--list", "listed", metavar="N|all",
              help="how many accepted (best first), rejected and unverified parts (closest "
              "first) to write out (default 20; with --json all, unless given)")
@click.option("--network-per-part", "per_part", is_flag=True,
              help="design the resistor network for each part (its output, bias and noise "
              "currents set the limits) and check each part with its own; default: one "
              "shared network")
@click.option("--json", "as_json", is_flag=True, help="JSON on stdout (SI base units)")
@click.option("--reserve", is_flag=True,
              help="take the top accepted part for --for PROJECT (asks first)")
@click.option("--for", "project", metavar="PROJECT", help="the project --reserve takes parts for")
@click.option("--yes", is_flag=True, help="with --reserve: do not ask for confirmation")
@save_option
@db_option
def pick(stage: dict[str, Any], by: str, top: int | None, strict: bool, misses: int | None,
         listed: str | None, per_part: bool, as_json: bool, reserve: bool, project: str | None, yes: bool,
         save: str | None, db: str | None) -> None:
    """Check every part in stock against a stage; best first, rejections explained.

    A part is accepted when every check passes, rejected when one fails, unverified
    when a parameter it needs is unknown. When nothing passes, the nearest misses say
    how far the stage would have to move for each. Example:

        picker pick --topology non-inverting --gain 20 --vin 0.25V --freq 20kHz --rails ±12
    """
    from picker import api
    from picker.report.checks import pick_text
    from picker.report.tables import to_json_rows

    if reserve and not project:
        raise click.UsageError("--reserve needs --for PROJECT, the project the parts go to")
    cap = _listed(listed) if listed is not None else (None if as_json else max(20, top or 0))
    req = build_requirement(stage)
    store = open_store(db)
    sel = api.pick(req, store, by=by, top=top, strict=strict,  # type: ignore[arg-type]
                   misses=misses, network_per_part=per_part)
    if as_json:
        import sys

        stdout = sys.stdout  # click.get_text_stream is deprecated from click 8.5
        to_json_rows(sel.json_items(cap), write=stdout.write)  # one part per line, streamed
        stdout.write("\n")
        _cautions_to_stderr(sel.cautions)
    else:
        click.echo(pick_text(sel, cap))
    save_requirement(stage, save, db)
    if reserve:
        from picker.cli.stock import reserve_top

        reserve_top(store, sel, project, yes, quiet_stdout=as_json)


def _listed(text: str) -> int | None:
    """--list N|all: None means all."""
    from picker.errors import BadValue

    if text.strip().lower() == "all":
        return None
    if text.strip().isdigit() and len(text.strip()) < 10:
        return int(text)
    raise BadValue("--list", text, "is not a count; give a whole number or 'all'")


@click.command()
@click.argument("parts", nargs=-1, required=True, metavar="PART [PART [PART]]")
@requirement_options
@click.option("--json", "as_json", is_flag=True,
              help='JSON on stdout: {"part", "spec", "verdict", "checks": {NAME: {"status", '
              '"need", "has", "margin"}}} (SI base units); a list of them for two or three '
              "parts")
@db_option
def why(parts: tuple[str, ...], stage: dict[str, Any], as_json: bool, db: str | None) -> None:
    """The full check sheet of one PART for a stage: each check with formula and numbers.

    With two or three parts, their sheets side by side: each check's need, then each
    part's value, margin and status, its limiting check marked. Example:

        picker why bip-gp-a jfet-gp-a --topology inverting --gain 10 --vin 0.5V --freq 20kHz --rails ±12
    """
    from picker import api
    from picker.report.tables import to_json

    req = build_requirement(stage)
    if len(parts) > 1:
        from picker.report.checks import side_by_side_text

        side = api.why_side_by_side(req, parts, open_store(db))
        if as_json:
            click.echo(to_json(side.to_json()))
            _cautions_to_stderr(side.spec.cautions)
        else:
            click.echo(side_by_side_text(side.reports))
        return
    from picker.report.checks import why_text

    report = api.why(req, parts[0], open_store(db))
    if as_json:
        click.echo(to_json(report.to_json()))
        _cautions_to_stderr(report.spec.cautions)
        return
    click.echo(why_text(report.spec, report.table, report.parts, 0, report.assumed))
