"""A filter section's network from standard values, with its tolerance spread.

Procedure (``design_filter``): the stage type's exact design (picker.stages, ``solve``)
takes its capacitors from the capacitor series first (default E12: capacitors are
stocked in E6 and E12, and fixing them first leaves the resistors, which come in finer
series, to absorb the error), then solves the exact resistors. Each resistor that sets
f0, Q or the gain is then snapped to one of its four nearest values in the resistor series
(two below, two above; default E24) and every combination is tried (at most 4⁴ = 256,
one array evaluation): the one kept has the smallest worst relative error of f0, Q and gain against the section asked for (ties: the first).
The same is done for the capacitors one and two series steps either side of the nominal
level (``LEVELS``), and the design with the smallest such error is kept: E-series are
nearly geometric, so f0 ∝ 1/√(R·R·C·C) moves in steps of about half a series step,
and a second capacitor choice often lands between them.

Sensitivity to tolerance, from the closed-form ideal transfer function of the stage type
(``biquad``), every resistor within ±``tolerance`` and every capacitor within
±``cap_tolerance``:

- worst case: every corner of the box (2^n, n <= 7 parts), the vertex method: exact for
  f0 and the gain (products of powers of the values, monotonic in each) and a close
  estimate for Q, which can bend inside the box;
- Monte Carlo: each part drawn uniformly inside its band (a conservative stand-in for an
  unknown production spread), 20,000 builds from a fixed seed; the 0.5th and 99.5th
  percentiles of each figure's error (99% of builds lie between them).
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from picker.design import series as es
from picker.design.requirement import Requirement
from picker.quantities import fmt
from picker.stages import kind
from picker.stages.filterbase import FilterType
from picker.stages.sections import Section

MC_SAMPLES = 20_000
MC_SEED = 60063
FIGURES = ("f0", "q", "gain")
#: Capacitance levels tried besides the nominal one (× the 10 kΩ level's capacitance):
#: about one E12 step either side, so the resistors stay within 1 kΩ .. 100 kΩ.
LEVELS = (1 / 1.2, 1.2, 1 / 1.5, 1.5)
#: How many series values on each side of an exact resistor the snapping tries.
NEIGHBOURS = 2


@dataclass(frozen=True)
class FilterNetwork:
    """A designed filter network: values, the section they make, and their spread."""

    topology: str
    series: es.SeriesName
    cap_series: str
    tolerance: float
    cap_tolerance: float
    target: Section
    exact: Mapping[str, float] = field(hash=False)  # before snapping (capacitors in series)
    network: Mapping[str, float] = field(hash=False)  # as built: for Requirement.network
    achieved: Section = field(hash=False, default=Section("lowpass", 1.0, 1.0, 1.0))
    worst_case: Mapping[str, tuple[float, float]] = field(hash=False, default_factory=dict)
    monte_carlo: Mapping[str, tuple[float, float]] = field(hash=False, default_factory=dict)
    notes: tuple[str, ...] = ()

    def error(self, figure: str) -> float:
        """Signed relative error of the nominal values' f0, Q or gain against the target."""
        got = {"f0": self.achieved.f0_hz, "q": self.achieved.q, "gain": self.achieved.gain}
        want = {"f0": self.target.f0_hz, "q": self.target.q, "gain": self.target.gain}
        return got[figure] / want[figure] - 1

    def as_json(self) -> dict[str, Any]:
        """``picker net --json`` for a filter (SI units; errors as ratios)."""
        def sec(s: Section) -> dict[str, Any]:
            return {"kind": s.kind, "f0_hz": s.f0_hz, "q": s.q, "gain": s.gain}

        return {
            "topology": self.topology, "series": self.series, "cap_series": self.cap_series,
            "tolerance": self.tolerance, "cap_tolerance": self.cap_tolerance,
            "target": sec(self.target), "achieved": sec(self.achieved),
            "error": {f: self.error(f) for f in FIGURES},
            "exact": {k: _num(v) for k, v in self.exact.items()},
            "values": {k: _num(v) for k, v in self.network.items()},
            "worst_case": {f: list(v) for f, v in self.worst_case.items()},
            "monte_carlo": {f: list(v) for f, v in self.monte_carlo.items()},
            "mc_samples": MC_SAMPLES, "notes": list(self.notes),
        }


def _num(v: float) -> float | str:
    return v if math.isfinite(v) else "inf"


def _figures(ft: FilterType, rs: float, values: Mapping[str, Any]) -> dict[str, Any]:
    k, wn, q = ft.biquad(rs, values)
    return {"f0": wn / (2 * math.pi), "q": q, "gain": k}


def _neighbours(x: float, series: es.SeriesName) -> list[float]:
    """The NEIGHBOURS series values nearest below x and above x (x itself when a member)."""
    cand = es.values(series, x / 3, x * 3)
    lo = cand[cand <= x * (1 + 1e-12)]
    hi = cand[cand >= x * (1 - 1e-12)]
    return sorted({float(v) for v in (*lo[-NEIGHBOURS:], *hi[:NEIGHBOURS])})


