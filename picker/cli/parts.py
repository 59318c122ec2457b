"""`picker parts ...`: the op-amp parameter sets in the stockroom."""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Any

import click

from picker.cli.params import db_option, format_option, open_store
from picker.errors import BadValue, Conflict


def _assignments(pairs: tuple[str, ...], where: str) -> dict[str, str]:
    from picker.store.records import field_name

    out: dict[str, str] = {}
    for pair in pairs:
        if "=" not in pair:
            raise BadValue(where, pair, "is not FIELD=VALUE; e.g. gbw=1MHz slew=0.5V/us qty=10")
        key, value = pair.split("=", 1)
        out[field_name(key, where)] = value
    return out


def _whole(value: Any) -> Any:
    """A whole number read as a float (45.0) as the integer it is (exactly representable
    ones, below 2**53); anything else, unknown (NaN) included, as it is."""
    if isinstance(value, float) and value.is_integer() and abs(value) < 2**53:
        return int(value)
    return value


def _who() -> str:
    """Who the movement log names for a quantity set by edit or import --update."""
    from picker.cli.stock import who

    return who(None)


@click.group()
def parts() -> None:
    """List, show, add, edit, remove, import and export op-amp parameter sets."""


@parts.command("list")
@click.option("--where", "wheres", multiple=True, metavar="COND",
              help="filter FIELD OP VALUE, OP one of >= <= > < = != ~ (text contains); "
              "repeat to combine, e.g. --where 'slew>=1V/us' --where 'tech~cmos'")
@click.option("--in-stock", is_flag=True, help="only parts with at least one package on hand")
@click.option("--columns", metavar="F1,F2", help="fields to show (default: a useful set)")
@format_option
@db_option
def list_(wheres: tuple[str, ...], in_stock: bool, columns: str | None, fmt: str,
          db: str | None) -> None:
    """List the parts, optionally filtered. Unknown values never match a filter."""
    from picker.report.tables import LIST_COLUMNS, table, to_json
    from picker.store.records import field_name

    cols = (
        [field_name(c, "--columns") for c in columns.split(",") if c.strip()]
        if columns else list(LIST_COLUMNS)
    )
    if "label" not in cols:
        cols.insert(0, "label")
    store = open_store(db)
    frame = store.parts_frame(None if fmt == "json" else cols, list(wheres),
                              min_qty=1 if in_stock else None)
    rows = frame.reset_index().to_dict("records")
    if fmt == "json":
        from picker.fields import FIELDS

        names = [f.name for f in FIELDS]
        click.echo(to_json([{k: _whole(r.get(k)) for k in names} for r in rows]))
    elif fmt == "csv":
        from picker.store.csvio import write_csv

        write_csv(rows, sys.stdout, cols)  # only the columns shown: no blank columns
    else:
        click.echo(table(rows, cols))
        click.echo(f"{len(rows)} part(s)", err=True)


@parts.command()
@click.argument("label")
@click.option("--json", "as_json", is_flag=True, help="JSON in SI units")
@db_option
def show(label: str, as_json: bool, db: str | None) -> None:
    """Show every field of one part in engineering units, with what is reserved and
    available beside the packages on hand."""
    from picker.report.tables import card, to_json

    store = open_store(db)
    row = with_stock(store.get(label), store.reserved(label))
    click.echo(to_json(row) if as_json else card(row))


def with_stock(row: dict[str, Any], reserved: int) -> dict[str, Any]:
    """``row`` with ``reserved`` and the derived ``available`` right after ``qty``."""
    out: dict[str, Any] = {}
    for k, v in row.items():
        out[k] = v
        if k == "qty":
            out["reserved"] = reserved
            out["available"] = None if v is None else int(v) - reserved
    return out


@parts.command()
@db_option
def fields(db: str | None) -> None:
    """The part fields: name, other names import and --where accept, unit and meaning.

    The fields are the same in every stockroom of this picker, so --db is accepted (a
    script may pass it to every command) but not opened.
    """
    from tabulate import tabulate

    from picker.fields import FIELDS
    from picker.store.records import ALIASES

    others: dict[str, list[str]] = {}
    for alias, name in ALIASES.items():
        if alias != name:
            others.setdefault(name, []).append(alias)
    click.echo(tabulate(
        [[f.name, ", ".join(others.get(f.name, [])), _unit(f.header), f.help] for f in FIELDS],
        headers=["field", "also", "unit in tables", "meaning"], disable_numparse=True,
    ))


