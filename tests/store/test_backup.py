"""Backups and restores: consistent while others write, identical after restore, all or nothing.

"Identical" is checked table by table, row by row, reading both databases through
SQLAlchemy reflection (not through picker's models); times are compared as UTC
instants, numbers exactly.
"""

from __future__ import annotations

import json
import multiprocessing as mp
import time
from collections.abc import Iterator
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import pytest

from picker.errors import BadValue, Conflict, StoreError
from picker.store import Store, migrate, stock
from picker.store.backup import backup
from picker.store.csvio import parse_csv, read_text
from picker.store.restore import restore
from tests.conftest import SMALL_CSV
from tests.store import stock_workers


def seeded(url: str) -> Store:
    s = Store.create(url)
    s.import_records(parse_csv(read_text(SMALL_CSV), SMALL_CSV.name), update=False)
    stock.take(s, "bip-gp-a", 3, "preamp", "ann", note="=SUM(A1) stays text")
    stock.return_(s, "bip-gp-a", 1, "preamp", "ann")
    stock.restock(s, "jfet-gp-a", 10, "ben")
    stock.count(s, "bip-ss-b", 80, "cat")
    s.edit("bip-ss-b", {"reorder_level": 90})
    return s


def tables(url: str) -> dict[str, list[tuple[Any, ...]]]:
    """Every row of every table (alembic_version included), in key order, times in UTC."""
    from sqlalchemy import MetaData, create_engine, select

    engine = create_engine(url)
    meta = MetaData()
    out: dict[str, list[tuple[Any, ...]]] = {}
    with engine.connect() as conn:
        meta.reflect(conn)
        for name, t in sorted(meta.tables.items()):
            order = list(t.primary_key.columns) or list(t.columns)
            cols = sorted(t.columns, key=lambda c: c.name)
            out[name] = [
                tuple(_instant(v) for v in row)
                for row in conn.execute(select(*cols).order_by(*order))
            ]
    engine.dispose()
    return out


def _instant(v: Any) -> Any:
    if isinstance(v, datetime):
        return v.replace(tzinfo=UTC) if v.tzinfo is None else v.astimezone(UTC)
    return v


@pytest.fixture
def second_pg() -> Iterator[str]:
    """Another empty PostgreSQL database (the pg_url fixture gives one per test)."""
    from tests.conftest import fresh_pg_database

    with fresh_pg_database() as url:
        yield url


# -- SQLite: online backup while someone writes -------------------------------------------
def test_sqlite_backup_while_another_process_writes(tmp_path: Path) -> None:
    url = f"sqlite:///{tmp_path / 'live.db'}"
    start, n = 2000, 1500
    s = seeded(url)
    s.add({"label": "busy-a", "qty": start})
    s.dispose()
    ctx = mp.get_context("spawn")
    started, out = ctx.Event(), ctx.Queue()
    proc = ctx.Process(target=stock_workers.writer, args=(url, "busy-a", n, started, out))
    t0 = time.perf_counter()
    proc.start()
    assert started.wait(timeout=60)
    source = Store.open(url)
    files: list[Path] = []
    while proc.is_alive() and len(files) < 6:
        files.append(tmp_path / f"b{len(files)}.db")
        backup(source, files[-1])
        time.sleep(0.1)  # spread the backups over the writer's run
    report = out.get(timeout=60)
    proc.join(timeout=10)
    elapsed = time.perf_counter() - t0
    assert report["errors"] == [] and report["ok"] == n  # the writer never noticed
    taken_at_backup = []
    for i, f in enumerate(files):
        snap = tables(f"sqlite:///{f}")
        # each backup is one consistent moment: on hand = start + the logged changes
        b = Store.open(f"sqlite:///{f}")
        moves = stock.log(b, "busy-a")
        assert b.get("busy-a")["qty"] == start + sum(m.delta for m in moves)
        taken_at_backup.append(len(moves))
        b.dispose()
        # restored into a new database: the same tables, row for row
        target = Store.open(f"sqlite:///{tmp_path / f'r{i}.db'}", check=False)
        restore(target, f)
        target.dispose()
        assert tables(f"sqlite:///{tmp_path / f'r{i}.db'}") == snap
    print(f"\n{len(files)} backups during {n} takes in {elapsed:.2f} s; takes seen: "
          f"{taken_at_backup}")
    assert any(0 < k < n for k in taken_at_backup)  # at least one caught the writer mid-way
    final = tmp_path / "final.db"
    backup(source, final)
    source.dispose()
    assert tables(f"sqlite:///{final}") == tables(url)


def test_backup_onto_the_stockroom_itself_is_refused(tmp_path: Path) -> None:
    s = seeded(f"sqlite:///{tmp_path / 'self.db'}")
    before = s.checksum()
    for name in ("self.db", "self.db-wal"):
        with pytest.raises(BadValue, match="is the stockroom itself"):
            backup(s, tmp_path / name)
    assert s.checksum() == before
    s.dispose()


# -- round trips --------------------------------------------------------------------------
@pytest.mark.parametrize("portable", [False, True], ids=["sqlite-file", "portable"])
def test_round_trip_into_a_new_sqlite_file(db_url: str, tmp_path: Path, portable: bool) -> None:
    src = seeded(db_url)
    rep = backup(src, tmp_path / "bak", portable=portable)
    src.dispose()
    assert rep.kind == ("portable" if portable or db_url.startswith("postgresql") else "sqlite")
    assert rep.rows == {"parts": 5, "movements": 4}
    target_url = f"sqlite:///{tmp_path / 'new.db'}"
    target = Store.open(target_url, check=False)
    res = restore(target, tmp_path / "bak")
    target.dispose()
    assert res.rows == rep.rows and res.schema_from == res.schema_to == migrate.HEAD
    assert tables(target_url) == tables(db_url)


