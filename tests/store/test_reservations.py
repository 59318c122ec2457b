"""Reservations on SQLite and on the real PostgreSQL: reserve, release, issue, the
per-project view and what a take may take.

Starting quantities come from tests/data/parts_small.csv read with the csv module.
The bookkeeping checked here (on hand = start + logged on-hand changes, reserved = sum
of logged reservation changes, available = on hand - reserved, never negative; a
project gives back or is issued no more than it holds) is common practice, no source.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import numpy as np
import pytest

from picker.errors import BadValue, Conflict, NotFound
from picker.store import Store, reservations, stock
from tests.store.test_stock import csv_qty


def reserved_of(store: Store, label: str) -> int:
    """The reserved column, read with plain SQL (not through picker's readers)."""
    from sqlalchemy import text

    with store.engine.connect() as conn:
        return int(conn.execute(text("SELECT reserved FROM parts WHERE label = :l"),
                                {"l": label}).scalar_one())


def assert_log_explains(store: Store, label: str) -> None:
    moves = stock.log(store, label)
    qty, held = csv_qty()[label], 0
    for m in moves:  # row by row, in the order they happened
        qty += m.delta
        held += m.reserved_delta
        assert (m.qty_after, m.reserved_after) == (qty, held)
        assert 0 <= held <= qty
    assert store.get(label)["qty"] == qty
    assert reserved_of(store, label) == held


def test_reserve_release_issue_and_the_log_explains_both(store: Store) -> None:
    start = csv_qty()["bip-gp-a"]
    mv = reservations.reserve(store, "bip-gp-a", 5, "alpha", "ann", note="for the preamp")
    assert (mv.delta, mv.reserved_delta, mv.qty_after, mv.reserved_after, mv.reason) == (
        0, 5, start, 5, "reserve")
    assert mv.available_after == start - 5
    # a reservation is not a take: on hand is unchanged
    assert store.get("bip-gp-a")["qty"] == start
    mv = reservations.issue(store, "bip-gp-a", 3, "alpha", "ben")
    assert (mv.delta, mv.reserved_delta, mv.qty_after, mv.reserved_after) == (-3, -3, start - 3, 2)
    mv = reservations.release(store, "bip-gp-a", 2, "alpha", "cat")
    assert (mv.delta, mv.reserved_delta, mv.qty_after, mv.reserved_after) == (0, -2, start - 3, 0)
    moves = stock.log(store, "bip-gp-a")
    assert [(m.reason, m.by, m.project) for m in moves] == [
        ("reserve", "ann", "alpha"), ("issue", "ben", "alpha"), ("release", "cat", "alpha")]
    assert moves[0].note == "for the preamp"
    assert_log_explains(store, "bip-gp-a")


def test_a_take_cannot_take_reserved_parts(store: Store) -> None:
    start = csv_qty()["jfet-gp-a"]
    reservations.reserve(store, "jfet-gp-a", 10, "alpha", "ann")
    before = store.checksum()
    with pytest.raises(Conflict, match=rf"only {start - 10} of jfet-gp-a left \({start} on "
                       r"hand, 10 reserved for projects\), \d+ asked for beta; nothing changed"):
        stock.take(store, "jfet-gp-a", start - 9, "beta", "ben")
    with pytest.raises(Conflict, match=rf"only {start - 10} of jfet-gp-a left"):
        reservations.reserve(store, "jfet-gp-a", start - 9, "beta", "ben")
    assert store.checksum() == before
    mv = stock.take(store, "jfet-gp-a", start - 10, "beta", "ben")  # all that is available
    assert (mv.qty_after, mv.reserved_after, mv.available_after) == (10, 10, 0)
    assert_log_explains(store, "jfet-gp-a")


def test_release_and_issue_are_limited_to_what_the_project_reserved(store: Store) -> None:
    reservations.reserve(store, "bip-ss-b", 3, "alpha", "ann")
    reservations.reserve(store, "bip-ss-b", 4, "beta", "ann")
    before = store.checksum()
    with pytest.raises(Conflict, match="alpha has only 3 of bip-ss-b reserved, so 4 cannot be "
                       "released; nothing changed"):
        reservations.release(store, "bip-ss-b", 4, "alpha", "ann")
    with pytest.raises(Conflict, match="beta has only 4 of bip-ss-b reserved, so 5 cannot be "
                       "issued"):
        reservations.issue(store, "bip-ss-b", 5, "beta", "ann")
    with pytest.raises(Conflict, match="gamma has only 0"):  # more than all reservations
        reservations.issue(store, "bip-ss-b", 8, "gamma", "ann")
    assert store.checksum() == before
    reservations.issue(store, "bip-ss-b", 4, "beta", "ann")
    assert reserved_of(store, "bip-ss-b") == 3


def test_counts_and_edits_cannot_go_below_what_is_reserved(store: Store) -> None:
    reservations.reserve(store, "bip-hv-a", 4, "alpha", "ann")
    before = store.checksum()
    with pytest.raises(Conflict, match="4 of bip-hv-a are reserved for projects, so a count "
                       "of 3 cannot stand"):
        stock.count(store, "bip-hv-a", 3, "ann")
    with pytest.raises(Conflict, match="bip-hv-a: the quantity on hand cannot go below what "
                       "projects have reserved"):
        store.edit("bip-hv-a", {"qty": 3})
    with pytest.raises(Conflict, match="below zero"):
        store.edit("bip-hv-a", {"qty": -1})
    assert store.checksum() == before
    store.edit("bip-hv-a", {"qty": 4}, by="ann")  # logged as a count, reserved carried
    assert stock.log(store, "bip-hv-a")[-1].reserved_after == 4
    assert_log_explains(store, "bip-hv-a")


def test_the_database_itself_refuses_a_negative_available(store: Store) -> None:
    """The CHECK holds even for a writer that bypasses picker's guarded statements."""
    from sqlalchemy import text
    from sqlalchemy.exc import IntegrityError

    before = store.checksum()
    for sql in ("UPDATE parts SET reserved = qty + 1 WHERE label = 'bip-gp-a'",
                "UPDATE parts SET reserved = -1 WHERE label = 'bip-gp-a'"):
        with pytest.raises(IntegrityError), store.engine.begin() as conn:
            conn.execute(text(sql))
    assert store.checksum() == before


BAD: list[tuple[str, Callable[[Store], object], type[Exception], str]] = [
    ("zero", lambda s: reservations.reserve(s, "bip-gp-a", 0, "p", "a"), BadValue, "QTY"),
    ("huge", lambda s: reservations.reserve(s, "bip-gp-a", 10**12, "p", "a"), BadValue, "hold"),
    ("no project", lambda s: reservations.release(s, "bip-gp-a", 1, " ", "a"), BadValue, "--for"),
    ("no name", lambda s: reservations.issue(s, "bip-gp-a", 1, "p", ""), BadValue, "--by"),
    ("no part", lambda s: reservations.reserve(s, "nope", 1, "p", "a"), NotFound, "nope"),
    ("no part", lambda s: reservations.release(s, "nope", 1, "p", "a"), NotFound, "nope"),
    ("no part", lambda s: reservations.issue(s, "nope", 1, "p", "a"), NotFound, "nope"),
    ("nothing held", lambda s: reservations.release(s, "bip-gp-a", 1, "p", "a"), Conflict,
     "p has only 0"),
    ("too many", lambda s: reservations.reserve(s, "bip-gp-a", 41, "p", "a"), Conflict,
     "only 40 of bip-gp-a left"),
]


@pytest.mark.parametrize(("case", "call", "error", "match"), BAD, ids=[c[0] for c in BAD])
def test_bad_reservations_are_refused_and_change_nothing(
    memory_store: Store, case: str, call: Callable[[Store], object], error: type[Exception],
    match: str,
) -> None:
    before = memory_store.checksum()
    with pytest.raises(error, match=match):
        call(memory_store)
    assert memory_store.checksum() == before


def test_projects_show_what_is_out_and_reserved(store: Store) -> None:
    stock.take(store, "bip-gp-a", 4, "alpha", "ann")
    stock.return_(store, "bip-gp-a", 1, "alpha", "ann")
    reservations.reserve(store, "bip-gp-a", 2, "alpha", "ann")
    reservations.issue(store, "bip-gp-a", 1, "alpha", "ann")
    reservations.reserve(store, "jfet-gp-a", 3, "beta", "ben")
    stock.take(store, "jfet-gp-a", 2, "gamma", "cat")
    stock.return_(store, "jfet-gp-a", 2, "gamma", "cat")  # all back: not listed
    stock.restock(store, "bip-gp-a", 5, "dan")  # no project: not listed
    # alpha: out 4 - 1 + 1 (issued) = 4, reserved 2 - 1 = 1
    got = [(h.project, h.part, h.out, h.reserved) for h in reservations.projects(store)]
    assert got == [("alpha", "bip-gp-a", 4, 1), ("beta", "jfet-gp-a", 0, 3)]
    assert [h.part for h in reservations.projects(store, "beta")] == ["jfet-gp-a"]
    assert reservations.projects(store, "nobody") == []
    # the parts out may come back: issued packages count as out
    stock.return_(store, "bip-gp-a", 4, "alpha", "ann")
    assert [(h.out, h.reserved) for h in reservations.projects(store, "alpha")] == [(0, 1)]
    # a removed part keeps what is out but holds no reservation any more
    stock.take(store, "bip-hv-a", 2, "delta", "dan")
    reservations.reserve(store, "bip-hv-a", 1, "delta", "dan")
    store.remove("bip-hv-a")
    assert [(h.part, h.out, h.reserved) for h in reservations.projects(store, "delta")] == [
        ("bip-hv-a", 2, 0)]


def test_reorder_is_due_when_available_reaches_the_level(store: Store) -> None:
    start = csv_qty()["cmos-rr-5v-a"]
    store.edit("cmos-rr-5v-a", {"reorder_level": start - 10})
    assert not stock.take(store, "cmos-rr-5v-a", 5, "p", "a").reorder_due
    mv = reservations.reserve(store, "cmos-rr-5v-a", 5, "p", "a")  # available start - 10
    assert mv.reorder_due and mv.reorder_level == start - 10
    mv = stock.take(store, "cmos-rr-5v-a", 1, "p", "a")
    assert mv.reorder_due and mv.available_after == start - 11
    assert reservations.issue(store, "cmos-rr-5v-a", 5, "p", "a").reorder_due
    assert not stock.take(store, "bip-gp-a", 1, "p", "a").reorder_due  # no level set
    low = {r["label"]: r for r in stock.low(store)}
    assert (low["cmos-rr-5v-a"]["available"], low["cmos-rr-5v-a"]["reserved"]) == (start - 11, 0)


def test_the_available_column_is_on_hand_minus_reserved(store: Store) -> None:
    reservations.reserve(store, "bip-gp-a", 7, "p", "a")
    reservations.reserve(store, "bip-hv-a", 6, "p", "a")
    labels, cols = store.parts_columns(["qty", "available"])
    want = {k: float(v) for k, v in csv_qty().items()}
    want["bip-gp-a"] -= 7
    want["bip-hv-a"] -= 6
    np.testing.assert_array_equal(cols["available"], [want[k] for k in labels])
    np.testing.assert_array_equal(cols["qty"], [csv_qty()[k] for k in labels])


def test_the_plan_reserves_the_best_part_with_enough_available(store: Store) -> None:
    # bip-ss-b has 4 channels a package: 6 channels need 2 packages, rounded up
    plan = reservations.plan(store, ["bip-ss-b", "bip-gp-a"], 6)
    assert (plan.part, plan.packages, plan.skipped) == ("bip-ss-b", 2, 0)
    reservations.reserve(store, "bip-hv-a", 6, "p", "a")  # nothing left available
    plan = reservations.plan(store, ["bip-hv-a", "gone", "jfet-gp-a"], 3)
    assert (plan.part, plan.packages, plan.skipped) == ("jfet-gp-a", 3, 2)
    with pytest.raises(Conflict, match="no part is accepted"):
        reservations.plan(store, [], 1)
    with pytest.raises(Conflict, match="none of the 1 accepted part"):
        reservations.plan(store, ["bip-hv-a"], 1)


@pytest.mark.parametrize("portable", [False, True], ids=["native", "portable"])
def test_backup_and_restore_carry_the_reservations(store: Store, db_url: str, tmp_path: Path,
                                                   portable: bool) -> None:
    from picker.store.backup import backup
    from picker.store.restore import restore

    reservations.reserve(store, "bip-gp-a", 6, "alpha", "ann")
    reservations.issue(store, "bip-gp-a", 2, "alpha", "ann")
    backup(store, tmp_path / "bak", portable=portable)
    target = Store.open(f"sqlite:///{tmp_path / 'copy.db'}", check=False)
    restore(target, tmp_path / "bak")
    assert reserved_of(target, "bip-gp-a") == 4
    assert [(m.reason, m.delta, m.reserved_delta, m.reserved_after)
            for m in stock.log(target, "bip-gp-a")] == [
        ("reserve", 0, 6, 6), ("issue", -2, -2, 4)]
    assert [(h.project, h.out, h.reserved) for h in reservations.projects(target)] == [
        ("alpha", 2, 4)]
    target.dispose()


# -- several people at the same moment --------------------------------------------------
def test_takes_reserves_releases_issues_and_edits_from_four_processes(db_url: str) -> None:
    """4 processes x 150 random movements over 2 parts (take, reserve, release, issue,
    parts edit qty=): afterwards, for every part, on hand = start + the logged on-hand
    changes, reserved = the logged reservation changes, and available never went below 0."""
    from tests.store import stock_workers
    from tests.store.test_stock import run_processes

    labels, start = ["race-a", "race-b"], 40
    seed = Store.create(db_url)
    for label in labels:
        seed.add({"label": label, "qty": start})
    seed.dispose()
    reports, elapsed = run_processes(
        stock_workers.reservations_mix,
        [(db_url, labels, 150, f"proj-{i}", 2000 + i) for i in range(4)])
    kinds: dict[str, int] = {}
    for r in reports:
        for k, v in r["ok"].items():
            kinds[k] = kinds.get(k, 0) + v
    print(f"\n4 x 150 reservation movements on {db_url.split(':')[0]}: {elapsed:.2f} s wall; "
          f"done {kinds}, refused {sum(len(r['refused']) for r in reports)}")
    assert [r["errors"] for r in reports] == [[], [], [], []]
    refused = [m for r in reports for m in r["refused"]]
    assert all(("only " in m and " left" in m) or "cannot go below what projects have reserved"
               in m for m in refused), refused[:3]
    assert all(kinds.get(k, 0) > 10 for k in ("take", "reserve", "release", "issue", "edit"))
    store = Store.open(db_url)
    rows: dict[str, int] = {}
    for label in labels:
        moves = stock.log(store, label)
        for m in moves:
            rows[m.reason] = rows.get(m.reason, 0) + 1
        qty, held = start, 0
        for m in moves:  # in log order every balance follows from the one before
            qty += m.delta
            held += m.reserved_delta
            assert (m.qty_after, m.reserved_after) == (qty, held)
            assert 0 <= held <= qty  # available never negative
        assert store.get(label)["qty"] == qty
        assert reserved_of(store, label) == held
        # each project's reservation in the log is what its process holds
        for r in reports:
            assert sum(m.reserved_delta for m in moves if m.project == r["project"]) == \
                r["held"][label]
    # one log row per movement made (an edit to the quantity already there writes none)
    assert {k: rows.get(k, 0) for k in ("take", "reserve", "release", "issue")} == {
        k: kinds.get(k, 0) for k in ("take", "reserve", "release", "issue")}
    assert rows.get("count", 0) <= kinds["edit"]
    store.dispose()
