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

The three lists are sorted with numpy and kept as row numbers (picker.design.ordering):
an entry is built only when it is read, so a pick over a catalogue costs little more
than its checks.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Literal, TypeVar

import numpy as np

from picker.checks import CheckTable, Parts, run_checks
from picker.checks.core import joined
from picker.design.ordering import Entries, Rows, label_rank, order_rows
from picker.design.requirement import Requirement
from picker.design.spec import Spec, minimum_specs

if TYPE_CHECKING:
    from picker.design.netparts import PartNetworks

T = TypeVar("T")

By = Literal["margin", "price", "stock"]
BY: tuple[By, ...] = ("margin", "price", "stock")


@dataclass(frozen=True)
class Entry:
    """One part's place in the outcome."""

    part: str
    row: int  # row in the check table
    fails: list[str]
    unknown: list[str]
    margin: float  # smallest margin over the ranked checks


@dataclass(frozen=True)
class Selection:
    """The outcome of checking every part against one stage."""

    spec: Spec
    table: CheckTable
    parts: Parts
    by: By
    strict: bool
    accepted: Sequence[Entry]  # lists or Entries (built when read)
    rejected: Sequence[Entry]
    unverified: Sequence[Entry]
    nearest: list[Any] = field(default_factory=list)  # picker.design.misses.NearMiss
    accepted_total: int = 0  # accepted before --top
    assumed: dict[str, np.ndarray] = field(default_factory=dict)  # field -> rows filled in
    # with a network designed for each part: each part's network and the stage (Spec)
    # of each distinct network, in the order of ``networks.networks``
    networks: PartNetworks | None = None
    specs: tuple[Spec, ...] = ()

    def spec_for(self, row: int) -> Spec:
        """The stage part ``row`` was checked in (its own network, or the shared one)."""
        if self.networks is None:
            return self.spec
        return self.specs[int(self.networks.group[row])]

    def requirement_for(self, row: int) -> Requirement:
        return self.spec_for(row).requirement

    def _by_spec(self, rows: Sequence[int], compute: Callable[[Parts, Spec], Sequence[T]]
                 ) -> list[T]:
        """``compute(parts of rows, spec)`` with each row in its own stage, in row order
        (one call per distinct network among ``rows``, not one per part)."""
        idx = np.asarray(rows, dtype=np.intp)
        if self.networks is None:
            return list(compute(self.parts.take(idx), self.spec))
        out: list[Any] = [None] * len(idx)
        groups = self.networks.group[idx]
        for g in np.unique(groups).tolist():
            where = np.flatnonzero(groups == g)
            for k, value in zip(where.tolist(), compute(self.parts.take(idx[where]),
                                                         self.specs[g]), strict=True):
                out[k] = value
        return out

    def assumed_for(self, row: int) -> dict[str, float]:
        """The values assumed for one row (field -> SI value), by the user's --assume."""
        return {f: float(self.parts[f][row]) for f, m in self.assumed.items() if m[row]}

    @property
    def requirement(self) -> Requirement:
        return self.spec.requirement

    @property
    def cautions(self) -> list[str]:
        return self.spec.cautions

    def phases(self, rows: Sequence[int]) -> list[float | None]:
        """The phase shift of each row's closed-loop gain at the top frequency, degrees
        from the ideal (None: unknown), computed for these rows only."""
        from picker.checks.gain import phase_deg

        if not len(rows):
            return []
        if self.spec.requirement.is_filter:  # the real response against the network's
            from picker.checks.filters import phase_deg as filter_phase

            phase_deg = filter_phase  # noqa: F811
        ph = self._by_spec(rows, lambda p, s: phase_deg(p, s).tolist())
        return [None if not np.isfinite(x) else float(x) for x in ph]

    @property
    def shows_cmrr(self) -> bool:
        """Whether the stage has a common-mode rejection figure (a difference stage)."""
        return "common_mode_rejection" in self.table.results

    def cmrr(self, rows: Sequence[int]) -> list[float | None]:
        """The stage's worst-case CMRR with each row's part, dB (None: unknown),
        picker.checks.rejection; computed for these rows only."""
        from picker.checks.rejection import stage_db

        if not len(rows):
            return []
        return self._by_spec(rows, stage_db)

    def stability(self, rows: Sequence[int]) -> list[tuple[float | None, float | None]]:
        """(phase margin in degrees, closed-loop peaking in dB) of each row in the stage
        (None: unknown), computed for these rows only (picker.checks.stability)."""
        from picker.checks.stability import stage_margins

        if not len(rows):
            return []
        def margins(parts: Parts, spec: Spec) -> list[tuple[float, float]]:
            mg = stage_margins(parts, spec.stage)
            return list(zip(mg.pm_deg.tolist(), mg.peaking_db.tolist(), strict=True))

        return [(None if not np.isfinite(p) else float(p), None if not np.isfinite(k) else float(k))
                for p, k in self._by_spec(rows, margins)]

    def stability_fixes(self, rows: Sequence[int]) -> list[str | None]:
        """For each row failing on its phase margin, the fix as one sentence (None: no
        fix found, or the row does not fail on it)."""
        from picker.checks.stability import fixes

        if not len(rows):
            return []
        found = self._by_spec(rows, fixes)
        return [None if f is None else f.sentence() for f in found]

    def to_json(self, listed: int | None = None) -> dict[str, Any]:
        """The JSON shape of ``picker pick --json`` (SI base units).

        ``listed`` caps the rejected and unverified lists (closest first); with it the
        JSON also has ``counts`` (accepted, rejected, unverified before any cap).
        """
        return {k: list(v) if k in _LISTS else v for k, v in self.json_items(listed).items()}

    def json_items(self, listed: int | None = None) -> dict[str, Any]:
        """``to_json`` with the three lists as iterators that build their records in
        batches while they are written (picker.report.tables.to_json_rows)."""
        t = self.table
        rejected = self.rejected if listed is None else self.rejected[:listed]
        unverified = self.unverified if listed is None else self.unverified[:listed]

        def items(entries: Sequence[Entry], extra: str | None) -> Iterator[dict[str, Any]]:
            for start in range(0, len(entries), 1000):
                chunk = list(entries[start:start + 1000])
                rows = [e.row for e in chunk]
                phases = self.phases(rows)
                cmrr = self.cmrr(rows) if self.shows_cmrr else [None] * len(rows)
                stab = (self.stability(rows) if "stability" in t.results
                        else [(None, None)] * len(rows))
                for e, checks, ph, cm, (pm, peak) in zip(chunk, t.records_for(rows), phases,
                                                         cmrr, stab, strict=True):
                    item: dict[str, Any] = {"part": e.part}
                    if extra is not None:
                        item[extra] = list(getattr(e, extra))
                    item["phase_at_f_deg"] = ph
                    if "stability" in t.results:
                        item["phase_margin_deg"] = pm
                        item["peaking_db"] = peak
                    if self.shows_cmrr:
                        item["cmrr_db"] = cm
                    if self.assumed:
                        item["assumed"] = self.assumed_for(e.row)
                    if self.networks is not None:
                        item["network"] = self.networks.record(e.row)
                    item["checks"] = checks
                    yield item

        out: dict[str, Any] = {"spec": self.spec.to_json(),
                               "accepted": items(self.accepted, None),
                               "rejected": items(rejected, "fails"),
                               "unverified": items(unverified, "unknown")}
        out["nearest"] = [n.to_json() for n in self.nearest]
        if listed is not None:
            out["counts"] = {"accepted": self.accepted_total, "rejected": len(self.rejected),
                             "unverified": len(self.unverified)}
        return out