def test_portable_backup_restores_into_postgres(tmp_path: Path, pg_url: str,
                                                second_pg: str) -> None:
    sqlite_url = f"sqlite:///{tmp_path / 'bench.db'}"
    seeded(sqlite_url).dispose()
    src = Store.open(sqlite_url)
    backup(src, tmp_path / "bench.jsonl", portable=True)
    backup(src, tmp_path / "bench.db.bak")
    src.dispose()
    for url, file in ((pg_url, "bench.jsonl"), (second_pg, "bench.db.bak")):
        target = Store.open(url, check=False)
        restore(target, tmp_path / file)
        assert tables(url) == tables(sqlite_url)
        # PostgreSQL hands out ids after the restored ones
        assert stock.take(target, "bip-gp-a", 1, "p", "a").id == 5
        target.dispose()


# -- restore refuses, and fails whole --------------------------------------------------------
def test_restore_refuses_a_stockroom_with_rows(store: Store, tmp_path: Path) -> None:
    backup(store, tmp_path / "b.jsonl", portable=True)
    before = store.checksum()
    with pytest.raises(Conflict, match="already holds 5 parts; restore only into a new"):
        restore(store, tmp_path / "b.jsonl")
    assert store.checksum() == before


def test_restore_into_a_freshly_created_stockroom(db_url: str, tmp_path: Path) -> None:
    src = seeded(f"sqlite:///{tmp_path / 'src.db'}")
    backup(src, tmp_path / "b.db")
    src.dispose()
    fresh = Store.create(db_url)  # `picker init` without parts
    restore(fresh, tmp_path / "b.db")
    fresh.dispose()
    assert tables(db_url) == tables(f"sqlite:///{tmp_path / 'src.db'}")


def _damage(lines: list[str], how: str) -> list[str]:
    if how == "cut off":
        return lines[:-2]
    if how == "bad row":  # the last movement breaks a rule of the schema
        row = json.loads(lines[-2])
        cols = next(t["columns"] for t in json.loads(lines[0])["tables"]
                    if t["name"] == "movements")
        row["r"][cols.index("reason")] = "borrowed"
        return [*lines[:-2], json.dumps(row), lines[-1]]
    if how == "newer schema":
        head = json.loads(lines[0])
        head["schema"] = "0999"
        return [json.dumps(head), *lines[1:]]
    raise AssertionError(how)


@pytest.mark.parametrize(("how", "match"), [
    ("cut off", "cut off; nothing was restored"),
    ("bad row", "movements rows from .* cannot be restored"),
    ("newer schema", "made by a newer picker"),
])
def test_a_damaged_backup_restores_nothing(db_url: str, tmp_path: Path, how: str,
                                           match: str) -> None:
    from sqlalchemy import create_engine, inspect

    src = seeded(f"sqlite:///{tmp_path / 'src.db'}")
    backup(src, tmp_path / "b.jsonl", portable=True)
    src.dispose()
    lines = (tmp_path / "b.jsonl").read_text(encoding="utf-8").splitlines()
    (tmp_path / "bad.jsonl").write_text("\n".join(_damage(lines, how)) + "\n", encoding="utf-8")
    target = Store.open(db_url, check=False)
    with pytest.raises(BadValue, match=match):
        restore(target, tmp_path / "bad.jsonl")
    target.dispose()
    if db_url.startswith("sqlite"):  # the file restore created is gone again
        assert not (tmp_path / "stock.db").exists()
    else:  # the empty database is still empty: no tables, no schema
        engine = create_engine(db_url)
        with engine.connect() as conn:
            assert inspect(conn).get_table_names() == []
        engine.dispose()


def test_restore_of_something_else_is_refused(tmp_path: Path) -> None:
    junk = tmp_path / "notes.txt"
    junk.write_text("shopping list\n", encoding="utf-8")
    target = Store.open(f"sqlite:///{tmp_path / 'n.db'}", check=False)
    with pytest.raises(BadValue, match="is not a picker backup"):
        restore(target, junk)
    target.dispose()
    assert not (tmp_path / "n.db").exists()


def test_an_older_backup_is_upgraded_on_restore(db_url: str, tmp_path: Path) -> None:
    from tests.store.test_migrations import all_rows, first_schema_with_rows

    old_url = f"sqlite:///{tmp_path / 'old.db'}"
    first_schema_with_rows(old_url).dispose()
    old = Store.open(old_url, check=False)
    assert backup(old, tmp_path / "old.jsonl", portable=True).schema == "0001"
    want = all_rows(old.engine, "parts")
    old.dispose()
    target = Store.open(db_url, check=False)
    rep = restore(target, tmp_path / "old.jsonl")
    assert (rep.schema_from, rep.schema_to) == ("0001", migrate.HEAD)
    got = all_rows(target.engine, "parts")
    assert [{k: _instant(r[k]) for k in w} for r, w in zip(got, want, strict=True)] == [
        {k: _instant(v) for k, v in w.items()} for w in want]
    assert {r["reorder_level"] for r in got} == {None}
    target.dispose()


def test_backup_refuses_a_place_that_holds_no_stockroom(tmp_path: Path) -> None:
    empty = Store.open(f"sqlite:///{tmp_path / 'nothing.db'}", check=False)
    with pytest.raises(StoreError, match="holds no picker stockroom"):
        backup(empty, tmp_path / "b.db")
    empty.dispose()
    assert not (tmp_path / "b.db").exists() and not (tmp_path / "b.db.part").exists()
