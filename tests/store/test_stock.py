"""Stock movements on SQLite and on the real PostgreSQL (scripts/test starts it).

The reference for every quantity is the seeded file tests/data/parts_small.csv read
with the csv module, plus bookkeeping arithmetic (on hand = start + sum of the logged
changes; common practice, no source). The concurrency tests run real operating-system
processes, each with its own connections, as several people at several benches would.
"""

from __future__ import annotations

import csv
import multiprocessing as mp
import sqlite3
import time
from collections.abc import Callable
from datetime import UTC, datetime, timedelta
from typing import Any

import pytest

from picker.errors import BadValue, Conflict, NotFound, StoreError
from picker.store import Store, reservations, stock
from picker.store import engine as engine_mod
from tests.conftest import SMALL_CSV
from tests.store import stock_workers


def csv_qty() -> dict[str, int]:
    """Quantities on hand as written in the seed file (read without picker's code)."""
    with SMALL_CSV.open(encoding="utf-8") as f:
        return {r["label"]: int(r["qty"]) for r in csv.DictReader(f)}


def run_processes(target: Callable[..., None], args: list[tuple[Any, ...]],
                  timeout: float = 60) -> tuple[list[dict[str, Any]], float]:
    """Start one spawned process per args tuple, released together by a barrier.

    The reports come back in the order the processes finish.
    """
    ctx = mp.get_context("spawn")
    barrier = ctx.Barrier(len(args))
    out = ctx.Queue()
    procs = [ctx.Process(target=target, args=(*a, barrier, out)) for a in args]
    t0 = time.perf_counter()
    for p in procs:
        p.start()
    try:
        reports = [out.get(timeout=timeout) for _ in procs]
    finally:
        for p in procs:
            p.join(timeout=10)
            if p.is_alive():
                p.kill()
    elapsed = time.perf_counter() - t0
    assert all(p.exitcode == 0 for p in procs)
    return reports, elapsed


# -- one movement at a time -------------------------------------------------------
def test_take_lowers_quantity_and_logs_one_row(store: Store) -> None:
    start = csv_qty()["bip-gp-a"]
    mv = stock.take(store, "bip-gp-a", 3, "preamp rev B", "alice", note="bench 2")
    assert store.get("bip-gp-a")["qty"] == start - 3
    (row,) = stock.log(store, "bip-gp-a")
    assert (row.delta, row.qty_after, row.project, row.by, row.reason, row.note) == (
        -3, start - 3, "preamp rev B", "alice", "take", "bench 2")
    assert row == mv
    assert row.at.tzinfo is not None
    assert abs(row.at - datetime.now(UTC)) < timedelta(minutes=5)


def test_taking_more_than_is_there_changes_nothing(store: Store) -> None:
    start = csv_qty()["jfet-gp-a"]
    before = store.checksum()
    with pytest.raises(Conflict, match=f"only {start} of jfet-gp-a left"):
        stock.take(store, "jfet-gp-a", start + 1, "p", "bob")
    assert store.checksum() == before
    stock.take(store, "jfet-gp-a", start, "p", "bob")  # exactly all of them is fine
    assert store.get("jfet-gp-a")["qty"] == 0
    with pytest.raises(Conflict, match="only 0 of jfet-gp-a left"):
        stock.take(store, "jfet-gp-a", 1, "p", "bob")


def test_return_restock_count_and_the_log_explains_the_quantity(store: Store) -> None:
    start = csv_qty()["bip-ss-b"]
    stock.take(store, "bip-ss-b", 10, "filter", "ann")
    stock.return_(store, "bip-ss-b", 4, "filter", "ann")
    stock.restock(store, "bip-ss-b", 25, "ben", note="delivery 7")
    stock.count(store, "bip-ss-b", 90, "cat")
    moves = stock.log(store, "bip-ss-b")
    assert [m.reason for m in moves] == ["take", "return", "restock", "count"]
    # the count logs the difference to the books: start - 10 + 4 + 25 -> 90
    assert moves[-1].delta == 90 - (start - 10 + 4 + 25)
    assert store.get("bip-ss-b")["qty"] == 90 == start + sum(m.delta for m in moves)
    # every row's balance follows from the one before
    assert [m.qty_after for m in moves] == [start - 10, start - 6, start + 19, 90]
    same = stock.count(store, "bip-ss-b", 90, "cat")  # a count that confirms the books
    assert same.delta == 0


