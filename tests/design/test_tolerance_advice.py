"""The tolerance class picker suggests meets the gain-error budget when rerun, and it is
the coarsest class that does (not one step off), for spec's note and net's advice."""

from __future__ import annotations

import math
import re

import pytest

from picker import api
from picker.design.network import design_network
from picker.design.requirement import Requirement
from picker.design.tolerance import STANDARD_TOLERANCES
from picker.errors import BadRequirement

GAINS = (2.0, 10.0, 100.0, 1000.0)
BUDGETS = (0.001, 0.005, 0.02, 0.05)
SPEC = re.compile(r"; ([0-9.]+)% resistors leave it at least half \(--tolerance ([0-9.]+)%\)")


def _req(topology: str, gain: float, budget: float, rule: str, tol: float) -> Requirement:
    return Requirement(topology, gain, 15.0, -15.0, 1e3,  # type: ignore[arg-type]
                       vin_pk=min(0.1, 10.0 / gain), gain_error=budget, tolerance=tol,
                       tolerance_rule=rule)  # type: ignore[arg-type]


def _op_amp_share(topology: str, net: dict[str, float], gain: float, budget: float,
                  rule: str, t: float, margin: float = 1.25) -> float:
    """By hand: what the resistors leave the op-amp of the budget e = gain_error/margin.

    G = rf/rg (inverting, no source) or 1 + rf/rg; worst: the corners rf(1 ± t), rg(1 ∓ t)
    (G is monotonic in each resistor); rss: t·√(S_rf² + S_rg²) with the sensitivities
    S = ∂lnG/∂lnR = ±1 (inverting), ±(G - 1)/G (non-inverting) (root-sum-square of
    independent tolerances, first order: common practice, no source). The low end
    r·(1 - w-) leaves the op-amp 1 - (1 - e)/(r·(1 - w-)), if the high end r·(1 + w+)
    stays within 1 + e."""
    rf, rg = net["rf"], net["rg"]
    f = (lambda a, b: a / b) if topology == "inverting" else (lambda a, b: 1 + a / b)
    g0 = f(rf, rg)
    if rule == "worst":
        w_lo = 1 - f(rf * (1 - t), rg * (1 + t)) / g0
        w_hi = f(rf * (1 + t), rg * (1 - t)) / g0 - 1
    else:
        s = 1.0 if topology == "inverting" else (g0 - 1) / g0
        w_lo = w_hi = t * math.sqrt(2) * s
    e = budget / margin
    r = g0 / gain
    if r * (1 + w_hi) > 1 + e or r * (1 - w_lo) < 1 - e:
        return 0.0
    return 1 - (1 - e) / (r * (1 - w_lo))


CASES = [(t, g, b, rule) for t in ("inverting", "non-inverting") for g in GAINS
         for b in BUDGETS for rule in ("worst", "rss")]


@pytest.mark.parametrize("topology,gain,budget,rule", CASES)
def test_spec_tolerance_note_holds_when_rerun(topology: str, gain: float, budget: float,
                                              rule: str) -> None:
    req = _req(topology, gain, budget, rule, 0.05)
    try:
        notes = " ".join(api.spec(req).notes)
    except BadRequirement:  # no network for this gain and budget: nothing to advise
        return
    m = SPEC.search(notes)
    if m is None:
        return
    t = float(m.group(2)) / 100
    again = api.built(req.with_changes(tolerance=t))
    assert again.network is not None
    share = _op_amp_share(topology, dict(again.network), gain, budget, rule, t)
    assert share >= budget / 1.25 / 2 * (1 - 1e-9), (t, again.network)
    assert not SPEC.search(" ".join(api.spec(req.with_changes(tolerance=t)).notes))
    coarser = [c for c in STANDARD_TOLERANCES if t < c <= 0.05]
    if coarser:  # one class coarser does not leave the op-amp half
        c = min(coarser)
        try:
            near = api.built(req.with_changes(tolerance=c))
        except BadRequirement:
            return
        assert near.network is not None
        assert _op_amp_share(topology, dict(near.network), gain, budget, rule, c) < \
            budget / 1.25 / 2


NET = [(t, g, b) for t in ("inverting", "non-inverting") for g in GAINS for b in BUDGETS]


@pytest.mark.parametrize("topology,gain,budget", NET)
def test_net_tolerance_advice_is_the_coarsest_class_that_holds(topology: str, gain: float,
                                                              budget: float) -> None:
    req = _req(topology, gain, budget, "worst", 0.05)
    try:
        net = design_network(req, None)
    except BadRequirement:
        return
    m = re.search(r"--tolerance ([0-9.]+)%", " ".join(net.notes))
    if m is None:
        return
    t = float(m.group(1)) / 100

    def worst(tol: float) -> float | None:
        try:
            n = design_network(req.with_changes(tolerance=tol), None)
        except BadRequirement:
            return None
        rf, rg = n.network["rf"], n.network["rg"]
        # by hand: the corners rf(1 ± t), rg(1 ∓ t) of rf/rg or 1 + rf/rg
        f = (lambda a, b: a / b) if topology == "inverting" else (lambda a, b: 1 + a / b)
        return max(abs(f(rf * (1 + tol), rg * (1 - tol)) / gain - 1),
                   abs(f(rf * (1 - tol), rg * (1 + tol)) / gain - 1))

    w = worst(t)
    assert w is not None and w <= budget * (1 + 1e-12)
    coarser = [c for c in STANDARD_TOLERANCES if t < c < 0.05]
    if coarser:
        wc = worst(min(coarser))
        assert wc is None or wc > budget
