"""A tampered backup is refused whole; quantities never grow past what an import accepts.

Sources: that a restore must hold a backup to the same rules as an import, and that an
export must import back, is common practice, no source. PostgreSQL 15 documentation,
section 8.1.1 "Integer Types" (integer: -2147483648 to +2147483647); RFC 8259 section 6
(JSON has no Infinity or NaN; Python's json module reads them anyway, so the restore must
check); SQLite's documentation, "Datatypes In SQLite" (sqlite.org/datatype3.html): a
column of any declared type can hold text, so a SQLite backup must be checked as well.
"""

from __future__ import annotations

import io
import json
import sqlite3
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import create_engine, inspect

from picker.errors import BadValue, Conflict
from picker.store import Store, stock
from picker.store.backup import backup
from picker.store.csvio import parse_csv, write_csv
from picker.store.records import QTY_MAX
from picker.store.restore import restore
from tests.cli.clirun import fails
from tests.store.test_backup import seeded


def tamper(path: Path, table: str, column: str, value: Any, raw: str | None = None) -> Path:
    """Change one cell of the first row of table in a portable backup."""
    lines = path.read_text(encoding="utf-8").splitlines()
    header = json.loads(lines[0])
    columns = {t["name"]: t["columns"] for t in header["tables"]}
    for i, line in enumerate(lines[1:], start=1):
        item = json.loads(line)
        if item.get("t") == table:
            item["r"][columns[table].index(column)] = value
            text = json.dumps(item, allow_nan=True)
            lines[i] = text if raw is None else text.replace('"__RAW__"', raw)
            break
    out = path.with_name(f"tampered-{table}-{column}.jsonl")
    out.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return out


TAMPERED: list[tuple[str, str, Any, str | None]] = [
    ("parts", "qty", "lots", None),
    ("parts", "qty", 1.5, None),
    ("parts", "qty", 10**19, None),
    ("parts", "qty", QTY_MAX + 1, None),
    ("parts", "qty", -1, None),
    ("parts", "label", "x" * 5000, None),
    ("parts", "label", "", None),
    ("parts", "gbw_hz", "__RAW__", "Infinity"),
    ("parts", "gbw_hz", "__RAW__", "NaN"),
    ("parts", "gbw_hz", -5.0, None),
    ("parts", "gbw_hz", "1MHz", None),
    ("parts", "notes", "n" * 10_001, None),
    ("parts", "notes", 12, None),
    ("parts", "updated_at", "9999-12-31T23:59:59-14:00", None),
    ("parts", "updated_at", "yesterday", None),
    ("movements", "delta", "__RAW__", "1e400"),
    ("movements", "qty_after", 10**12, None),
    ("movements", "by_user", "b" * 101, None),
    ("movements", "note", 3.5, None),
]


def refused_leaves_nothing(target: str, run_restore: Callable[[], object]) -> None:
    with pytest.raises(BadValue, match="nothing was restored|line|row"):
        run_restore()
    if target.startswith("sqlite"):
        assert not Path(target.split("///", 1)[1]).exists()  # the new file is removed again
    else:
        engine = create_engine(target)
        assert inspect(engine).get_table_names() == []
        engine.dispose()


@pytest.mark.parametrize("table, column, value, raw", TAMPERED,
                         ids=[f"{t}.{c}={str(v)[:12] if r is None else r}"
                              for t, c, v, r in TAMPERED])
def test_tampered_portable_backup_is_refused(tmp_path: Path, db_url: str, table: str,
                                             column: str, value: Any, raw: str | None) -> None:
    src = seeded(f"sqlite:///{tmp_path / 'src.db'}")
    good = backup(src, tmp_path / "good.jsonl", portable=True).path
    bad = tamper(good, table, column, value, raw)
    target_url = db_url if not db_url.startswith("sqlite") else f"sqlite:///{tmp_path / 'new.db'}"
    target = Store.open(target_url, check=False)
    refused_leaves_nothing(target_url, lambda: restore(target, bad))
    target.dispose()
    src.dispose()


@pytest.mark.parametrize("column, value", [("qty", "lots"), ("qty", 1.5), ("qty", 10**15),
                                           ("label", "y" * 5000), ("gbw_hz", "fast")],
                         ids=["qty-text", "qty-fraction", "qty-huge", "label-long", "gbw-text"])
def test_tampered_sqlite_backup_is_refused(tmp_path: Path, column: str, value: Any) -> None:
    src = seeded(f"sqlite:///{tmp_path / 'src.db'}")
    good = backup(src, tmp_path / "good.db").path
    con = sqlite3.connect(good)
    con.execute(f"UPDATE parts SET {column} = ? WHERE id = (SELECT min(id) FROM parts)", (value,))
    con.commit()
    con.close()
    target_url = f"sqlite:///{tmp_path / 'new.db'}"
    target = Store.open(target_url, check=False)
    refused_leaves_nothing(target_url, lambda: restore(target, good))
    target.dispose()
    src.dispose()


def test_tampered_backup_through_the_cli_is_one_line(tmp_path: Path) -> None:
    src = seeded(f"sqlite:///{tmp_path / 'src.db'}")
    bad = tamper(backup(src, tmp_path / "good.jsonl", portable=True).path, "parts", "qty", "lots")
    fails("db", "restore", str(bad), "--db", str(tmp_path / "new.db"))
    assert not (tmp_path / "new.db").exists()
    src.dispose()


def test_an_untampered_backup_still_restores(tmp_path: Path, db_url: str) -> None:
    src = seeded(f"sqlite:///{tmp_path / 'src.db'}")
    good = backup(src, tmp_path / "good.jsonl", portable=True).path
    target = Store.open(db_url, check=False)
    report = restore(target, good)
    assert report.rows["parts"] == src.count()
    assert [r["label"] for r in target.export_rows()] == [r["label"] for r in src.export_rows()]
    target.dispose()
    src.dispose()


# -- stock add (and return) never pass what an import accepts --------------------------------
def test_stock_add_stops_at_the_import_limit(store: Store) -> None:
    store.edit("bip-gp-a", {"qty": QTY_MAX - 10})
    before = store.checksum()
    with pytest.raises(Conflict, match="more would pass"):
        stock.restock(store, "bip-gp-a", 20, "ann")
    assert store.checksum() == before
    stock.restock(store, "bip-gp-a", 10, "ann")  # exactly the limit is fine
    assert store.get("bip-gp-a")["qty"] == QTY_MAX
    # and what is on hand exports and imports back
    out = io.StringIO()
    write_csv(store.export_rows(), out)
    (rec,) = [r for r in parse_csv(out.getvalue(), "e.csv") if r["label"] == "bip-gp-a"]
    assert rec["qty"] == QTY_MAX


def test_a_return_cannot_pass_the_limit_either(store: Store) -> None:
    store.edit("bip-gp-a", {"qty": QTY_MAX})
    stock.take(store, "bip-gp-a", 5, "preamp", "ann")
    stock.restock(store, "bip-gp-a", 5, "ann")
    with pytest.raises(Conflict, match="more would pass"):
        stock.return_(store, "bip-gp-a", 5, "preamp", "ann")
    assert store.get("bip-gp-a")["qty"] == QTY_MAX
