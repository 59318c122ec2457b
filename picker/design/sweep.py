"""What-if sweeps: vary one value of the requirement and see, for every part, over which
range it passes and which check stops it at each edge.

The stage's network is designed once, for the requirement as given, and kept while
frequency, amplitude, load, source, temperature or capacitive load vary: the board
stays as built and the question is how far it stretches. Varying the gain changes the
network itself, so each gain gets its own designed network (say so in the output).

Every point is a full check of every part (picker.checks, the same definitions as
``pick``), vectorised over the parts; the points are taken one after another.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from functools import cached_property
from typing import Any

import numpy as np
import numpy.typing as npt

from picker.checks import CheckTable, Parts, run_checks
from picker.design.requirement import Requirement
from picker.design.spec import minimum_specs
from picker.errors import PickerError
from picker.quantities import Kind, fmt

Array = npt.NDArray[np.float64]

PASS, UNKNOWN, FAIL, IMPOSSIBLE = "pass", "unknown", "fail", "impossible"


@dataclass(frozen=True)
class Variable:
    """One requirement value a sweep may vary."""

    key: str  # as written after --vary
    kind: Kind
    log: bool  # log spacing by default
    what: str
    apply: Callable[[Requirement, float], Requirement]


def _amplitude(req: Requirement, v: float) -> Requirement:
    return req.with_changes(vout_pk=v, vin_pk=None)


def _temp(req: Requirement, v: float) -> Requirement:
    return req.with_changes(temp_max_c=v, temp_min_c=min(req.temp_min_c, v))


VARIABLES: dict[str, Variable] = {v.key: v for v in (
    Variable("freq", "frequency", True, "top signal frequency",
             lambda r, v: r.with_changes(freq_hz=v)),
    Variable("vout", "amplitude", True, "output amplitude (peak)", _amplitude),
    Variable("gain", "gain", True, "signal gain (a network designed for each gain)",
             lambda r, v: r.with_changes(gain=v, network=None)),
    Variable("load", "resistance", True, "load resistance",
             lambda r, v: r.with_changes(load_ohm=v)),
    Variable("source", "resistance", True, "source resistance",
             lambda r, v: r.with_changes(source_ohm=v)),
    Variable("temp", "temperature", False, "hottest ambient (°C)", _temp),
    Variable("cload", "capacitance", True, "capacitance at the output",
             lambda r, v: r.with_changes(cload_f=v)),
)}


@dataclass(frozen=True)
class Segment:
    """A run of consecutive points with one outcome for one part."""

    start: int
    stop: int  # inclusive
    status: str
    checks: tuple[str, ...]  # the checks that fail (or are unknown) there


#: Outcome codes of ``Sweep.codes``.
CODES = (PASS, UNKNOWN, FAIL, IMPOSSIBLE)


@dataclass(frozen=True)
class Sweep:
    """Every part's outcome at every point of one varied value."""

    variable: Variable
    values: Array  # (N,)
    labels: list[str]
    names: list[str]  # the checks, in report order
    failing: npt.NDArray[np.bool_]  # (N, C, P): check fails at the point
    unknown: npt.NDArray[np.bool_]  # (N, C, P): check unknown at the point
    impossible: npt.NDArray[np.bool_]  # (N,): no stage can be built at the point
    base: Requirement
    notes: list[str]
    log: bool  # the values are log-spaced

    @cached_property
    def codes(self) -> npt.NDArray[np.int8]:
        """(N, P) outcome codes, indices into ``CODES``: pass, unknown, fail, impossible."""
        out = np.where(self.failing.any(axis=1), 2, np.where(self.unknown.any(axis=1), 1, 0))
        out[self.impossible] = 3
        return out.astype(np.int8)

    def at(self, i: int, j: int) -> tuple[str, tuple[str, ...]]:
        """Part j's outcome at point i and the failing (else unknown) checks."""
        if self.impossible[i]:
            return IMPOSSIBLE, ()
        f = tuple(self.names[k] for k in np.flatnonzero(self.failing[i, :, j]))
        if f:
            return FAIL, f
        u = tuple(self.names[k] for k in np.flatnonzero(self.unknown[i, :, j]))
        return (UNKNOWN, u) if u else (PASS, ())

    def segments(self, j: int) -> list[Segment]:
        """Part j's runs of points with the same outcome and the same failing checks."""
        out: list[Segment] = []
        for i in range(len(self.values)):
            key = self.at(i, j)
            if out and (out[-1].status, out[-1].checks) == key:
                out[-1] = Segment(out[-1].start, i, *key)
            else:
                out.append(Segment(i, i, *key))
        return out

    def passes(self, j: int) -> list[tuple[float, float]]:
        """The ranges (first, last value) over which part j passes."""
        return [(float(self.values[s.start]), float(self.values[s.stop]))
                for s in self.segments(j) if s.status == PASS]

    def edges(self, j: int) -> list[dict[str, Any]]:
        """Each passing range of part j with what stops it just below and just above."""
        segs = self.segments(j)
        out = []
        for k, s in enumerate(segs):
            if s.status != PASS:
                continue
            below = segs[k - 1] if k > 0 else None
            above = segs[k + 1] if k + 1 < len(segs) else None
            out.append({
                "from": float(self.values[s.start]), "to": float(self.values[s.stop]),
                "below": _stop(below), "above": _stop(above)})
        return out

    def order(self) -> list[int]:
        """Parts with the most passing points first (then by label)."""
        passing = (self.codes == 0).sum(axis=0)
        return sorted(range(len(self.labels)), key=lambda j: (-int(passing[j]), self.labels[j]))

    def to_json(self) -> dict[str, Any]:
        """``picker sweep --json``: the values, and per part its outcome at each point,
        the failing checks there and its passing ranges with the limits at their edges."""
        n = len(self.values)
        parts = []
        for j, label in enumerate(self.labels):
            at = [self.at(i, j) for i in range(n)]
            parts.append({"part": label, "status": [a[0] for a in at],
                          "checks": [list(a[1]) for a in at], "passes": self.edges(j)})
        return {"vary": self.variable.key, "values": [float(v) for v in self.values],
                "log": self.log, "notes": self.notes, "parts": parts}

    def value_text(self, v: float) -> str:
        return fmt(v, _kind(self.variable), 4)


