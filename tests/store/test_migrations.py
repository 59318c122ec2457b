"""Schema migrations on SQLite and on the real PostgreSQL: upgrades keep every row.

The reference for the rows is tests/data/parts_small.csv read with the csv module
(plain float() of each cell), independent of picker's own parser and models.
"""

from __future__ import annotations

import csv
from datetime import UTC, datetime
from typing import Any

import numpy as np
import pytest
from numpy.testing import assert_allclose

from picker.errors import Conflict, StoreError
from picker.store import Store, migrate
from picker.store.engine import make_engine
from tests.conftest import SMALL_CSV

STAMP = datetime(2025, 3, 4, 5, 6, 7, 891011, tzinfo=UTC)


def csv_rows() -> list[dict[str, str]]:
    with SMALL_CSV.open(encoding="utf-8") as f:
        return list(csv.DictReader(f))


def first_schema_with_rows(url: str) -> Any:
    """A database made by migration 0001 only, filled with the seed rows as 0001 knew them."""
    from sqlalchemy import MetaData, insert

    engine = make_engine(url)
    migrate.upgrade(engine, "0001")
    meta = MetaData()
    with engine.begin() as conn:
        meta.reflect(conn)
        parts = meta.tables["parts"]
        assert "reorder_level" not in parts.c
        rows = []
        for r in csv_rows():
            rec: dict[str, Any] = {k: (v if v != "" else None) for k, v in r.items()}
            for k, v in rec.items():
                if v is not None and k not in ("label", "description", "tech", "package",
                                               "location", "notes"):
                    rec[k] = int(v) if k in ("channels", "qty") else float(v)
            rec["updated_at"] = STAMP
            rows.append(rec)
        conn.execute(insert(parts), rows)
    return engine


def all_rows(engine: Any, table: str) -> list[dict[str, Any]]:
    from sqlalchemy import MetaData, select

    meta = MetaData()
    with engine.connect() as conn:
        meta.reflect(conn)
        t = meta.tables[table]
        return [dict(r) for r in conn.execute(select(t).order_by(t.c.id)).mappings()]


def test_code_and_migration_scripts_agree_on_the_head() -> None:
    from alembic.config import Config
    from alembic.script import ScriptDirectory

    assert migrate.script_head() == migrate.HEAD == migrate.REVISIONS[-1]
    cfg = Config()
    cfg.set_main_option("script_location", str(migrate.MIGRATIONS))
    chain = [s.revision for s in ScriptDirectory.from_config(cfg).walk_revisions()]
    assert tuple(reversed(chain)) == migrate.REVISIONS


def test_upgrade_from_the_first_schema_keeps_every_row(db_url: str) -> None:
    engine = first_schema_with_rows(db_url)
    before = all_rows(engine, "parts")
    assert migrate.current(engine) == "0001"
    migrate.upgrade(engine, "head")
    assert migrate.current(engine) == migrate.HEAD
    after = all_rows(engine, "parts")
    assert len(after) == len(before) == len(csv_rows())
    for b, a in zip(before, after, strict=True):
        assert {k: a[k] for k in b} == b  # every column of every row, exactly
        assert a["reorder_level"] is None
    # and still the numbers of the seed file (exact: rtol 0)
    by_label = {r["label"]: r for r in after}
    for src in csv_rows():
        got = by_label[src["label"]]
        for k, v in src.items():
            if k in ("label", "description", "tech", "package", "location", "notes"):
                assert (got[k] or "") == v
            elif v == "":
                assert got[k] is None
            else:
                assert_allclose(np.float64(got[k]), float(v), rtol=0, atol=0)
    assert all_rows(engine, "movements") == []
    engine.dispose()
    # the upgraded database opens, keeps its rules, and takes movements
    store = Store.open(db_url)
    with pytest.raises(Conflict, match="below zero"):
        store.edit("bip-gp-a", {"qty": -1})
    from picker.store import stock

    assert stock.take(store, "bip-gp-a", 1, "p", "a").qty_after == int(
        by_label["bip-gp-a"]["qty"]) - 1
    store.dispose()


