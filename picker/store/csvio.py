"""Reading and writing parts as CSV.

The file format is picker's own: one header row of field names (see picker.fields;
short names such as ``gbw`` or ``slew`` are accepted too), one part per row. Numbers
may carry units (``1MHz``, ``0.5V/us``); a plain number is in the SI unit of the
column. Export writes plain SI numbers with full precision and guards text cells
against spreadsheet formula execution (OWASP CSV injection) with a leading
apostrophe (also after a line break inside a cell), which import removes again, so
an export imports back identically. Every field holding a comma, a quote, a tab, a
carriage return or a line feed is quoted (Python's csv writer leaves a bare carriage
return unquoted when lines end in LF; picker's writer does not).
"""

from __future__ import annotations

import csv
import io
import math
import re
from collections.abc import Iterable, Mapping, Sequence
from datetime import datetime
from pathlib import Path
from typing import Any

from picker.errors import BadValue, ImportProblems, PickerError
from picker.fields import BY_NAME, FIELDS
from picker.store.records import ALIASES, check_consistency, convert, escape_text, utc_time

MAX_BYTES = 200 * 1024 * 1024
MAX_COLUMNS = 64
MAX_PROBLEMS = 200
EXPORT_COLUMNS: tuple[str, ...] = tuple(f.name for f in FIELDS) + ("updated_at",)


def read_text(path: Path) -> str:
    """The file's text, refusing what cannot be a parts table before reading it all."""
    try:
        size = path.stat().st_size
    except OSError as exc:
        raise BadValue("FILE", str(path), f"cannot be read ({exc.strerror})") from None
    if size > MAX_BYTES:
        raise BadValue(
            "FILE", str(path), f"is {size / 1e6:.0f} MB; picker reads parts files up to "
            f"{MAX_BYTES // (1024 * 1024)} MB: split it"
        )
    data = path.read_bytes()
    if b"\x00" in data[:4096]:
        raise BadValue("FILE", str(path), "is not a text file (it holds NUL bytes)")
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise BadValue(
            "FILE", str(path),
            f"is not UTF-8 text (byte {exc.start}); save it as UTF-8 CSV and try again",
        ) from None


def parse_csv(text: str, source: str, *, blank_clears: bool = False) -> list[dict[str, Any]]:
    """Validate every row; return records (SI values) or raise ImportProblems listing all.

    A blank cell is left out of its record, so an update leaves that field as it is
    (a new part has it unknown; its quantity is 0). With blank_clears a blank cell
    is kept as unknown (None; a quantity of 0), so an update clears the field.
    """
    lines = text.splitlines()
    if not lines or not lines[0].strip():
        raise BadValue(source, "", "is empty; the first row must name the columns (label, ...)")
    first = lines[0]
    if ";" in first and "," not in first:
        raise BadValue(
            source, first[:40], "uses ';' between columns; picker reads comma-separated files"
        )
    csv.field_size_limit(MAX_BYTES)
    try:
        reader = csv.reader(io.StringIO(text, newline=""), strict=True)
        header = next(reader)
    except csv.Error as exc:
        raise BadValue(source, first[:40], f"is not a valid CSV header ({exc})") from None
    if len(header) > MAX_COLUMNS:
        raise BadValue(source, f"{len(header)} columns", f"is more than {MAX_COLUMNS}; not a parts table")
    names: list[str | None] = []
    problems: list[str] = []
    seen: dict[str, int] = {}
    for col, raw in enumerate(header, start=1):
        key = raw.strip().lower()
        name = "updated_at" if key == "updated_at" else ALIASES.get(key)
        if name is None:
            problems.append(f"row 1, column {col}: {raw[:40]!r} is not a part field")
        elif name in seen:
            problems.append(f"row 1, column {col}: {raw[:40]!r} repeats column {seen[name]}")
        else:
            seen[name] = col
        names.append(name)
    if "label" not in seen:
        problems.append("row 1: no 'label' column; every part needs one")
    if problems:
        raise ImportProblems(source, problems)

    records: list[dict[str, Any]] = []
    labels: dict[str, int] = {}
    try:
        for rowno, row in enumerate(reader, start=2):
            if not row or all(not c.strip() for c in row):
                continue
            if len(row) != len(names):
                problems.append(
                    f"row {rowno}: {len(row)} cells, the header has {len(names)}"
                )
                continue
            rec: dict[str, Any] = {}
            for name, cell in zip(names, row, strict=True):
                assert name is not None
                where = f"row {rowno}, column {name}"
                if not blank_clears and name != "label" and not cell.strip():
                    continue
                try:
                    rec[name] = _updated(cell, where) if name == "updated_at" else convert(
                        name, cell, where, from_csv=True
                    )
                except PickerError as exc:
                    problems.append(str(exc))
            try:
                check_consistency(rec, f"row {rowno}, column ")
            except PickerError as exc:
                problems.append(str(exc))
            label = rec.get("label")
            if isinstance(label, str):
                if label in labels:
                    problems.append(
                        f"row {rowno}, column label: {label!r} repeats row {labels[label]}"
                    )
                else:
                    labels[label] = rowno
            if len(problems) > MAX_PROBLEMS:
                break
            records.append(rec)
    except csv.Error as exc:
        problems.append(f"row {reader.line_num}: not valid CSV ({exc})")
    if problems:
        raise ImportProblems(source, problems)
    return records


def _updated(cell: str, where: str) -> datetime | None:
    return utc_time(cell, where) if cell.strip() else None


def _cell(name: str, value: Any) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return ""  # unknown (a DataFrame holds NaN for it)
    if name == "updated_at":
        return value.isoformat() if isinstance(value, datetime) else str(value)
    kind = BY_NAME[name].kind
    if kind == "text":
        return escape_text(str(value))
    if kind == "count":
        return str(int(value))
    return repr(float(value))


_QUOTE = re.compile(r'[,"\r\n\t]')


class CsvWriter:
    """Comma-separated rows ending in LF (RFC 4180 quoting): a field that holds a comma,
    a double quote, CR, LF or a tab is quoted, its quotes doubled; None is empty."""

    def __init__(self, out: Any) -> None:
        self.out = out

    def writerow(self, cells: Iterable[Any]) -> None:
        self.out.write(",".join(_field(c) for c in cells) + "\n")


def _field(value: Any) -> str:
    text = "" if value is None else str(value)
    if _QUOTE.search(text):
        return '"' + text.replace('"', '""') + '"'
    return text


def write_csv(rows: Iterable[Mapping[str, Any]], out: io.TextIOBase | Any,
              columns: Sequence[str] = EXPORT_COLUMNS) -> int:
    """Write parts to an open text stream; returns the number of rows.

    columns: the fields to write (all of them and updated_at by default); a file of
    some columns imports back as an update of just those columns.
    """
    writer = CsvWriter(out)
    writer.writerow(columns)
    n = 0
    for r in rows:
        writer.writerow([_cell(c, r.get(c)) for c in columns])
        n += 1
    return n
