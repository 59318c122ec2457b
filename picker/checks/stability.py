"""The stability check: the phase margin of the stage's actual loop, the part's minimum
stable noise gain, and the fix (an isolation resistor or a feedback capacitor) when it
fails.

Model (picker.circuit.loopgain): the two-pole open loop A(s) = A0/((1 + s/ωp1)(1 + s/ωp2)),
ωp1 = 2π·GBW/A0, ωp2 from the part's phase margin as a unity-gain follower
(picker.circuit.opamp ``second_pole``); the loop gain T = A·β with β = d1/d0 from the
circuit solver over the stage's netlist: network, source resistance, load, load
capacitance (``--cload``) behind the part's Ro, the differential input capacitance
between the inputs and the common-mode input capacitance from each input to the
reference. PM = 180° + arg T at the crossover |T| = 1.

The check fails where PM < ``--phase-margin`` (default 45°), and also where the stage's
noise gain 1 + rf/rg is below the part's ``min_noise_gain`` (a decompensated part; the
note gives both numbers). A part with ``pm_unity_deg`` but no ``min_noise_gain`` is taken
as unity-gain stable: its follower phase margin says how stable it is.

Fixes, chosen from E-series values and checked through the same solver:

- a capacitive load: the smallest isolation resistor (E24, 1 Ω .. 10 kΩ) between the
  op-amp's output pin and the load (feedback taken at the pin) that restores the
  margin; its cost is the DC gain lost into a resistive load, 1 - |G_iso(0)|/|G(0)|;
- otherwise, with a feedback resistor: the smallest capacitor across rf (E12,
  0.1 pF .. 100 nF) that restores the margin (it cancels the pole of the input
  capacitance with the network's resistance).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal

import numpy as np
import numpy.typing as npt

from picker.checks import Check
from picker.checks.core import Array, CheckResult, Coded, Parts, result
from picker.circuit.loopgain import Margins, Model, closed_loop, margins
from picker.circuit.mna import Netlist
from picker.design.series import values
from picker.design.spec import Explained, rin_matters
from picker.quantities import fmt
from picker.stages import Stage
from picker.stages.base import isolated, with_feedback_cap

if TYPE_CHECKING:
    from picker.design.spec import Spec

READS = ("aol_v_per_v", "gbw_hz", "pm_unity_deg", "min_noise_gain", "rin_ohm", "rout_ohm",
         "cin_diff_f", "cin_cm_f")
#: isolation resistors tried (E24) and feedback capacitors (E12)
RISO_RANGE = (1.0, 1e4)
CF_RANGE = (1e-13, 1e-7)


def model(p: Parts) -> Model:
    """The parts' two-pole macromodel (picker.circuit.loopgain.Model)."""
    return p.memo("stability_model", lambda: Model.of(
        p["aol_v_per_v"], p["gbw_hz"], p["pm_unity_deg"], p["rin_ohm"], p["rout_ohm"],
        p["cin_diff_f"], p["cin_cm_f"]))  # type: ignore[no-any-return]


def stage_margins(p: Parts, st: Stage) -> Margins:
    """Phase margin, crossover and peaking of every part in the stage (memoised)."""
    return p.memo(("stability", st.circuit),  # type: ignore[no-any-return]
                  lambda: margins(st.circuit, model(p)))


def _too_low_gain(p: Parts, st: Stage) -> npt.NDArray[np.bool_]:
    """Per part: the stage's noise gain is below the part's minimum stable noise gain."""
    with np.errstate(invalid="ignore"):
        return np.asarray(st.noise_gain < p["min_noise_gain"], dtype=bool)


def _run(p: Parts, s: Spec) -> CheckResult:
    st = s.stage
    mg = stage_margins(p, st)
    r = result("stability", "angle", ">=", s.requirement.phase_margin_deg, mg.pm_deg)
    low = _too_low_gain(p, st)
    if not low.any():
        return r
    ng = st.noise_gain
    minimum = p["min_noise_gain"]
    with np.errstate(invalid="ignore", divide="ignore"):
        margin = np.where(low, np.fmin(r.margin, ng / minimum), r.margin)
    found = np.unique(minimum[low])
    words = ("", *(f"noise gain {ng:.4g} is below the part's minimum {v:.4g}" for v in found))
    codes = np.zeros(len(p), dtype=np.int8)
    codes[low] = 1 + np.searchsorted(found, minimum[low])
    return CheckResult(r.name, r.kind, r.sense, r.need, r.has, margin, Coded(codes, words))


def _needs(s: Spec) -> tuple[str, ...]:
    """GBW, the follower phase margin and A0 always; Ro with a load capacitance; Rin and
    both input capacitances where the network has a resistance at an input (a source
    resistance or rp at the non-inverting one, rf at the inverting one)."""
    st = s.stage
    out: tuple[str, ...] = ("gbw_hz", "pm_unity_deg", "aol_v_per_v")
    if st.cload > 0:
        out += ("rout_ohm",)
    if rin_matters(st):
        out += ("rin_ohm", "cin_diff_f", "cin_cm_f")
    return out


def _explain(s: Spec) -> list[Explained]:
    req, st = s.requirement, s.stage
    need = req.phase_margin_deg
    return [
        Explained("stability", "least phase margin of the loop", need, "angle", STABILITY.formula,
                  f"{need:g} = {fmt(need, 'angle', 4)} (--phase-margin); noise gain "
                  f"{st.noise_gain:.4g} must reach the part's minimum stable noise gain; load "
                  f"{fmt(st.cload, 'capacitance', 4) if st.cload else 'no'} capacitance"),
    ]


