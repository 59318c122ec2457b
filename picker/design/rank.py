"""Choose parts for a stage: run every check, rank the survivors, explain the rest.

A part is *accepted* when every check passes, *rejected* when any check fails, and
*unverified* when nothing fails but some check is unknown (``strict`` rejects those,
naming the unknown checks as failures). Accepted parts are ranked

- ``margin`` (default): by their smallest margin over the electrical checks, largest
  first (stock and supply are left out of this margin: logistics and a rating, not
  headroom in the stage);
- ``price``: cheapest first (unknown price last), then by margin;
- ``stock``: most channels on hand first, then by margin.

When nothing is accepted, the nearest misses say how far the requirement would have
to move for each of them to pass (picker.design.misses).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np

from picker.design.checks import CheckName, CheckTable, Parts, run_checks
from picker.design.requirement import Requirement
from picker.design.spec import Spec, minimum_specs

By = Literal["margin", "price", "stock"]
BY: tuple[By, ...] = ("margin", "price", "stock")


@dataclass(frozen=True)
class Entry:
    """One part's place in the outcome."""

    part: str
    row: int  # row in the check table
    fails: list[CheckName]
    unknown: list[CheckName]
    margin: float  # smallest margin over the ranked checks


@dataclass(frozen=True)
class Selection:
    """The outcome of checking every part against one stage."""

    spec: Spec
    table: CheckTable
    parts: Parts
    by: By
    strict: bool
    accepted: list[Entry]
    rejected: list[Entry]
    unverified: list[Entry]
    nearest: list[Any] = field(default_factory=list)  # picker.design.misses.NearMiss
    accepted_total: int = 0  # accepted before --top

    @property
    def requirement(self) -> Requirement:
        return self.spec.requirement

    @property
    def cautions(self) -> list[str]:
        return self.spec.cautions

    def to_json(self) -> dict[str, Any]:
        """The JSON shape of ``picker pick --json`` (SI base units)."""
        t = self.table
        return {
            "spec": self.spec.to_json(),
            "accepted": [{"part": e.part, "checks": t.records(e.row)} for e in self.accepted],
            "rejected": [{"part": e.part, "fails": list(e.fails), "checks": t.records(e.row)}
                         for e in self.rejected],
            "unverified": [{"part": e.part, "unknown": list(e.unknown),
                            "checks": t.records(e.row)} for e in self.unverified],
        }


def closeness(table: CheckTable) -> np.ndarray:
    """Per part, the product of its failing margins clipped to 0..1 (1 = nothing fails)."""
    out = np.ones(len(table))
    for r in table.results.values():
        with np.errstate(invalid="ignore"):
            m = np.where(np.isnan(r.margin), 1.0, np.clip(r.margin, 0.0, 1.0))
        out *= m
    return out


def select(
    parts_df: Any,
    req: Requirement,
    by: By = "margin",
    top: int | None = None,
    strict: bool = False,
    misses: int = 3,
) -> Selection:
    """Check every part of ``parts_df`` against ``req`` and sort them out (see above)."""
    from picker.errors import BadValue

    if by not in BY:
        raise BadValue("--by", by, "is not a ranking; use margin, price or stock")
    if top is not None and top < 1:
        raise BadValue("--top", top, "must be at least 1")
    spec = minimum_specs(req)
    parts = parts_df if isinstance(parts_df, Parts) else Parts(parts_df)
    table = run_checks(parts, spec)
    fail = table.any_status("fail")
    unknown = table.any_status("unknown")
    margin = table.rank_margin()
    close = closeness(table)

    def entries(mask: np.ndarray) -> list[Entry]:
        rows = np.flatnonzero(mask)
        fails = table.names_with("fail", rows)
        unk = table.names_with("unknown", rows)
        labels, margins = parts.labels[rows].tolist(), margin[rows].tolist()
        return [Entry(labels[k], int(i), fails[k] + (unk[k] if strict else []), unk[k],
                      margins[k]) for k, i in enumerate(rows)]

    ok = ~fail & ~unknown
    accepted = _ranked(entries(ok), by, parts)
    total = len(accepted)
    if top is not None:
        accepted = accepted[:top]
    bad = fail | unknown if strict else fail
    rejected = sorted(entries(bad), key=lambda e: (-close[e.row], e.part))
    unverified = [] if strict else sorted(entries(unknown & ~fail),
                                          key=lambda e: (-e.margin, e.part))
    sel = Selection(spec, table, parts, by, strict, accepted, rejected, unverified,
                    accepted_total=total)
    if not accepted and rejected and misses > 0:
        from picker.design.misses import nearest_misses

        sel.nearest.extend(nearest_misses(sel, misses))
    return sel


def _ranked(entries: list[Entry], by: By, parts: Parts) -> list[Entry]:
    def key(e: Entry) -> tuple[float, float, str]:
        if by == "price":
            price = parts["price"][e.row]
            first = np.inf if np.isnan(price) else price
        elif by == "stock":
            on_hand = parts["qty"][e.row] * np.nan_to_num(parts["channels"][e.row], nan=1.0)
            first = np.inf if np.isnan(on_hand) else -on_hand
        else:
            first = 0.0
        return (float(first), -e.margin, e.part)

    return sorted(entries, key=key)


def check_part(parts_df: Any, req: Requirement) -> tuple[Spec, CheckTable]:
    """The spec and the checks of the parts in ``parts_df`` (e.g. one row, for ``why``)."""
    spec = minimum_specs(req)
    return spec, run_checks(parts_df, spec)


__all__ = ["BY", "By", "Entry", "Selection", "check_part", "closeness", "select"]
