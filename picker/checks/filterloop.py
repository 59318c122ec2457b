"""The stability check of a second-order filter stage: the phase margin of its loop.

The filter's network feeds the output back through its capacitors, so its feedback
factor β(s) depends on frequency (a Sallen-Key section feeds back positively through
c1 as well as negatively through the gain pair; a multiple-feedback section through
both its feedback resistor and its feedback capacitor). The loop is the one of the
resistive stages' stability check (picker.checks.stability, picker.circuit.loopgain):

- the two-pole open loop A(s) = A0/((1 + s/ωp1)(1 + s/ωp2)), ωp1 = 2π·GBW/A0, ωp2 from
  the part's phase margin as a unity-gain follower;
- β = d1/d0 from the circuit solver over the filter's own netlist with its capacitors
  (source resistance, network, load and ``--cload`` behind the part's Ro, the
  differential input capacitance between the inputs and the common-mode one from each
  input to the reference), exact polynomials in s evaluated per part;
- T = A·β (the return ratio of the op-amp's controlled source, which takes in the
  positive and the negative feedback paths at once), PM = 180° + arg T(j2πfc) at the
  highest frequency fc with |T| = 1, arg T followed from DC where T = A0·β(0) > 0.

The check fails where PM < ``--phase-margin`` (default 45°). A decompensated part's
least stable noise gain is checked by ``filter_min_gain``; no fix is proposed (a
capacitor across a filter's resistor would move its f0 and Q).
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

from picker.checks import Check
from picker.checks.core import CheckResult, Parts, result
from picker.checks.stability import READS, stage_margins
from picker.design.spec import Explained
from picker.quantities import fmt
from picker.stages.filterbase import FilterStage

if TYPE_CHECKING:
    from picker.design.spec import Spec


def _is_filter(s: Spec) -> bool:
    return isinstance(s.stage, FilterStage)


def _run(p: Parts, s: Spec) -> CheckResult:
    mg = stage_margins(p, s.stage)
    return result("filter_stability", "angle", ">=", s.requirement.phase_margin_deg, mg.pm_deg)


def _needs(s: Spec) -> tuple[str, ...]:
    """GBW, the follower phase margin and A0; Rin and both input capacitances (a filter
    always has a resistance or a capacitor at an input); Ro with a load capacitance."""
    out: tuple[str, ...] = ("gbw_hz", "pm_unity_deg", "aol_v_per_v", "rin_ohm", "cin_diff_f",
                            "cin_cm_f")
    return out + (("rout_ohm",) if s.stage.cload > 0 else ())


def _explain(s: Spec) -> list[Explained]:
    need, st = s.requirement.phase_margin_deg, s.stage
    return [Explained(
        "filter_stability", "least phase margin of the filter's loop", need, "angle",
        FILTER_STABILITY.formula,
        f"{need:g} = {fmt(need, 'angle', 4)} (--phase-margin); β(s) of the {st.topology} "
        f"network with its capacitors; load capacitance "
        f"{fmt(st.cload, 'capacitance', 4) if st.cload else 'none'}")]


def _detail(s: Spec, p: Parts, i: int) -> str:
    mg = stage_margins(p.take([i]), s.stage)
    pm, fc, peak = float(mg.pm_deg[0]), float(mg.fc_hz[0]), float(mg.peaking_db[0])
    pm_text = "unknown" if math.isnan(pm) else ("no crossover" if math.isinf(pm)
                                                 else fmt(pm, "angle", 4))
    return (f"phase margin {pm_text} at crossover "
            f"{fmt(fc, 'frequency') if math.isfinite(fc) else '-'}; closed-loop peaking "
            f"{'-' if math.isnan(peak) else f'{peak:.2f} dB'} (the section's own included)")


FILTER_STABILITY = Check(
    name="filter_stability", kind="angle", reads=tuple(r for r in READS if r != "min_noise_gain"),
    run=_run, needs=_needs,
    formula="the filter's loop: 180° + arg T(j2πfc) >= phase margin at |T(j2πfc)| = 1, "
            "T = A·β, A(s) = A0/((1 + s/ωp1)(1 + s/ωp2)), β(s) = d1/d0 of the nodal solution of the "
            "filter with its capacitors (source, Ro with the load capacitance, input "
            "capacitances)",
    explain=_explain, detail=_detail, applies=_is_filter, amplitude="independent")


__all__ = ["FILTER_STABILITY"]