def _stop(seg: Segment | None) -> list[str] | str | None:
    """What an edge meets: the failing checks, 'unknown: ...', the stage impossible, or
    None at the end of the swept range."""
    if seg is None:
        return None
    if seg.status == IMPOSSIBLE:
        return IMPOSSIBLE
    return list(seg.checks) if seg.status == FAIL else [f"unknown: {c}" for c in seg.checks]


def values(low: float, high: float, points: int, log: bool) -> Array:
    """``points`` values from low to high, log- or linearly spaced."""
    if log:
        return np.geomspace(low, high, points)
    return np.linspace(low, high, points)


def sweep(base: Requirement, parts: Parts, variable: Variable, points: npt.ArrayLike,
          built: Callable[[Requirement], Requirement], *, log: bool = True) -> Sweep:
    """Check every part at every point (module docstring).

    Parameters
    ----------
    base : Requirement
        The stage as built (picker.api.built), network included.
    parts : Parts
    variable : Variable
        What varies (``VARIABLES``).
    points : array_like
        The values it takes (SI units).
    built : callable
        Designs the network of a requirement without one (for a varied gain).
    log : bool
        Whether the points are log-spaced (how the chart draws them).
    """
    vals = np.asarray(points, dtype=float)
    tables: list[CheckTable | None] = []
    notes: list[str] = []
    for v in vals:
        try:
            req = variable.apply(base, float(v))
            if req.network is None:
                req = built(req)
            req.validate(lambda k: f"--{k}")
            tables.append(run_checks(parts, minimum_specs(req)))
        except PickerError as exc:
            tables.append(None)
            if len(notes) < 3:
                notes.append(f"{fmt(float(v), _kind(variable), 4)}: {exc}")
    names = list(dict.fromkeys(n for t in tables if t is not None for n in t.results))
    shape = (len(vals), len(names), len(parts))
    failing = np.zeros(shape, dtype=bool)
    unknown = np.zeros(shape, dtype=bool)
    for i, t in enumerate(tables):
        if t is None:
            continue
        for k, name in enumerate(names):
            r = t.results.get(name)
            if r is not None:
                with np.errstate(invalid="ignore"):
                    np.less(r.margin, 1, out=failing[i, k])
                np.isnan(r.margin, out=unknown[i, k])
    if variable.key == "gain":
        notes.insert(0, "each gain gets its own E-series network")
    impossible = np.array([t is None for t in tables], dtype=bool)
    return Sweep(variable, vals, [str(x) for x in parts.labels], names, failing, unknown,
                 impossible, base, notes, log)


def _kind(variable: Variable) -> Kind:
    return "voltage" if variable.kind == "amplitude" else variable.kind


__all__ = ["CODES", "FAIL", "IMPOSSIBLE", "PASS", "UNKNOWN", "VARIABLES", "Segment", "Sweep",
           "Variable", "sweep", "values"]
