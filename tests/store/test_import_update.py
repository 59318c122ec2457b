"""`parts import --update` changes only what the file gives, shows its changes field by
field, keeps times honest, and keeps the movement log explaining the stock while others
take parts; `parts list --csv` writes only real values.

Sources: that an update must not erase fields a file does not hold, and that the log
must add up to the stock, is common practice, no source. SQLite's documentation,
"Transaction" (sqlite.org/lang_transaction.html): a DEFERRED transaction takes no lock
until it first reads or writes, BEGIN IMMEDIATE takes the write lock at once; SQLite
has no SELECT ... FOR UPDATE. PostgreSQL 15 documentation, section 8.5 "Date/Time
Types" (timestamp range 4713 BC .. 294276 AD; an input offset is converted to UTC).
ISO 8601 for the time texts.
"""

from __future__ import annotations

import csv
import io
import multiprocessing as mp
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import pytest

from picker.errors import ImportProblems
from picker.store import Store, stock
from picker.store.csvio import parse_csv
from tests.cli.clirun import fails, run
from tests.conftest import SMALL_CSV
from tests.store import stock_workers


def small_csv() -> dict[str, dict[str, str]]:
    with SMALL_CSV.open(encoding="utf-8") as f:
        return {r["label"]: r for r in csv.DictReader(f)}


def fields_of(store: Store) -> list[dict[str, object]]:
    return [{k: v for k, v in r.items() if k != "updated_at"} for r in store.export_rows()]


# -- finding 3: a partial CSV never erases fields ------------------------------------------
def test_list_csv_then_update_changes_nothing(tmp_path: Path) -> None:
    db = str(tmp_path / "s.db")
    run("init", "--demo", "--db", db)
    run("parts", "edit", "bip-gp-a", "channels=", "description=kept words", "--db", db)
    listed = run("parts", "list", "--csv", "--db", db).stdout  # crashed on channels unknown
    header = listed.splitlines()[0].split(",")
    assert "description" not in header and "rin_ohm" not in header
    path = tmp_path / "listed.csv"
    path.write_text(listed, encoding="utf-8")
    s = Store.open(db)
    before = fields_of(s)
    dry = run("parts", "import", str(path), "--update", "--dry-run", "--db", db).stdout
    assert "(0 field(s) would change)" in dry
    run("parts", "import", str(path), "--update", "--db", db)
    assert fields_of(s) == before
    assert s.get("bip-gp-a")["description"] == "kept words"
    s.dispose()


def test_update_changes_only_given_nonblank_cells(memory_store: Store) -> None:
    src = small_csv()["bip-gp-a"]
    text = "label,gbw_hz,notes,rin_ohm\nbip-gp-a,2MHz,,\n"
    report = memory_store.import_records(parse_csv(text, "u.csv"), update=True)
    part = memory_store.get("bip-gp-a")
    assert part["gbw_hz"] == 2e6
    assert part["notes"] == src["notes"]  # blank: left as it was
    assert part["rin_ohm"] == float(src["rin_ohm"])
    assert part["slew_v_per_s"] == float(src["slew_v_per_s"])  # not in the file
    assert [(c.label, c.field, c.old, c.new) for c in report.changes] == [
        ("bip-gp-a", "gbw_hz", float(src["gbw_hz"]), 2e6)]


def test_blank_clears_makes_blank_cells_unknown(memory_store: Store) -> None:
    text = "label,notes,rin_ohm,qty\nbip-gp-a,,,\n"
    memory_store.import_records(parse_csv(text, "u.csv", blank_clears=True), update=True)
    part = memory_store.get("bip-gp-a")
    assert (part["notes"], part["rin_ohm"], part["qty"]) == (None, None, 0)
    (mv,) = stock.log(memory_store, "bip-gp-a")  # the quantity change is logged
    assert mv.delta == -int(small_csv()["bip-gp-a"]["qty"]) and mv.reason == "import"