def _unit(header: str) -> str:
    """'SR [V/µs]' -> 'V/µs' (a CSV cell is in the SI unit of the field name, though)."""
    return header.partition("[")[2].rstrip("]")


@parts.command()
@click.argument("label")
@click.argument("values", nargs=-1, metavar="[FIELD=VALUE]...")
@db_option
def add(label: str, values: tuple[str, ...], db: str | None) -> None:
    """Add a part: picker parts add LABEL gbw=1MHz slew=0.5V/us aol=100dB qty=10."""
    from picker.store.records import record

    raw = _assignments(values, "add")
    raw["label"] = label
    store = open_store(db)
    store.add(record(raw))
    click.echo(f"added {label}")


@parts.command()
@click.argument("label")
@click.argument("values", nargs=-1, required=True, metavar="FIELD=VALUE...")
@db_option
def edit(label: str, values: tuple[str, ...], db: str | None) -> None:
    """Change fields of a part; FIELD= (empty) makes a value unknown."""
    from picker.store.records import check_consistency, record

    store = open_store(db)
    before = store.get(label)
    changes = record(_assignments(values, "edit"))
    check_consistency({**before, **changes})
    by = _who() if "qty" in changes else ""
    store.edit(label, changes, by=by)
    click.echo(f"changed {label}: {', '.join(changes)}")


@parts.command()
@click.argument("label")
@click.option("--yes", is_flag=True, help="do not ask for confirmation")
@db_option
def remove(label: str, yes: bool, db: str | None) -> None:
    """Remove a part from the stockroom."""
    store = open_store(db)
    store.get(label)
    if not yes:
        click.confirm(f"remove {label} from the stockroom?", abort=True)
    store.remove(label)
    click.echo(f"removed {label}")


@parts.command("import")
@click.argument("file", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--update", is_flag=True,
              help="change parts whose label already exists: only the columns in the file, "
              "and a blank cell leaves its field as it is")
@click.option("--blank-clears", is_flag=True,
              help="with --update, a blank cell makes its field unknown (a blank qty: 0)")
@click.option("--dry-run", is_flag=True,
              help="check every row and print what would change, field by field; write nothing")
@db_option
def import_(file: Path, update: bool, blank_clears: bool, dry_run: bool,
            db: str | None) -> None:
    """Import parts from a CSV file: all rows or none.

    Every cell is checked first; any bad cell is reported as `row N, column X: problem`
    and nothing is written.
    """
    from picker.report.tables import change_lines
    from picker.store.csvio import parse_csv, read_text

    if blank_clears and not update:
        raise Conflict("--blank-clears only applies with --update; add --update or leave it out")
    records = parse_csv(read_text(file), str(file), blank_clears=blank_clears)
    store = open_store(db)
    if len(records) > 5_000 and sys.stderr.isatty() and not dry_run:
        with click.progressbar(length=len(records), label="importing", file=sys.stderr) as bar:
            report = store.import_records(records, update=update, dry_run=dry_run,
                                          progress=bar.update, by=_who() if update else "")
    else:
        report = store.import_records(records, update=update, dry_run=dry_run,
                                      by=_who() if update else "")
    if dry_run:
        for line in change_lines(report.changes):
            click.echo(line)
    verb = "would add" if dry_run else "added"
    click.echo(f"{verb} {report.added} and {'would update' if dry_run else 'updated'} "
               f"{report.updated} part(s) from {file} "
               f"({len(report.changes)} field(s) {'would change' if dry_run else 'changed'})")


@parts.command()
@click.argument("file", type=click.Path(dir_okay=False, allow_dash=True), default="-")
@db_option
def export(file: str, db: str | None) -> None:
    """Export every part as CSV (to FILE, or stdout); it imports back identically."""
    from picker.store.csvio import write_csv
    from picker.store.outfile import database_files, replacing

    store = open_store(db)
    rows = store.export_rows()
    if file == "-":
        write_csv(rows, sys.stdout)
        return
    with replacing(Path(file), database_files(store.url)) as tmp:
        with tmp.open("w", encoding="utf-8", newline="") as out:
            n = write_csv(rows, out)
    click.echo(f"exported {n} part(s) to {file}", err=True)