def test_return_is_limited_to_what_the_project_has_out(store: Store) -> None:
    stock.take(store, "bip-gp-a", 2, "alpha", "ann")
    stock.take(store, "bip-gp-a", 5, "beta", "ann")
    before = store.checksum()
    with pytest.raises(Conflict, match="alpha has only 2 of bip-gp-a out"):
        stock.return_(store, "bip-gp-a", 3, "alpha", "ann")
    with pytest.raises(Conflict, match="gamma has only 0"):
        stock.return_(store, "bip-gp-a", 1, "gamma", "ann")
    assert store.checksum() == before
    stock.return_(store, "bip-gp-a", 2, "alpha", "ann")
    assert store.get("bip-gp-a")["qty"] == csv_qty()["bip-gp-a"] - 5


BAD_CALLS: list[tuple[str, Callable[[Store], object], type[Exception], str]] = [
    ("zero", lambda s: stock.take(s, "bip-gp-a", 0, "p", "a"), BadValue, "QTY"),
    ("negative", lambda s: stock.restock(s, "bip-gp-a", -4, "a"), BadValue, "QTY"),
    ("not whole", lambda s: stock.take(s, "bip-gp-a", 1.5, "p", "a"), BadValue, "whole"),  # type: ignore[arg-type]
    ("flag", lambda s: stock.take(s, "bip-gp-a", True, "p", "a"), BadValue, "whole"),
    ("huge", lambda s: stock.restock(s, "bip-gp-a", 10**12, "a"), BadValue, "hold"),
    ("no project", lambda s: stock.take(s, "bip-gp-a", 1, "  ", "a"), BadValue, "--for"),
    ("no name", lambda s: stock.restock(s, "bip-gp-a", 1, ""), BadValue, "--by"),
    ("long name", lambda s: stock.restock(s, "bip-gp-a", 1, "x" * 101), BadValue, "--by"),
    ("count < 0", lambda s: stock.count(s, "bip-gp-a", -1, "a"), BadValue, "QTY"),
    ("no part", lambda s: stock.take(s, "nope", 1, "p", "a"), NotFound, "nope"),
    ("no part", lambda s: stock.return_(s, "nope", 1, "p", "a"), NotFound, "nope"),
    ("no part", lambda s: stock.count(s, "nope", 1, "a"), NotFound, "nope"),
    ("no part", lambda s: stock.restock(s, "nope", 1, "a"), NotFound, "nope"),
    ("no history", lambda s: stock.log(s, "nope"), NotFound, "no movements"),
]


@pytest.mark.parametrize(("case", "call", "error", "match"), BAD_CALLS,
                         ids=[c[0] for c in BAD_CALLS])
def test_bad_movements_are_refused_and_change_nothing(
    memory_store: Store, case: str, call: Callable[[Store], object], error: type[Exception],
    match: str,
) -> None:
    before = memory_store.checksum()
    with pytest.raises(error, match=match):
        call(memory_store)
    assert memory_store.checksum() == before


def test_failure_after_the_update_rolls_the_quantity_back(
    store: Store, monkeypatch: pytest.MonkeyPatch
) -> None:
    """The quantity and its log row are one transaction: a failure between them undoes both."""
    stock.take(store, "bip-gp-a", 2, "p", "a")  # so that a return is allowed

    reservations.reserve(store, "bip-gp-a", 2, "p", "a")  # so release and issue are allowed
    before = store.checksum()

    def power_cut(*args: object, **kwargs: object) -> None:
        raise RuntimeError("power cut between the update and the log row")

    monkeypatch.setattr(stock, "_log", power_cut)
    monkeypatch.setattr(reservations, "_log", power_cut)
    for call in (lambda: stock.take(store, "bip-gp-a", 1, "p", "a"),
                 lambda: stock.return_(store, "bip-gp-a", 1, "p", "a"),
                 lambda: stock.restock(store, "bip-gp-a", 1, "a"),
                 lambda: stock.count(store, "bip-gp-a", 3, "a"),
                 lambda: reservations.reserve(store, "bip-gp-a", 1, "p", "a"),
                 lambda: reservations.release(store, "bip-gp-a", 1, "p", "a"),
                 lambda: reservations.issue(store, "bip-gp-a", 1, "p", "a")):
        with pytest.raises(RuntimeError, match="power cut"):
            call()
    assert store.checksum() == before


