"""The movement log, the low-stock list and the per-project view for people (table)
and programs (JSON, CSV).

Times are stored in UTC; tables show them in the reader's local time, JSON and CSV
keep ISO 8601 with the UTC offset. CSV text cells carry the same spreadsheet formula
guard as the parts export (OWASP CSV injection) and the same quoting (a field holding
CR, LF, a tab, a comma or a quote is quoted).
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from typing import Any

from picker.store.csvio import CsvWriter
from picker.store.records import escape_text
from picker.store.reservations import Holding
from picker.store.stock import Movement

LOG_COLUMNS: tuple[str, ...] = (
    "at", "by", "part", "delta", "qty_after", "project", "reason", "note",
    "reserved_delta", "reserved_after",
)
_LOG_HEADERS = ("when (local)", "by", "part", "change", "on hand", "reserved change",
                "reserved", "project", "reason", "note")
LOW_COLUMNS: tuple[str, ...] = ("label", "qty", "reserved", "available", "reorder_level",
                                "location", "description")
_LOW_HEADERS = ("part", "on hand", "reserved", "available", "reorder at", "location",
                "description")
PROJECT_COLUMNS: tuple[str, ...] = ("project", "part", "out", "reserved")
_PROJECT_HEADERS = ("project", "part", "out", "reserved")


def log_table(moves: Sequence[Movement]) -> str:
    from tabulate import tabulate

    body = [
        [m.at.astimezone().strftime("%Y-%m-%d %H:%M:%S"), m.by, m.part, f"{m.delta:+d}",
         str(m.qty_after), f"{m.reserved_delta:+d}" if m.reserved_delta else "",
         str(m.reserved_after), m.project or "", m.reason, m.note or ""]
        for m in moves
    ]
    return tabulate(body, headers=list(_LOG_HEADERS), disable_numparse=True)


def log_records(moves: Iterable[Movement]) -> list[dict[str, Any]]:
    """JSON-ready rows: ISO 8601 UTC times, whole-number deltas."""
    return [{**m.as_dict(), "at": m.at.isoformat()} for m in moves]


def log_csv(moves: Iterable[Movement], out: Any) -> int:
    writer = CsvWriter(out)
    writer.writerow(LOG_COLUMNS)
    n = 0
    for m in moves:
        writer.writerow([
            m.at.isoformat(), escape_text(m.by), escape_text(m.part), m.delta, m.qty_after,
            escape_text(m.project or ""), m.reason, escape_text(m.note or ""),
            m.reserved_delta, m.reserved_after,
        ])
        n += 1
    return n


def low_table(rows: Sequence[Mapping[str, Any]]) -> str:
    from tabulate import tabulate

    body = [
        [r["label"], str(r["qty"]), str(r["reserved"]), str(r["available"]),
         "-" if r["reorder_level"] is None else str(r["reorder_level"]),
         r["location"] or "", r["description"] or ""]
        for r in rows
    ]
    return tabulate(body, headers=list(_LOW_HEADERS), disable_numparse=True)


def low_csv(rows: Iterable[Mapping[str, Any]], out: Any) -> int:
    writer = CsvWriter(out)
    writer.writerow(LOW_COLUMNS)
    n = 0
    for r in rows:
        writer.writerow([
            escape_text(r["label"]), r["qty"], r["reserved"], r["available"],
            "" if r["reorder_level"] is None else r["reorder_level"],
            escape_text(r["location"] or ""), escape_text(r["description"] or ""),
        ])
        n += 1
    return n


def projects_table(rows: Sequence[Holding]) -> str:
    from tabulate import tabulate

    body = [[h.project, h.part, str(h.out), str(h.reserved)] for h in rows]
    return tabulate(body, headers=list(_PROJECT_HEADERS), disable_numparse=True)


def projects_csv(rows: Iterable[Holding], out: Any) -> int:
    writer = CsvWriter(out)
    writer.writerow(PROJECT_COLUMNS)
    n = 0
    for h in rows:
        writer.writerow([escape_text(h.project), escape_text(h.part), h.out, h.reserved])
        n += 1
    return n
