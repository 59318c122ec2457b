"""CSV files picker writes: every field with a line break, tab, comma or quote is quoted,
no line of the file starts a formula, and an export imports back identically.

Sources: RFC 4180, "Common Format and MIME Type for CSV Files", section 2, rules 6-7
(fields containing line breaks (CRLF), double quotes and commas should be enclosed in
double quotes; a double quote inside is doubled); OWASP, "CSV Injection" (cells that
start with = + - @ tab or carriage return are read as formulas by spreadsheets; prefix
them with an apostrophe). Python's csv reader (standard library, RFC 4180 dialect)
reads the files back as an outside parser.
"""

from __future__ import annotations

import csv
import io
import re
from pathlib import Path

import pytest

from picker.report.stock import log_csv, low_csv
from picker.store import Store, stock
from picker.store.csvio import parse_csv, write_csv
from picker.store.records import escape_text, unescape_text
from tests.cli.clirun import run

HOSTILE = [
    "\r=1+1",            # a bare CR, then a formula (the reported case)
    "fine\n=HYPERLINK(1)",
    "a\r\n+cmd|' /C calc'!A0",
    "tab\there",
    "\t-2",
    "x\n'kept apostrophe",
    "'already quoted",
    "comma, and \"quotes\"",
    "@SUM(A1)\r@again",
    "ends with CR\r",
    "plain text",
]
FORMULA_START = re.compile(r"^[=+\-@\t\r]")


def physical_lines(text: str) -> list[str]:
    """The file as a line-based tool or a careless spreadsheet sees it: split at any CR or LF."""
    return re.split(r"\r\n|\r|\n", text)


def assert_safe(text: str) -> None:
    # OWASP: no line the file can be split into starts with a formula character
    for line in physical_lines(text):
        stripped = line.lstrip('"')
        assert not FORMULA_START.match(stripped), repr(line)
    # RFC 4180: any field holding CR, LF or a tab was quoted, so the reader sees whole rows
    rows = list(csv.reader(io.StringIO(text, newline="")))
    assert len({len(r) for r in rows}) == 1, rows


@pytest.mark.parametrize("text", HOSTILE)
def test_escape_is_undone_exactly(text: str) -> None:
    assert unescape_text(escape_text(text)) == text


def test_parts_export_quotes_breaks_and_imports_back(memory_store: Store) -> None:
    for i, note in enumerate(HOSTILE):
        memory_store.add({"label": f"hostile-{i}", "notes": note, "location": note,
                          "description": note})
    out = io.StringIO()
    rows = memory_store.export_rows()
    write_csv(rows, out)
    text = out.getvalue()
    assert_safe(text)
    records = parse_csv(text, "export.csv")
    back = {r["label"]: r for r in records}
    for i, note in enumerate(HOSTILE):
        r = back[f"hostile-{i}"]
        assert (r["notes"], r["location"], r["description"]) == (note, note, note)
    # the whole file: every field of every part comes back
    keyed = {r["label"]: r for r in rows}
    for label, r in back.items():
        for name, value in r.items():
            if name != "updated_at":
                assert value == keyed[label][name], (label, name)


def test_stock_log_and_low_csv_are_quoted_and_guarded(memory_store: Store) -> None:
    memory_store.add({"label": "hostile-low", "qty": 1, "reorder_level": 5,
                      "location": "\r=1+1", "description": "ok\n@x"})
    stock.take(memory_store, "hostile-low", 1, "p\r=1+1", "a\n-b", note="x\r\n+y")
    out = io.StringIO()
    log_csv(stock.log(memory_store, "hostile-low"), out)
    assert_safe(out.getvalue())
    (row,) = list(csv.DictReader(io.StringIO(out.getvalue(), newline="")))
    assert [unescape_text(row[k]) for k in ("project", "by", "note")] == [
        "p\r=1+1", "a\n-b", "x\r\n+y"]
    out = io.StringIO()
    low_csv(stock.low(memory_store), out)
    assert_safe(out.getvalue())
    rows = {r["label"]: r for r in csv.DictReader(io.StringIO(out.getvalue(), newline=""))}
    assert unescape_text(rows["hostile-low"]["location"]) == "\r=1+1"
    assert unescape_text(rows["hostile-low"]["description"]) == "ok\n@x"


def test_export_file_through_the_cli_imports_back_identically(tmp_path: Path) -> None:
    db, db2, out = tmp_path / "a.db", tmp_path / "b.db", tmp_path / "parts.csv"
    run("init", "--demo", "--db", str(db))
    run("parts", "edit", "bip-gp-a", "notes=\r=1+1", "--db", str(db))
    run("parts", "export", str(out), "--db", str(db))
    assert_safe(out.read_text(encoding="utf-8", errors="strict"))
    run("init", "--db", str(db2))
    run("parts", "import", str(out), "--db", str(db2))
    run("parts", "export", str(tmp_path / "again.csv"), "--db", str(db2))
    assert (tmp_path / "again.csv").read_bytes() == out.read_bytes()