def test_log_filters_by_part_and_time(store: Store) -> None:
    stock.take(store, "bip-gp-a", 1, "p", "a")
    stock.take(store, "jfet-gp-a", 2, "p", "a")
    stock.restock(store, "bip-gp-a", 3, "a")
    assert [m.part for m in stock.log(store)] == ["bip-gp-a", "jfet-gp-a", "bip-gp-a"]
    assert [m.delta for m in stock.log(store, "bip-gp-a")] == [-1, 3]
    assert len(stock.log(store, since=datetime.now(UTC) - timedelta(hours=1))) == 3
    assert stock.log(store, since=datetime.now(UTC) + timedelta(hours=1)) == []
    # a date without a time is the start of that day in local time
    today = datetime.now().astimezone().date()
    assert len(stock.log(store, since=stock.parse_since(today.isoformat()))) == 3
    with pytest.raises(BadValue, match="--since"):
        stock.parse_since("last tuesday")


def test_low_lists_parts_at_or_under_their_reorder_level(store: Store) -> None:
    qty = csv_qty()
    levels = {"bip-gp-a": qty["bip-gp-a"], "jfet-gp-a": qty["jfet-gp-a"] - 1,
              "bip-ss-b": qty["bip-ss-b"] + 5}
    for label, level in levels.items():
        store.edit(label, {"reorder_level": level})
    want = sorted(lbl for lbl, lvl in levels.items() if qty[lbl] <= lvl)
    assert sorted(r["label"] for r in stock.low(store)) == want == ["bip-gp-a", "bip-ss-b"]
    below = 30
    assert sorted(r["label"] for r in stock.low(store, below=below)) == sorted(
        lbl for lbl, q in qty.items() if q < below)


def test_removing_a_part_keeps_its_history(store: Store) -> None:
    stock.take(store, "bip-gp-a", 2, "p", "a")
    stock.take(store, "jfet-gp-a", 1, "p", "a")
    store.remove("bip-gp-a")
    kept = stock.log(store, "bip-gp-a")
    assert [(m.part, m.delta) for m in kept] == [("bip-gp-a", -2)]
    assert len(stock.log(store)) == 2
    with pytest.raises(NotFound):
        stock.take(store, "bip-gp-a", 1, "p", "a")
    # a new part under the old label starts its own stock; the old rows stay readable
    store.add({"label": "bip-gp-a", "qty": 4})
    stock.take(store, "bip-gp-a", 1, "p", "a")
    assert [m.delta for m in stock.log(store, "bip-gp-a")] == [-2, -1]


def test_packages_a_design_needs(store: Store) -> None:
    # channels needed / channels per package, rounded up (common practice, no source)
    assert [stock.packages_needed(c, 4) for c in (1, 4, 5, 8, 9)] == [1, 1, 2, 2, 3]
    assert stock.packages_needed(3, 2) == 2 and stock.packages_needed(2, None) == 2


# -- a database that stays busy ------------------------------------------------------
def test_busy_sqlite_is_a_clear_error(tmp_path: Any, monkeypatch: pytest.MonkeyPatch) -> None:
    path = tmp_path / "busy.db"
    seed = Store.create(str(path))
    seed.add({"label": "p-a", "qty": 5})
    seed.dispose()
    monkeypatch.setattr(engine_mod, "BUSY_TIMEOUT_S", 0.3)
    store = Store.open(str(path))
    other = sqlite3.connect(str(path))
    other.execute("BEGIN IMMEDIATE")  # someone else holds the write lock
    try:
        t0 = time.perf_counter()
        with pytest.raises(StoreError, match="stayed busy for 0.3 s"):
            stock.take(store, "p-a", 1, "p", "a")
        waited = time.perf_counter() - t0
    finally:
        other.rollback()
        other.close()
    assert 0.25 < waited < 10  # it waited for the timeout, then gave up cleanly
    assert stock.take(store, "p-a", 1, "p", "a").qty_after == 4
    store.dispose()