def test_models_describe_exactly_what_the_migrations_build(db_url: str) -> None:
    from alembic.autogenerate import compare_metadata
    from alembic.migration import MigrationContext

    from picker.store.models import metadata

    store = Store.create(db_url)
    with store.engine.connect() as conn:
        diff = compare_metadata(MigrationContext.configure(conn, opts={"compare_type": True}),
                                metadata)
    store.dispose()
    assert diff == []


def test_an_older_or_newer_database_is_refused_with_the_fix(db_url: str) -> None:
    from sqlalchemy import text

    first_schema_with_rows(db_url).dispose()
    with pytest.raises(StoreError, match=r"schema 0001, this picker needs 0005.*picker db upgrade"):
        Store.open(db_url)
    store = Store.open(db_url, check=False)
    store.upgrade()
    Store.open(db_url).dispose()
    with store.engine.begin() as conn:
        conn.execute(text("UPDATE alembic_version SET version_num = '0999'"))
    with pytest.raises(StoreError, match="schema 0999, made by a newer picker.*upgrade picker"):
        Store.open(db_url)
    store.dispose()


def test_a_failing_migration_changes_nothing(db_url: str) -> None:
    """A step that fails half-way (a stray table in the way) leaves schema and rows as they were."""
    from sqlalchemy import inspect, text

    engine = first_schema_with_rows(db_url)
    before = all_rows(engine, "parts")
    with engine.begin() as conn:
        conn.execute(text("CREATE TABLE movements (stray INTEGER)"))
    engine.dispose()
    store = Store.open(db_url, check=False)
    with pytest.raises(StoreError, match="cannot set up the stockroom"):
        store.upgrade()  # 0002 adds the column, then fails creating its table
    assert migrate.current(store.engine) == "0001"
    with store.engine.connect() as conn:
        cols = {c["name"] for c in inspect(conn).get_columns("parts")}
    assert "reorder_level" not in cols
    assert all_rows(store.engine, "parts") == before
    store.dispose()


def test_upgrade_from_0002_keeps_every_row_and_starts_with_nothing_reserved(db_url: str
                                                                           ) -> None:
    """A stockroom with parts and movements at schema 0002 comes through 0003 whole."""
    from sqlalchemy import MetaData, insert

    engine = first_schema_with_rows(db_url)
    migrate.upgrade(engine, "0002")
    meta = MetaData()
    with engine.begin() as conn:
        meta.reflect(conn)
        assert "reserved" not in meta.tables["parts"].c
        ids = {r["label"]: r["id"] for r in all_rows(engine, "parts")}
        conn.execute(insert(meta.tables["movements"]), [
            {"at": STAMP, "by_user": "ann", "part_id": ids["bip-gp-a"], "part_label": "bip-gp-a",
             "delta": -3, "qty_after": 37, "project": "alpha", "reason": "take", "note": None},
            {"at": STAMP, "by_user": "ben", "part_id": None, "part_label": "gone",
             "delta": 5, "qty_after": 5, "project": None, "reason": "restock", "note": "x"},
        ])
    parts_before = all_rows(engine, "parts")
    moves_before = all_rows(engine, "movements")
    migrate.upgrade(engine, "head")
    assert migrate.current(engine) == migrate.HEAD == "0005"
    parts_after = all_rows(engine, "parts")
    moves_after = all_rows(engine, "movements")
    assert len(parts_after) == len(parts_before) and len(moves_after) == len(moves_before) == 2
    for b, a in zip(parts_before, parts_after, strict=True):
        assert {k: a[k] for k in b} == b and a["reserved"] == 0
    for b, a in zip(moves_before, moves_after, strict=True):
        assert {k: a[k] for k in b} == b
        assert (a["reserved_delta"], a["reserved_after"]) == (0, 0)
    engine.dispose()
    # the upgraded stockroom reserves, and keeps the new rule
    from picker.store import reservations

    store = Store.open(db_url)
    assert reservations.reserve(store, "bip-gp-a", 2, "p", "a").reserved_after == 2
    with pytest.raises(Conflict, match="cannot go below what projects have reserved"):
        store.edit("bip-gp-a", {"qty": 1})
    store.dispose()
