"""The repository API on SQLite and on the real PostgreSQL (scripts/test starts it)."""

from __future__ import annotations

import io
import math
from pathlib import Path

import pytest

from picker.errors import Conflict, ImportProblems, NotFound, StoreError
from picker.fields import FIELDS
from picker.store import Condition, Store
from picker.store.csvio import parse_csv, read_text, write_csv
from tests.conftest import SMALL_CSV


def test_seeded_rows_read_back_in_si(store: Store) -> None:
    frame = store.parts_frame()
    assert list(frame.index) == sorted(frame.index)
    assert len(frame) == 5
    # the numbers of tests/data/parts_small.csv, read back unchanged
    src = {r["label"]: r for r in parse_csv(read_text(SMALL_CSV), "small")}
    for label, rec in src.items():
        for name in (f.name for f in FIELDS if f.kind != "text"):
            want = rec.get(name)
            got = frame.loc[label, name]
            if want is None:
                assert math.isnan(got), (label, name)
            else:
                assert got == pytest.approx(want, rel=1e-15), (label, name)


def test_filters_run_in_sql(store: Store) -> None:
    fast = store.parts_frame(["slew_v_per_s"], [Condition("slew_v_per_s", ">=", 1e6)])
    assert (fast["slew_v_per_s"] >= 1e6).all()
    everything = store.parts_frame(["slew_v_per_s"])
    assert len(fast) == int((everything["slew_v_per_s"] >= 1e6).sum())
    assert len(store.parts_frame(["tech"], [Condition("tech", "~", "CMOS")])) >= 1


def test_edit_remove_and_missing(store: Store) -> None:
    store.edit("bip-gp-a", {"qty": 7, "notes": "moved"})
    assert store.get("bip-gp-a")["qty"] == 7
    store.remove("bip-gp-a")
    with pytest.raises(NotFound):
        store.get("bip-gp-a")
    with pytest.raises(NotFound):
        store.edit("nope", {"qty": 1})


def test_quantity_never_negative(store: Store) -> None:
    before = store.checksum()
    with pytest.raises(Conflict, match="below zero"):
        store.edit("bip-gp-a", {"qty": -1})
    assert store.checksum() == before


def test_duplicate_label_is_refused_and_nothing_written(store: Store) -> None:
    before = store.checksum()
    with pytest.raises(Conflict, match="--update"):
        store.import_records([{"label": "zz-new"}, {"label": "bip-gp-a"}], update=False)
    assert store.checksum() == before


def test_failure_half_way_leaves_database_unchanged(store: Store) -> None:
    """A write that fails after some rows went in is rolled back whole."""
    before = store.checksum()
    calls = {"n": 0}

    def boom(n: int) -> None:
        calls["n"] += 1
        raise RuntimeError("power cut")

    rows = [{"label": f"gen-{i:05d}", "gbw_hz": 1e6} for i in range(5000)]
    with pytest.raises(RuntimeError):
        store.import_records(rows, update=False, progress=boom)
    assert calls["n"] == 1
    assert store.checksum() == before


def test_import_bad_cell_in_row_500_changes_nothing(store: Store, tmp_path: Path) -> None:
    header = "label,gbw_hz,slew_v_per_s,qty\n"
    rows = [f"gen-{i:04d},{1e6 + i},0.5V/us,{i % 7}\n" for i in range(2, 800)]
    rows[498] = "gen-0500,1MHz,fast,3\n"  # file row 500 (header is row 1)
    f = tmp_path / "big.csv"
    f.write_text(header + "".join(rows), encoding="utf-8")
    before = store.checksum()
    with pytest.raises(ImportProblems) as info:
        store.import_records(parse_csv(read_text(f), f.name), update=False)
    assert "row 500, column slew_v_per_s" in str(info.value)
    assert store.checksum() == before


def test_export_import_identical(store: Store, tmp_path: Path) -> None:
    buf = io.StringIO()
    write_csv(store.export_rows(), buf)
    f = tmp_path / "out.csv"
    f.write_text(buf.getvalue(), encoding="utf-8")
    other = Store.create(f"sqlite:///{tmp_path / 'copy.db'}")
    other.import_records(parse_csv(read_text(f), f.name), update=False)
    assert _naive(other.export_rows()) == _naive(store.export_rows())


def _naive(rows: list[dict]) -> list[dict]:
    """SQLite keeps no time zone; compare timestamps as naive UTC."""
    return [{k: (v.replace(tzinfo=None) if hasattr(v, "tzinfo") else v) for k, v in r.items()}
            for r in rows]


def test_update_overwrites(store: Store) -> None:
    rep = store.import_records([{"label": "bip-gp-a", "qty": 99, "gbw_hz": 3e6}], update=True)
    assert (rep.added, rep.updated) == (0, 1)
    assert store.get("bip-gp-a")["gbw_hz"] == 3e6


def test_dry_run_writes_nothing(store: Store) -> None:
    before = store.checksum()
    rep = store.import_records([{"label": "dry-1"}, {"label": "bip-gp-a"}], update=True, dry_run=True)
    assert (rep.added, rep.updated, rep.dry_run) == (1, 1, True)
    assert store.checksum() == before


def test_opening_missing_or_empty_database(tmp_path: Path) -> None:
    with pytest.raises(StoreError, match="picker init"):
        Store.open(str(tmp_path / "none.db"))
    import sqlite3

    sqlite3.connect(tmp_path / "empty.db").close()
    with pytest.raises(StoreError, match="picker init"):
        Store.open(str(tmp_path / "empty.db"))


def test_schema_head_matches_alembic_scripts() -> None:
    from picker.store.migrate import HEAD, script_head

    assert HEAD == script_head()


def test_injection_text_is_stored_literally(store: Store) -> None:
    label = "x'); DROP TABLE parts; --"
    note = 'Robert"; DELETE FROM parts WHERE 1=1; --'
    store.add({"label": label, "notes": note})
    assert store.get(label)["notes"] == note
    assert store.count() == 6


def test_update_without_qty_column_keeps_quantities(store: Store) -> None:
    had = store.get("bip-gp-a")["qty"]
    assert had > 0
    store.import_records([{"label": "bip-gp-a", "price": 0.99}, {"label": "brand-new"}], update=True)
    assert store.get("bip-gp-a")["qty"] == had and store.get("bip-gp-a")["price"] == 0.99
    assert store.get("brand-new")["qty"] == 0


def test_quantity_set_by_edit_or_import_is_logged(store: Store) -> None:
    """On hand = start + sum of the log, also when edit or import --update set a quantity."""
    from picker.store import stock

    start = store.get("bip-gp-a")["qty"]
    store.edit("bip-gp-a", {"qty": start + 5, "notes": "recounted"}, by="tester")
    store.import_records([{"label": "bip-gp-a", "qty": start - 2}], update=True, by="tester")
    store.edit("bip-gp-a", {"notes": "no quantity change"}, by="tester")
    rows = stock.log(store, "bip-gp-a")
    assert [(m.delta, m.reason, m.by) for m in rows] == [(5, "count", "tester"), (-7, "import", "tester")]
    assert start + sum(m.delta for m in rows) == store.get("bip-gp-a")["qty"] == start - 2