_LISTS = ("accepted", "rejected", "unverified")


def closeness(table: CheckTable) -> np.ndarray:
    """Per part, the product of its failing margins clipped to 0..1 (1 = nothing fails)."""
    out = np.ones(len(table))
    for r in table.results.values():
        m = np.maximum(r.margin, 0.0)  # NaN stays NaN ...
        out *= np.fmin(m, 1.0, out=m)  # ... and fmin turns it into 1 (unknown: no penalty)
    return out


def select(
    parts_df: Any,
    req: Requirement,
    by: By = "margin",
    top: int | None = None,
    strict: bool = False,
    misses: int | None = None,
    networks: PartNetworks | None = None,
) -> Selection:
    """Check every part of ``parts_df`` against ``req`` and sort them out (see above).

    ``misses``: how many of the closest rejected parts get their nearest misses; None
    (the default) gives 3 when nothing is accepted and none otherwise. ``networks``:
    each part's own network (picker.design.netparts); each part is then checked in the
    stage with its network (``req`` with the shared one gives the spec shown)."""
    from picker.errors import BadValue

    if by not in BY:
        raise BadValue("--by", by, "is not a ranking; use margin, price or stock")
    if top is not None and top < 1:
        raise BadValue("--top", top, "must be at least 1")
    spec = minimum_specs(req)
    parts = parts_df if isinstance(parts_df, Parts) else Parts(parts_df)
    parts, assumed = parts.assuming(req.assume)
    specs: tuple[Spec, ...] = ()
    if networks is None:
        table = run_checks(parts, spec)
    else:
        specs = tuple(minimum_specs(req.with_changes(network=dict(net)))
                      for net in networks.networks)
        pieces = []
        for g, s in enumerate(specs):  # one vectorised run per distinct network
            rows = np.flatnonzero(networks.group == g)
            if len(rows):
                pieces.append((rows, run_checks(parts.take(rows), s)))
        table = joined(parts.labels, pieces)
    fail, unknown = table.verdicts()
    margin = table.rank_margin()
    rank = parts.memo("label_rank", lambda: label_rank(parts.labels))

    def make(rows: Rows) -> list[Entry]:
        fails = table.names_with("fail", rows)
        unk = table.names_with("unknown", rows)
        labels, margins = parts.labels[rows].tolist(), margin[rows].tolist()
        return [Entry(labels[k], i, fails[k] + (unk[k] if strict else []), unk[k], margins[k])
                for k, i in enumerate(rows.tolist())]

    def ordered(mask: np.ndarray, *keys: np.ndarray) -> Entries[Entry]:
        return Entries(order_rows(np.flatnonzero(mask), keys, rank), make)

    accepted = ordered(~fail & ~unknown, *_rank_keys(by, parts, margin))
    total = len(accepted)
    if top is not None:
        accepted = accepted[:top]
    rejected = ordered(fail | unknown if strict else fail, -closeness(table))
    unverified = ordered(np.zeros(len(parts), dtype=bool) if strict else unknown & ~fail,
                         -margin)
    sel = Selection(spec, table, parts, by, strict, accepted, rejected, unverified,
                    accepted_total=total, assumed=assumed, networks=networks, specs=specs)
    wanted = (3 if not accepted else 0) if misses is None else misses
    if rejected and wanted > 0:
        from picker.design.misses import nearest_misses

        sel.nearest.extend(nearest_misses(sel, wanted, looked_at=max(10, wanted)))
    return sel


def _rank_keys(by: By, parts: Parts, margin: np.ndarray) -> list[np.ndarray]:
    """Sort keys of the accepted parts, first key first (ties by label afterwards)."""
    if by == "price":
        price = parts["price"]
        return [np.where(np.isnan(price), np.inf, price), -margin]
    if by == "stock":
        on_hand = parts["available"] * np.where(np.isnan(parts["channels"]), 1.0, parts["channels"])
        return [np.where(np.isnan(on_hand), np.inf, -on_hand), -margin]
    return [-margin]


__all__ = ["BY", "By", "Entry", "Selection", "closeness", "select"]
