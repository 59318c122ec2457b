"""Reservations: packages set aside for a project without leaving the stockroom.

``parts.reserved`` counts the packages held for projects; what can be taken or
reserved is what is available, ``qty - reserved``, which the database keeps >= 0
(CHECK ``0 <= reserved <= qty``). Three movements, each ONE transaction with its row
in the movement log (reason, who, project, ``reserved_delta``):

- reserve: ``reserved += n`` where ``qty - reserved >= n`` (on hand unchanged);
- release: ``reserved -= n``, no more than the project has reserved;
- issue: reserved packages are taken, ``qty -= n`` and ``reserved -= n``, no more
  than the project has reserved (available unchanged).

So ``reserved = sum of the logged reserved_deltas`` and a project's reservation is
the sum over its rows. Every change is one guarded UPDATE (no read-modify-write), as
for a take (picker.store.stock); release and issue lock the part's row with that
UPDATE before they read the project's share from the log.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from picker.errors import Conflict
from picker.store.stock import (
    PROJECT_MAX,
    Movement,
    _checked,
    _log,
    _missing,
    _name,
    _now,
    _too_few,
    _transaction,
    busy_error,
    packages_needed,
)

if TYPE_CHECKING:
    from sqlalchemy.engine import Connection

    from picker.store.repo import Store


@dataclass(frozen=True)
class Holding:
    """What one project has of one part: ``out`` (taken + issued - returned) and
    ``reserved`` (held in the stockroom for it)."""

    project: str
    part: str
    out: int
    reserved: int

    def as_dict(self) -> dict[str, Any]:
        return {"project": self.project, "part": self.part, "out": self.out,
                "reserved": self.reserved}


@dataclass(frozen=True)
class Plan:
    """What `picker pick --reserve` reserves: ``packages`` of ``part``; ``skipped``
    better-ranked accepted parts had too few available."""

    part: str
    packages: int
    skipped: int


def reserve(store: Store, label: str, qty: int, project: str, by: str,
            note: str | None = None) -> Movement:
    """Set qty packages aside for a project; Conflict (nothing changed) if fewer are
    available."""
    from sqlalchemy import update

    from picker.store.models import parts

    n, who, text = _checked(qty, by, note)
    proj = _name(project, "--for", PROJECT_MAX, required=True)
    with _transaction(store) as conn:
        row = conn.execute(
            update(parts)
            .where(parts.c.label == label, parts.c.qty - parts.c.reserved >= n)
            .values(reserved=parts.c.reserved + n, updated_at=_now())
            .returning(parts.c.id, parts.c.qty, parts.c.reserved, parts.c.reorder_level)
        ).first()
        if row is None:
            raise _too_few(conn, label, n, proj, "asked to reserve")
        return _log(conn, row.id, label, 0, row.qty, proj, "reserve", who or "", text, _now(),
                    reserved_delta=n, reserved_after=int(row.reserved),
                    reorder_level=row.reorder_level)


def release(store: Store, label: str, qty: int, project: str, by: str,
            note: str | None = None) -> Movement:
    """Give back qty reserved packages of a project (no more than it has reserved)."""
    return _unreserve(store, label, qty, project, by, note, issue=False)


def issue(store: Store, label: str, qty: int, project: str, by: str,
          note: str | None = None) -> Movement:
    """Hand out qty packages a project has reserved: on hand and reserved both drop."""
    return _unreserve(store, label, qty, project, by, note, issue=True)


def _unreserve(store: Store, label: str, qty: int, project: str, by: str,
               note: str | None, *, issue: bool) -> Movement:
    from sqlalchemy import update

    from picker.store.models import parts

    n, who, text = _checked(qty, by, note)
    proj = _name(project, "--for", PROJECT_MAX, required=True) or ""
    values: dict[str, Any] = {"reserved": parts.c.reserved - n, "updated_at": _now()}
    if issue:
        values["qty"] = parts.c.qty - n  # qty >= reserved >= n: never negative
    with _transaction(store) as conn:
        # the guarded UPDATE locks the part's row before the project's share is read
        row = conn.execute(
            update(parts)
            .where(parts.c.label == label, parts.c.reserved >= n)
            .values(values)
            .returning(parts.c.id, parts.c.qty, parts.c.reserved, parts.c.reorder_level)
        ).first()
        part_id = row.id if row is not None else _part_id(conn, label)
        held = _held(conn, part_id, proj)
        if row is None or n > held:
            verb = "issued" if issue else "released"
            raise Conflict(
                f"{proj} has only {held} of {label} reserved, so {n} cannot be {verb}; "
                "nothing changed (`picker stock projects` lists the reservations)"
            )
        return _log(conn, row.id, label, -n if issue else 0, row.qty, proj,
                    "issue" if issue else "release", who or "", text, _now(),
                    reserved_delta=-n, reserved_after=int(row.reserved),
                    reorder_level=row.reorder_level)


def _part_id(conn: Connection, label: str) -> int:
    from sqlalchemy import select

    from picker.store.models import parts

    found = conn.execute(select(parts.c.id).where(parts.c.label == label)).scalar()
    if found is None:
        raise _missing(label)
    return int(found)


def _held(conn: Connection, part_id: int, project: str) -> int:
    """Packages of a part reserved for a project: the sum of its logged reservations."""
    from sqlalchemy import func, select

    from picker.store.models import movements

    m = movements.c
    return int(conn.execute(
        select(func.coalesce(func.sum(m.reserved_delta), 0))
        .where(m.part_id == part_id, m.project == project)
    ).scalar_one())


def projects(store: Store, project: str | None = None) -> list[Holding]:
    """Per project and part: packages out and packages reserved, from the movement log.

    out = taken + issued - returned; reserved = reserved - released - issued. Rows
    where both are 0 are left out; a removed part keeps what is out, but nothing can
    stay reserved in a drawer that is gone, so its reserved reads 0.
    """
    from sqlalchemy import case, func, or_, select
    from sqlalchemy.exc import OperationalError

    from picker.store.models import OUT_REASONS, movements, parts

    m = movements.c
    label = func.coalesce(parts.c.label, m.part_label)
    out = -func.sum(case((m.reason.in_(OUT_REASONS), m.delta), else_=0))
    held = func.sum(case((parts.c.id.is_(None), 0), else_=m.reserved_delta))
    stmt = (
        select(m.project, label, out, held)
        .select_from(movements.outerjoin(parts, parts.c.id == m.part_id))
        .where(m.project.is_not(None))
        .group_by(m.project, m.part_id, label)
        .having(or_(out != 0, held != 0))
        .order_by(m.project, label)
    )
    if project is not None:
        stmt = stmt.where(m.project == project.strip())
    try:
        with store.engine.connect() as conn:
            rows = conn.execute(stmt).all()
    except OperationalError as exc:
        raise busy_error(store.where, exc) from None
    return [Holding(r[0], r[1], int(r[2]), int(r[3])) for r in rows]


def plan(store: Store, candidates: Sequence[str], channels_needed: int) -> Plan:
    """The packages `picker pick --reserve` reserves: the best-ranked candidate whose
    available packages cover ceil(channels needed / channels per package).

    Parameters
    ----------
    candidates : accepted part labels, best first
    channels_needed : op-amp channels the design needs (``--qty``)
    """
    from sqlalchemy import select
    from sqlalchemy.exc import OperationalError

    from picker.store.models import parts

    if not candidates:
        raise Conflict("no part is accepted for this stage; nothing reserved")
    p = parts.c
    try:
        with store.engine.connect() as conn:
            for start in range(0, len(candidates), 500):
                chunk = list(candidates[start:start + 500])
                found = {r[0]: (r[1], int(r[2])) for r in conn.execute(
                    select(p.label, p.channels, p.qty - p.reserved).where(p.label.in_(chunk)))}
                for i, label in enumerate(chunk):
                    if label not in found:
                        continue
                    per, available = found[label]
                    n = packages_needed(channels_needed, per)
                    if available >= n:
                        return Plan(label, n, start + i)
    except OperationalError as exc:
        raise busy_error(store.where, exc) from None
    raise Conflict(
        f"none of the {len(candidates)} accepted part(s) has enough packages available for "
        f"{channels_needed} channel(s); nothing reserved (`picker stock low` and "
        "`picker stock projects` show what is short and what is reserved)"
    )
