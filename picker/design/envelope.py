"""The operating envelope: the largest output amplitude each part supports in a stage,
against frequency, and the check that sets it.

The envelope is read from the registered checks themselves (picker.checks), so it can
never disagree with ``pick``. Each check declares how its verdict depends on the signal
amplitude (``Check.amplitude``):

- ``proportional``: the need grows in proportion to the amplitude while the part's side
  does not (swing, input common-mode excursion, slew rate, output current). Its margin
  is has/need, so at amplitude Vp the check's edge is ``Vp·margin``: e.g. the slew edge
  SR/(2π·f), the swing edge the output's reach under load.
- ``independent``: the verdict does not depend on the amplitude (gain accuracy, phase,
  offset, noise, supply, stock). Where it fails at a frequency the part supports no
  amplitude there: the gain-accuracy edge is the frequency above which the gain error
  exceeds the budget.
- ``none``: not about the signal (stock): left out.
- ``other``: neither (e.g. a limit that grows faster than the amplitude). Such checks
  are not drawn; the envelope names them so nobody reads the chart as the whole story.

The envelope shows the parts' own limits: the design margin is set to 1 (bare
minimums), and the requirement's (frequency, amplitude) is marked against them. Every
other value of the requirement (gain, network, load, rails, temperature) is kept.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property
from typing import Any

import numpy as np
import numpy.typing as npt

from picker.checks import Parts, applicable, run_checks
from picker.design.requirement import Requirement
from picker.design.spec import minimum_specs

Array = npt.NDArray[np.float64]

#: Frequency points per decade of the envelope's grid.
PER_DECADE = 12


@dataclass(frozen=True)
class Envelope:
    """Largest output amplitude per part and frequency (V peak; NaN = unknown)."""

    requirement: Requirement  # the stage, as built, with margin 1
    labels: list[str]
    freqs_hz: Array  # (F,)
    edges: dict[str, Array]  # proportional check -> (F, P) amplitude edge, V peak
    cutoffs: dict[str, Array]  # independent check -> (F, P) margin (< 1: fails there)
    left_out: list[str]  # applicable checks the envelope does not draw

    @cached_property
    def amplitude(self) -> Array:
        """(F, P): the largest amplitude every drawn check allows (0 where an
        amplitude-independent check fails; NaN where a needed value is unknown)."""
        stack = np.stack(list(self.edges.values())) if self.edges else np.full(
            (1, *self.shape), np.inf)
        with np.errstate(invalid="ignore"):
            out = np.min(stack, axis=0)  # NaN propagates: an unknown edge is unknown
        for m in self.cutoffs.values():
            out = np.where(m < 1, 0.0, np.where(np.isnan(m), np.nan, out))
        return out  # type: ignore[no-any-return]

    @property
    def shape(self) -> tuple[int, int]:
        return len(self.freqs_hz), len(self.labels)

    def limit(self, i: int, j: int) -> str:
        """The check that sets the envelope at frequency i for part j ('' when none)."""
        for name, m in self.cutoffs.items():
            if m[i, j] < 1:
                return name
        unknown = [n for n, e in self.edges.items() if np.isnan(e[i, j])]
        unknown += [n for n, m in self.cutoffs.items() if np.isnan(m[i, j])]
        if unknown:
            return "unknown: " + ", ".join(unknown)
        if not self.edges:
            return ""
        return min(self.edges, key=lambda n: self.edges[n][i, j])

    def cutoff_hz(self, name: str, j: int) -> float | None:
        """The lowest grid frequency where the independent check ``name`` fails for part j
        (None: passes over the whole grid or is unknown there)."""
        m = self.cutoffs[name][:, j]
        bad = np.flatnonzero(m < 1)
        return float(self.freqs_hz[bad[0]]) if len(bad) else None

    def to_json(self) -> dict[str, Any]:
        """``picker envelope --json``: per part, the largest amplitude (V peak) at each
        frequency (Hz) with the check that sets it, and each check's own edge."""
        amp = self.amplitude
        req = self.requirement
        parts = []
        for j, label in enumerate(self.labels):
            parts.append({
                "part": label,
                "amplitude_v": [_num(x) for x in amp[:, j]],
                "limit": [self.limit(i, j) for i in range(len(self.freqs_hz))],
                "edges_v": {n: [_num(x) for x in e[:, j]] for n, e in self.edges.items()},
                "fails_above_hz": {n: self.cutoff_hz(n, j) for n in self.cutoffs},
            })
        return {"freqs_hz": [float(f) for f in self.freqs_hz],
                "requirement": {"freq_hz": req.freq_hz, "vout_v": req.vout},
                "margin": 1.0, "not_drawn": self.left_out, "parts": parts}


def _num(x: float) -> float | None:
    return float(x) if math.isfinite(x) else None


def grid(req: Requirement, low_hz: float | None = None, high_hz: float | None = None,
         per_decade: int = PER_DECADE) -> Array:
    """Log-spaced frequencies around the requirement's (default: three decades below
    to two above), the requirement's own frequency included exactly."""
    f = req.freq_hz
    lo = low_hz if low_hz is not None else max(f / 1e3, 1e-3)
    hi = high_hz if high_hz is not None else min(f * 1e2, 1e9)
    if not (0 < lo < hi):
        from picker.errors import BadRequirement

        raise BadRequirement(f"--span: {lo:g} Hz .. {hi:g} Hz is not a range of frequencies "
                             "above zero, low first; e.g. --span 10Hz..1MHz")
    n = max(2, math.ceil(math.log10(hi / lo) * per_decade) + 1)
    out = np.geomspace(lo, hi, n)
    if lo <= f <= hi:
        out = np.unique(np.append(out, f))
    return out


def envelope(req: Requirement, parts: Parts, freqs_hz: npt.ArrayLike) -> Envelope:
    """The envelope of ``parts`` in the stage ``req`` (already built, with its network).

    Parameters
    ----------
    req : Requirement
        The stage as built (picker.api.built); its margin is replaced by 1.
    parts : Parts
        The parts to draw.
    freqs_hz : array_like
        Frequencies, Hz.

    Returns
    -------
    Envelope
    """
    bare = req.with_changes(margin=1.0)
    freqs = np.asarray(freqs_hz, dtype=float)
    spec = minimum_specs(bare)
    rule = {c.name: c.amplitude_rule(spec) for c in applicable(spec)}
    edges = {n: np.empty((len(freqs), len(parts))) for n, r in rule.items()
             if r == "proportional"}
    cutoffs = {n: np.empty((len(freqs), len(parts))) for n, r in rule.items()
               if r == "independent"}
    vp = bare.vout
    for i, f in enumerate(freqs):
        table = run_checks(parts, minimum_specs(bare.with_changes(freq_hz=float(f))))
        for n in edges:
            edges[n][i] = vp * table.results[n].margin
        for n in cutoffs:
            cutoffs[n][i] = table.results[n].margin
    left = [n for n, r in rule.items() if r == "other"]
    return Envelope(bare, list(parts.labels), freqs, edges, cutoffs, left)


__all__ = ["PER_DECADE", "Envelope", "envelope", "grid"]