def _snap(ft: FilterType, sec: Section, rs: float, exact: Mapping[str, float],
          series: es.SeriesName) -> dict[str, float]:
    names = [n for n in ft.tuned_names if n in exact and 0 < exact[n] < math.inf]
    if not names:
        return dict(exact)
    combos = np.array(list(itertools.product(*(_neighbours(exact[n], series) for n in names))))
    trial = {**exact, **{n: combos[:, i] for i, n in enumerate(names)}}
    got = _figures(ft, rs, trial)
    want = {"f0": sec.f0_hz, "q": sec.q, "gain": sec.gain}
    err = np.max(np.broadcast_arrays(*(np.abs(np.asarray(got[f]) / want[f] - 1)
                                       for f in FIGURES)), axis=0)
    best = int(np.argmin(err))
    return {**exact, **{n: float(combos[best, i]) for i, n in enumerate(names)}}


def _worst(ft: FilterType, sec: Section, rs: float, values: Mapping[str, float]) -> float:
    got = _figures(ft, rs, values)
    want = {"f0": sec.f0_hz, "q": sec.q, "gain": sec.gain}
    return max(abs(float(np.asarray(got[f])) / want[f] - 1) for f in FIGURES)


def _parts(values: Mapping[str, float]) -> list[str]:
    """The components a tolerance moves (finite, non-zero)."""
    return [n for n, v in values.items() if 0 < v < math.inf]


def spread(ft: FilterType, rs: float, values: Mapping[str, float], tol: float, ctol: float
           ) -> tuple[dict[str, tuple[float, float]], dict[str, tuple[float, float]]]:
    """(worst case, Monte Carlo) relative errors of f0, Q and gain against the nominal
    values' own, each as (low, high) (module docstring)."""
    names = _parts(values)
    band = np.array([ctol if n.startswith("c") else tol for n in names])
    nominal = _figures(ft, rs, values)
    corners = np.array(list(itertools.product((-1.0, 1.0), repeat=len(names))))
    draws = np.random.default_rng(MC_SEED).uniform(-1.0, 1.0, (MC_SAMPLES, len(names)))
    out: list[dict[str, tuple[float, float]]] = []
    for signs, pick in ((corners, lambda e: (float(e.min()), float(e.max()))),
                        (draws, lambda e: (float(np.percentile(e, 0.5)),
                                           float(np.percentile(e, 99.5))))):
        moved = {**values, **{n: values[n] * (1 + signs[:, i] * band[i])
                              for i, n in enumerate(names)}}
        got = _figures(ft, rs, moved)
        out.append({f: pick(np.broadcast_to(np.asarray(got[f]) / nominal[f] - 1, len(signs)))
                    for f in FIGURES})
    return out[0], out[1]


def design_filter(req: Requirement, series: es.SeriesName = "E24") -> FilterNetwork:
    """The filter section's network from standard values (module docstring).

    Parameters
    ----------
    req : Requirement
        A filter stage (``req.is_filter``); a given ``network`` is analysed as it is.
    series : str
        IEC 60063 series of the resistors (default E24).

    Returns
    -------
    FilterNetwork
        Exact and snapped values (Ω, F), the section they make, worst-case and Monte
        Carlo errors; ``as_json()`` is ``picker net --json``.
    """
    ft = kind(req.topology)
    assert isinstance(ft, FilterType)
    sec = ft.target(req)
    rs = req.source_ohm
    exact = ft.solve(sec, rs, req.cap_series)
    notes: list[str] = []
    if req.network is not None:
        built = dict(req.network)
        notes.append("network as given (not designed)")
    else:
        built = _snap(ft, sec, rs, exact, series)
        for level in LEVELS:  # other capacitor choices may snap closer
            other = ft.solve(sec, rs, req.cap_series, level)
            if any(not v >= 0 for v in other.values()):
                continue
            snapped = _snap(ft, sec, rs, other, series)
            if _worst(ft, sec, rs, snapped) < _worst(ft, sec, rs, built) - 1e-12:
                exact, built = other, snapped
    if any(not v >= 0 for v in built.values()):
        from picker.errors import BadRequirement

        raise BadRequirement(f"--source: {rs:g} Ω leaves no room for the {req.topology} "
                             "section's input resistor; lower the source resistance")
    got = {k: float(np.asarray(v)) for k, v in _figures(ft, rs, built).items()}
    achieved = Section(sec.kind, got["f0"], got["q"], got["gain"])
    wc, mc = spread(ft, rs, built, req.tolerance, req.cap_tolerance)
    notes.append(f"capacitors from {req.cap_series} first, resistors solved exactly, then "
                 f"snapped to {series} (best of the neighbours for f0, Q and gain)")
    if req.topology == "vcvs-highpass" and rs > 0:
        notes.append(f"the source resistance {fmt(rs, 'resistance')} in series with c1 adds "
                     "a third pole the ideal section does not have; the response check "
                     "solves the whole circuit")
    return FilterNetwork(req.topology, series, req.cap_series, req.tolerance,
                         req.cap_tolerance, sec, exact, built, achieved, wc, mc, tuple(notes))


def with_filter_network(req: Requirement, series: es.SeriesName = "E24") -> Requirement:
    """``req`` with its filter network designed from standard values (a given one kept)."""
    if req.network is not None:
        return req
    return req.with_changes(network=dict(design_filter(req, series).network))


__all__ = ["FIGURES", "FilterNetwork", "MC_SAMPLES", "design_filter", "spread",
           "with_filter_network"]
