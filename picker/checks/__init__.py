"""The check registry: every check is one ``Check`` definition beside its physics.

A definition says everything about one check: its name, the part fields it reads,
which of them must be known for a pass in a given stage, when it applies, its
vectorised computation, the minimum it implies for ``picker spec``, and its formula with
numbers for ``--explain`` and ``picker why``. ``spec``, ``pick``, ``why``, JSON and the
text report all read the definitions registered here, in report order.

Adding a check: write its definition in the module of its family (``limits``,
``accuracy``) and list it in ``CHECKS`` below.

The one rule every check obeys (applied here, not in each check): a part that lacks a
value the check needs in this stage, and does not already fail on what is known, is
``unknown`` for that check, never passed on an ideal stand-in.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Literal

import numpy as np

from picker.checks.core import (
    STATUS_WORDS,
    CheckResult,
    CheckTable,
    Parts,
    Status,
    unknown_unless_failing,
)
from picker.quantities import Kind

if TYPE_CHECKING:
    from picker.design.spec import Explained, Spec


Amplitude = Literal["proportional", "independent", "other", "none"]


def _always(spec: Spec) -> bool:
    return True


@dataclass(frozen=True)
class Check:
    """One check, defined once.

    Attributes
    ----------
    name : str
        The name in every output (``slew``, ``gain_accuracy``, ...).
    kind : Kind
        The unit of ``need`` and ``has``.
    reads : tuple of str
        Every part field the computation may read (the pick reads no more columns).
    needs : callable (Spec) -> tuple of str
        The fields that must be known for this check to pass in this stage.
    run : callable (Parts, Spec) -> CheckResult
        The vectorised computation, one array element per part.
    formula : str
        The formula, written once; ``--explain`` and ``why`` print it.
    explain : callable (Spec) -> list of Explained
        The need with its numbers (``expression = need``; first row, named after the
        check), then any minimum specifications it implies (e.g. A0, Rin, GBW).
    detail : callable (Spec, Parts, int) -> str
        The part's side with its numbers, for ``why`` (one part, text only).
    applies : callable (Spec) -> bool
        Whether the check applies to the stage.
    ranked : bool
        Whether its margin measures headroom (enters the ranking margin).
    amplitude : str or callable (Spec) -> str
        How the verdict depends on the signal amplitude, for the operating envelope
        (picker.design.envelope): ``proportional`` (need ∝ amplitude, the part's side
        not), ``independent``, ``other``, or ``none`` (not about the signal: stock).
    """

    name: str
    kind: Kind
    reads: tuple[str, ...]
    run: Callable[[Parts, Spec], CheckResult]
    formula: str
    explain: Callable[[Spec], list[Explained]]
    detail: Callable[[Spec, Parts, int], str]
    needs: Callable[[Spec], tuple[str, ...]] | None = None
    applies: Callable[[Spec], bool] = _always
    ranked: bool = True
    amplitude: Amplitude | Callable[[Spec], Amplitude] = "other"

    def amplitude_rule(self, spec: Spec) -> Amplitude:
        """``amplitude`` for this stage (see the attribute)."""
        return self.amplitude if isinstance(self.amplitude, str) else self.amplitude(spec)

    def needed(self, spec: Spec) -> tuple[str, ...]:
        return self.reads if self.needs is None else self.needs(spec)

    def check(self, parts: Parts, spec: Spec) -> CheckResult:
        """Run the check and apply the rule for unknown values (module docstring)."""
        r = self.run(parts, spec)
        needed = self.needed(spec)
        if not needed:
            return r
        missing = np.isnan(parts[needed[0]])
        for f in needed[1:]:
            missing |= np.isnan(parts[f])
        return unknown_unless_failing(r, missing)


def _registry() -> tuple[Check, ...]:
    from picker.checks import (
        accuracy,
        filters,
        gain,
        limits,
        protection,
        rejection,
        stability,
        thermal,
        tia,
    )

    return (limits.SWING, limits.COMMON_MODE, rejection.CMRR_CHECK, limits.SLEW,
            gain.GAIN_ACCURACY, gain.PHASE, stability.STABILITY, limits.OUTPUT_CURRENT,
            limits.SUPPLY, thermal.DISSIPATION, protection.INPUT_PROTECTION,
            accuracy.OFFSET, accuracy.NOISE,
            limits.STOCK, *filters.CHECKS, *tia.CHECKS)


_CHECKS: tuple[Check, ...] | None = None


def registered() -> tuple[Check, ...]:
    """Every check, in report order."""
    global _CHECKS
    if _CHECKS is None:
        _CHECKS = _registry()
    return _CHECKS


def by_name(name: str) -> Check:
    for c in registered():
        if c.name == name:
            return c
    raise KeyError(name)


def applicable(spec: Spec) -> tuple[Check, ...]:
    """The checks that apply to ``spec``'s stage, in report order."""
    return tuple(c for c in registered() if spec.stage.allows(c.name) and c.applies(spec))


#: Columns the ranking and the pick listing read besides the checks.
RANKING_READS: tuple[str, ...] = ("price", "qty", "available", "channels")


def needed_columns(spec: Spec) -> tuple[str, ...]:
    """The part columns checking, ranking and listing parts for ``spec`` read."""
    names = [f for c in applicable(spec) for f in c.reads] + list(RANKING_READS)
    return tuple(dict.fromkeys(names))


def run_checks(parts: Parts | Any, spec: Spec) -> CheckTable:
    """Run every applicable check of ``spec`` over all parts.

    Parameters
    ----------
    parts : Parts or DataFrame
        The parts (one array element per part; NaN = unknown).
    spec : Spec
        The stage's minimum specifications (picker.design.spec.minimum_specs).

    Returns
    -------
    CheckTable
        One CheckResult per applicable check, in report order.
    """
    p = parts if isinstance(parts, Parts) else Parts(parts)
    checks = applicable(spec)
    table = CheckTable(p.labels, {c.name: c.check(p, spec) for c in checks},
                       frozenset(c.name for c in checks if c.ranked))
    p.forget()  # e.g. the loop coefficients: 16 bytes a part, not needed any more
    return table


__all__ = ["RANKING_READS", "Amplitude", "STATUS_WORDS", "Check", "CheckResult", "CheckTable", "Parts",
           "Status", "applicable", "by_name", "needed_columns", "registered", "run_checks"]