# -- the fix --------------------------------------------------------------------------


@dataclass(frozen=True)
class Fix:
    """A remedy for a failing margin, checked through the solver."""

    kind: Literal["isolation resistor", "feedback capacitor"]
    value: float  # Ω or F
    pm_deg: float  # the margin it restores
    gain_loss: float  # DC gain lost into the load (relative; 0 for a capacitor)

    def sentence(self) -> str:
        if self.kind == "isolation resistor":
            loss = (f", costing {self.gain_loss:.3%} of DC gain into the load"
                    if self.gain_loss > 0 else ", no DC gain lost (no resistive load)")
            return (f"fix: a {fmt(self.value, 'resistance', 3)} isolation resistor between "
                    f"the output pin and the load (feedback at the pin) restores "
                    f"{self.pm_deg:.1f}° phase margin{loss}")
        return (f"fix: a {fmt(self.value, 'capacitance', 3)} capacitor across the feedback "
                f"resistor restores {self.pm_deg:.1f}° phase margin")


def _first_passing(nets: list[tuple[float, Netlist]], m: Model,
                   need: float) -> tuple[Array, Array]:
    """Per part, the first value whose netlist gives PM >= need (NaN: none), and its PM.

    One netlist at a time over the parts still without a value (no loop over parts)."""
    n = len(m)
    value, pm = np.full(n, np.nan), np.full(n, np.nan)
    todo = np.arange(n)
    for v, net in nets:
        if not len(todo):
            break
        got = margins(net, m.take(todo)).pm_deg
        with np.errstate(invalid="ignore"):
            ok = got >= need
        value[todo[ok]], pm[todo[ok]] = v, got[ok]
        todo = todo[~ok]
    return value, pm


def fixes(p: Parts, s: Spec) -> list[Fix | None]:
    """The fix for each part of ``p`` that fails on its phase margin (None: passes,
    fails on its minimum noise gain, or nothing in the ranges restores the margin).

    Parameters
    ----------
    p : Parts
        The parts to fix (the rows shown: a few).
    s : Spec
        The stage.

    Returns
    -------
    list of Fix or None
        One entry per part.
    """
    st, req = s.stage, s.requirement
    need = req.phase_margin_deg
    m = model(p)
    with np.errstate(invalid="ignore"):
        failing = (stage_margins(p, st).pm_deg < need) & ~_too_low_gain(p, st)
    out: list[Fix | None] = [None] * len(p)
    rows = np.flatnonzero(failing)
    if not len(rows):
        return out
    net = st.circuit
    mf = m.take(rows)
    if st.cload > 0:
        riso = values("E24", *RISO_RANGE)
        v, pm = _first_passing([(float(r), isolated(net, float(r))) for r in riso], mf, need)
        g0 = np.abs(closed_loop(net, mf, np.zeros(len(rows))))
        for k, i in enumerate(rows.tolist()):
            if math.isfinite(v[k]):
                one = mf.take([k])
                g_iso = abs(closed_loop(isolated(net, float(v[k])), one, np.zeros(1))[0])
                out[i] = Fix("isolation resistor", float(v[k]), float(pm[k]),
                             max(0.0, 1.0 - g_iso / float(g0[k])))
    if 0 < st.rf < math.inf:
        left = [k for k, i in enumerate(rows.tolist()) if out[i] is None]
        if left:
            cf = values("E12", *CF_RANGE)
            v, pm = _first_passing([(float(c), with_feedback_cap(net, float(c))) for c in cf],
                                   mf.take(left), need)
            for j, k in enumerate(left):
                if math.isfinite(v[j]):
                    out[int(rows[k])] = Fix("feedback capacitor", float(v[j]), float(pm[j]), 0.0)
    return out


def _detail(s: Spec, p: Parts, i: int) -> str:
    one = p.take([i])
    st = s.stage
    mg = stage_margins(one, st)
    pm, fc, peak = float(mg.pm_deg[0]), float(mg.fc_hz[0]), float(mg.peaking_db[0])
    ng_min = float(one["min_noise_gain"][0])
    pm_text = "unknown" if math.isnan(pm) else ("no crossover" if math.isinf(pm)
                                                 else fmt(pm, "angle", 4))
    text = (f"phase margin {pm_text} at crossover "
            f"{fmt(fc, 'frequency') if math.isfinite(fc) else '-'}; closed-loop peaking "
            f"{'-' if math.isnan(peak) else f'{peak:.2f} dB'}; minimum stable noise gain "
            f"{'not given (unity-gain stable)' if math.isnan(ng_min) else f'{ng_min:.4g}'}"
            f" vs the stage's {st.noise_gain:.4g}")
    fix = fixes(one, s)[0]
    return text + ("" if fix is None else "; " + fix.sentence())


STABILITY = Check(
    name="stability", kind="angle", reads=READS, run=_run, needs=_needs,
    formula="PM = 180° + arg T(j2πfc) >= phase margin, |T(j2πfc)| = 1, T = A·β, "
            "A(s) = A0/((1 + s/ωp1)(1 + s/ωp2)), β = d1/d0 of the nodal solution "
            "(network, source, Ro with the load capacitance, input capacitances); "
            "and noise gain >= the part's minimum",
    explain=_explain, detail=_detail, amplitude="independent")


__all__ = ["Fix", "READS", "STABILITY", "fixes", "model", "stage_margins"]
