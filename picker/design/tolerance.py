"""How far resistor tolerance can move a stage's gain: worst-case corners and Monte Carlo.

Worst case: every stage type's ideal gain (picker.stages) is monotonic in each
resistor (rf, r2, r4 raise the gain; rg, r1, r3 lower it: each appears once in a
numerator or once in a denominator of a positive ratio), so its extremes over the box
R·(1 ± t) lie at corners; all 2^n corners are evaluated at once.

Monte Carlo: each physical resistor (a position made of two resistors draws both) is
drawn uniformly inside its tolerance band, a conservative stand-in for an unknown
production spread that can never leave the worst-case box. The generator is seeded,
so a result repeats exactly.
"""

from __future__ import annotations

import itertools
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np
import numpy.typing as npt

from picker.design.requirement import Topology
from picker.stages import kind

Array = npt.NDArray[np.float64]
How = Literal["single", "series", "parallel"]

#: Standard resistor tolerances, largest first (IEC 60062 letter codes J G F D C B A).
STANDARD_TOLERANCES = (0.05, 0.02, 0.01, 0.005, 0.0025, 0.001, 0.0005)
MC_SAMPLES = 200_000
MC_SEED = 60063


@dataclass(frozen=True)
class Slot:
    """One network position: a single resistor or two in series or parallel."""

    name: str
    ohms: float
    parts: tuple[float, ...]
    how: How = "single"

    @classmethod
    def single(cls, name: str, ohms: float) -> Slot:
        return cls(name, float(ohms), (float(ohms),), "single")


def combine(parts: Sequence[npt.ArrayLike], how: How) -> Array:
    """The resistance of parts in series (sum) or parallel (1/Σ(1/R))."""
    arrs = [np.asarray(p, float) for p in parts]
    if how == "parallel":
        return np.asarray(1.0 / sum(1.0 / p for p in arrs), float)
    return np.asarray(sum(arrs), float)


def worst_case(topology: Topology, rs: float, resistors: Mapping[str, float],
               tol: float) -> tuple[float, float]:
    """(lowest, highest) gain magnitude over all tolerance corners R·(1 ± tol).

    A position of two resistors in series or parallel scales by the same factor when
    both move together, and its extremes are those two corners, so positions are
    varied as single resistors here.
    """
    names = [n for n in kind(topology).gain_names if n in resistors]
    if not names:
        return 1.0, 1.0
    signs = np.array(list(itertools.product((-1.0, 1.0), repeat=len(names))))
    corner = {n: resistors[n] * (1 + tol * signs[:, i]) for i, n in enumerate(names)}
    g = np.broadcast_to(kind(topology).ideal_gain(rs, {**resistors, **corner}), (len(signs),))
    return float(g.min()), float(g.max())


def monte_carlo(topology: Topology, rs: float, slots: Sequence[Slot], tol: float,
                n: int = MC_SAMPLES, seed: int = MC_SEED) -> Array:
    """Gain magnitudes of ``n`` builds with every resistor uniform in R·(1 ± tol)."""
    rng = np.random.default_rng(seed)
    drawn: dict[str, npt.ArrayLike] = {}
    for s in slots:
        if s.name not in kind(topology).gain_names:
            drawn[s.name] = s.ohms
            continue
        parts = [p * rng.uniform(1 - tol, 1 + tol, n) for p in s.parts]
        drawn[s.name] = combine(parts, s.how) if len(parts) > 1 else parts[0]
    if topology == "follower":
        return np.ones(n)
    return np.broadcast_to(kind(topology).ideal_gain(rs, drawn), (n,)).copy()


def p99_error(gains: npt.ArrayLike, target: float) -> float:
    """99th percentile of the relative gain error |G/target - 1|."""
    return float(np.percentile(np.abs(np.asarray(gains, float) / target - 1), 99))


def tolerance_needed(nominal_error: float, wc_error: float, tol: float,
                     budget: float) -> float | None:
    """The largest standard tolerance whose worst case fits the budget (None: none does).

    The worst-case deviation from nominal grows in proportion to the tolerance (to
    first order), so t_needed = t·(budget - |nominal|)/(worst - |nominal|).
    """
    spread = wc_error - abs(nominal_error)
    room = budget - abs(nominal_error)
    if room <= 0:
        return None
    if spread <= 0:
        return STANDARD_TOLERANCES[0]
    limit = tol * room / spread
    for t in STANDARD_TOLERANCES:
        if t <= limit * (1 + 1e-9):
            return t
    return None


__all__ = ["MC_SAMPLES", "MC_SEED", "STANDARD_TOLERANCES", "Slot", "combine", "monte_carlo",
           "p99_error", "tolerance_needed", "worst_case"]