def test_busy_postgres_is_a_clear_error(pg_url: str, monkeypatch: pytest.MonkeyPatch) -> None:
    from sqlalchemy import text

    seed = Store.create(pg_url)
    seed.add({"label": "p-a", "qty": 5})
    seed.dispose()
    monkeypatch.setattr(engine_mod, "BUSY_TIMEOUT_S", 0.3)
    store = Store.open(pg_url)
    with store.engine.connect() as other:
        other.execute(text("SELECT qty FROM parts WHERE label = 'p-a' FOR UPDATE"))
        t0 = time.perf_counter()
        with pytest.raises(StoreError, match="stayed busy"):
            stock.take(store, "p-a", 1, "p", "a")
        waited = time.perf_counter() - t0
        other.rollback()
    assert 0.25 < waited < 10
    assert stock.take(store, "p-a", 1, "p", "a").qty_after == 4
    store.dispose()


# -- several people at the same moment --------------------------------------------------
def test_four_processes_take_800_one_by_one(db_url: str) -> None:
    """4 processes x 200 takes of 1 from 800 on hand: 0 left, 800 log rows, no error."""
    seed = Store.create(db_url)
    seed.add({"label": "conc-a", "qty": 800})
    seed.dispose()
    reports, elapsed = run_processes(
        stock_workers.takes, [(db_url, "conc-a", 200, f"proj-{i}") for i in range(4)])
    print(f"\n4 x 200 takes on {db_url.split(':')[0]}: {elapsed:.2f} s wall, "
          f"{max(r['seconds'] for r in reports):.2f} s slowest worker")
    assert [r["errors"] for r in reports] == [[], [], [], []]
    assert [r["refused"] for r in reports] == [[], [], [], []]
    assert [r["ok"] for r in reports] == [200, 200, 200, 200]
    store = Store.open(db_url)
    assert store.get("conc-a")["qty"] == 0
    moves = stock.log(store, "conc-a")
    assert len(moves) == 800 and {m.delta for m in moves} == {-1}
    # every balance from 799 down to 0 was seen exactly once: no update was lost
    assert sorted(m.qty_after for m in moves) == list(range(800))
    assert sorted({m.project for m in moves}) == [f"proj-{i}" for i in range(4)]
    before = store.checksum()
    with pytest.raises(Conflict, match="only 0 of conc-a left"):
        stock.take(store, "conc-a", 1, "one more", "late")
    assert store.checksum() == before
    store.dispose()


def test_mixed_takes_and_returns_from_four_processes(db_url: str) -> None:
    start = 60
    seed = Store.create(db_url)
    seed.add({"label": "conc-b", "qty": start})
    seed.dispose()
    reports, elapsed = run_processes(
        stock_workers.mixed,
        [(db_url, "conc-b", 150, f"proj-{i}", 1000 + i) for i in range(4)])
    print(f"\n4 x 150 mixed movements on {db_url.split(':')[0]}: {elapsed:.2f} s wall")
    assert [r["errors"] for r in reports] == [[], [], [], []]
    # the only refusals are takes when the drawer ran low, each a clean one-liner
    refused = [m for r in reports for m in r["refused"]]
    assert all(m.startswith("only ") and "conc-b left" in m for m in refused)
    store = Store.open(db_url)
    moves = stock.log(store, "conc-b")
    final = store.get("conc-b")["qty"]
    assert len(moves) == sum(r["ok"] for r in reports)
    assert final == start + sum(m.delta for m in moves) == start + sum(r["net"] for r in reports)
    # in log order every balance is the one before plus the change: one at a time
    balance = start
    for m in moves:
        balance += m.delta
        assert m.qty_after == balance >= 0
    for r in reports:  # each project's share of the log is what its process did
        assert sum(m.delta for m in moves if m.project == r["project"]) == r["net"]
    store.dispose()