def test_dry_run_prints_each_change_and_writes_nothing(tmp_path: Path) -> None:
    db = str(tmp_path / "s.db")
    run("init", "--db", db)
    run("parts", "import", str(SMALL_CSV), "--db", db)
    src = small_csv()["jfet-gp-a"]
    f = tmp_path / "u.csv"
    f.write_text("label,qty,location,gbw\njfet-gp-a,7,bin 9,\n", encoding="utf-8")
    s = Store.open(db)
    before = s.checksum()
    out = run("parts", "import", str(f), "--update", "--dry-run", "--db", db).stdout
    lines = out.splitlines()
    assert f"jfet-gp-a  qty: {src['qty']} -> 7" in lines
    assert f'jfet-gp-a  location: "{src["location"]}" -> "bin 9"' in lines
    assert not [x for x in lines if "gbw" in x]
    assert "(2 field(s) would change)" in lines[-1]
    assert s.checksum() == before
    fails("parts", "import", str(f), "--blank-clears", "--db", db)  # needs --update
    s.dispose()


def test_update_that_breaks_supply_order_is_refused(memory_store: Store) -> None:
    from picker.errors import BadValue

    before = memory_store.checksum()
    with pytest.raises(BadValue, match="supply_min_v"):
        memory_store.import_records(parse_csv("label,supply_min_v\nbip-gp-a,40\n", "u.csv"),
                                    update=True)
    assert memory_store.checksum() == before


# -- finding 5: updated_at cells ------------------------------------------------------------
@pytest.mark.parametrize("cell", ["9999-12-31T23:59:59-14:00", "0001-01-01T00:00:00",
                                  "1969-12-31T23:59:59+00:00", "10000-01-01"])
def test_updated_at_out_of_range_is_refused(store: Store, cell: str) -> None:
    before = store.checksum()
    with pytest.raises(ImportProblems, match="row 2, column updated_at"):
        store.import_records(parse_csv(f"label,updated_at\nx9,{cell}\n", "t.csv"), update=False)
    assert store.checksum() == before


def test_updated_at_offset_is_converted_to_utc(store: Store) -> None:
    store.import_records(parse_csv("label,updated_at\nx9,2026-01-31T12:00:00+02:00\n", "t.csv"),
                         update=False)
    got = store.get("x9")["updated_at"]
    got = got.replace(tzinfo=UTC) if got.tzinfo is None else got  # SQLite keeps UTC, no offset
    assert got == datetime(2026, 1, 31, 10, 0, tzinfo=UTC)
    out = io.StringIO()
    from picker.store.csvio import write_csv

    write_csv(store.export_rows(), out)  # and the stockroom still exports
    assert "x9" in out.getvalue()


def test_updated_at_cli_is_one_line(tmp_path: Path) -> None:
    db = str(tmp_path / "s.db")
    run("init", "--db", db)
    f = tmp_path / "t.csv"
    f.write_text("label,updated_at\nx9,9999-12-31T23:59:59-14:00\n", encoding="utf-8")
    assert "row 2, column updated_at" in fails("parts", "import", str(f), "--db", db).stderr


# -- finding 4: the log explains the stock while an update sets the quantity -----------------
@pytest.mark.slow
def test_update_racing_takes_keeps_the_log_explaining_the_stock(db_url: str) -> None:
    s = Store.create(db_url)
    start = 300
    s.add({"label": "race-a", "qty": start})
    reports = takers_and_updater(db_url)
    assert not [e for r in reports for e in r["errors"]], reports
    moves = stock.log(s, "race-a")
    on_hand = s.get("race-a")["qty"]
    # every unit on hand is explained by the log: start + sum of changes
    assert on_hand == start + sum(m.delta for m in moves)
    # and each logged balance follows from the one before (id order = commit order)
    balance = start
    for m in moves:
        balance += m.delta
        assert m.qty_after == balance, m
    s.dispose()


def takers_and_updater(url: str) -> list[dict[str, Any]]:
    """Three processes taking one part at a time, one importing new quantities."""
    ctx = mp.get_context("spawn")
    barrier = ctx.Barrier(4)
    out = ctx.Queue()
    procs = [ctx.Process(target=stock_workers.takes,
                         args=(url, "race-a", 60, f"p{i}", barrier, out)) for i in range(3)]
    procs.append(ctx.Process(target=stock_workers.updater,
                             args=(url, "race-a", 40, 7, barrier, out)))
    for p in procs:
        p.start()
    try:
        reports = [out.get(timeout=120) for _ in procs]
    finally:
        for p in procs:
            p.join(timeout=10)
            if p.is_alive():
                p.kill()
    assert all(p.exitcode == 0 for p in procs)
    return reports
