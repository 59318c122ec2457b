"""Checks of the closed-loop gain: its error against the budget (gain_accuracy) and
its phase at the top frequency (phase, only with --phase-error).

gain_accuracy: the exact closed-loop gain of the circuit solver (single-pole A(s),
Rin, Ro, source, load, capacitive load, network, and at the top frequency the input
capacitances: the source pole of the source resistance with the input capacitance) at
DC and at the top frequency; at the top frequency the worse of the gains with and
without the input capacitances counts (their pole can lift the gain near crossover,
which a verdict does not count on). The error is
| |G|/G - 1 | against the requested gain G with the resistors anywhere in their
tolerance, and the verdict is the worse of the two against the budget gain error / margin.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np
import numpy.typing as npt

from picker.checks import Check
from picker.checks.core import Array, CheckResult, Parts, result
from picker.circuit.opamp import Loop, closed_loop_pole_hz, loop, open_loop
from picker.design.spec import Explained, rin_matters
from picker.quantities import fmt
from picker.stages import Stage

if TYPE_CHECKING:
    from picker.design.spec import Spec


def _loop(p: Parts, st: Stage) -> Loop:
    """The loop coefficients of these parts in this stage (shared by gain and noise)."""
    key = ("loop", st.kp, st.zp, st.kg, st.rg, st.rf, st.load)
    return p.memo(key, lambda: loop(st, p["rin_ohm"], p["rout_ohm"]))  # type: ignore[no-any-return]


def caps_matter(p: Parts, st: Stage) -> bool:
    """Whether the gain at f needs the solver at f: the stage has capacitors (a load
    capacitance), or some part has a known input capacitance (it loads a resistance at
    an input, or the output through Ro)."""
    if st.reactive:
        return True
    return bool(np.any(np.isfinite(p["cin_diff_f"])) or np.any(np.isfinite(p["cin_cm_f"])))


def gain_at(p: Parts, st: Stage, f: float) -> npt.NDArray[np.complex128]:
    """G(j2πf) per part from the solver at f with the input capacitances (unknown: 0;
    the check's needs decide when that may not pass) and the single-pole A(s)."""
    key = ("loop_f", st.circuit, f)
    lp = p.memo(key, lambda: loop(st, p["rin_ohm"], p["rout_ohm"], freq_hz=f,
                                  cin=p["cin_diff_f"], cin_cm=p["cin_cm_f"]))
    return lp.gain(open_loop(p["aol_v_per_v"], p["gbw_hz"], f))  # type: ignore[no-any-return]


def _gains(p: Parts, st: Stage, f: float) -> tuple[Array, Array]:
    """|G| at DC and at f, per part (see gain_accuracy).

    Written with in-place operations: at a million parts each array is 8 MB, and
    updating one in place moves less memory than writing a new one.
    """
    a0, gbw = p["aol_v_per_v"], p["gbw_hz"]
    lp = _loop(p, st)
    n0, d0 = lp.n0, lp.d0
    with np.errstate(invalid="ignore", divide="ignore"):
        num = np.multiply(a0, lp.n1)
        num += n0
        den = np.multiply(a0, lp.d1)
        den += d0
        g_dc = np.divide(num, den)
        np.abs(g_dc, out=g_dc)
        if not f:
            return g_dc, g_dc
        with_caps = np.abs(gain_at(p, st, f)) if caps_matter(p, st) else None
        x = np.divide(f, gbw)
        x *= a0
        n0x = np.multiply(n0, x)
        x *= d0  # now d0·x
        num *= num
        n0x *= n0x
        num += n0x
        den *= den
        x *= x
        den += x
        num /= den
        g_f = np.sqrt(num, out=num)
        if with_caps is None:
            return g_dc, g_f
        if st.reactive:  # a capacitor in the stage itself: only the solver sees it
            return g_dc, with_caps
        # input capacitances: the worse of the gains with and without them. The pole they
        # add to the feedback can lift the gain near crossover (peaking) and so hide the
        # roll-off; a verdict does not count on a parasitic to flatten the response.
        ideal = abs(st.ideal_gain)
        return g_dc, np.where(np.abs(with_caps - ideal) > np.abs(g_f - ideal), with_caps, g_f)


def _errors(p: Parts, s: Spec, f: float) -> tuple[Array, Array]:
    """Relative gain errors at DC and at f, per part, with the resistors anywhere in
    their tolerance: max(| g·(1 + w+) - 1 |, | g·(1 - w-) - 1 |), g = |G|/G."""
    st, b = s.stage, s.budget
    out = []
    for g in _gains(p, st, f):  # in place on new arrays (both may be one array at f = 0)
        low = np.multiply(g, (1 - b.tolerance_low) / st.gain)
        low -= 1
        np.abs(low, out=low)
        if b.tolerance_high or b.tolerance_low:
            high = np.multiply(g, (1 + b.tolerance_high) / st.gain)
            high -= 1
            np.maximum(low, np.abs(high, out=high), out=low)
        out.append(low)
    return out[0], out[1]


def _gain_accuracy(p: Parts, s: Spec) -> CheckResult:
    """Worse of the exact gain errors at DC and at the top frequency vs the budget.

    G = (n0 + n1·A)/(d0 + d1·A) with A = A0/(1 + jx), x = f·A0/GBW; multiplying
    through by (1 + jx), |G(f)| = |num + j·n0·x| / |den + j·d0·x| with num = n0 + n1·A0,
    den = d0 + d1·A0 (the DC gain is num/den): real arithmetic only.
    """
    err_dc, err_f = _errors(p, s, s.requirement.freq_hz)
    with np.errstate(invalid="ignore"):  # a DC failure is reported as such
        has = np.where(err_dc > s.budget.allowed, err_dc, np.maximum(err_dc, err_f))
    return result("gain_accuracy", "ratio", "<=", s.budget.allowed, has)


def _gain_needs(s: Spec) -> tuple[str, ...]:
    """A0 and GBW always; Rin where a resistance sits at an input; Ro where the output
    drives a current (a load, a load capacitance or a feedback resistor); the input
    capacitances where the source resistance is not zero (the source pole)."""
    st = s.stage
    out: tuple[str, ...] = ("aol_v_per_v", "gbw_hz")
    if rin_matters(st):
        out += ("rin_ohm",)
    if not math.isinf(st.load) or st.rf > 0 or st.zp > 0 or st.cload > 0:
        out += ("rout_ohm",)
    if s.requirement.source_ohm > 0:
        out += ("cin_diff_f", "cin_cm_f")
    return out


def _gain_explain(s: Spec) -> list[Explained]:
    req, b, mn, ng = s.requirement, s.budget, s.minimum, s.noise_gain
    m, f = req.margin, req.freq_hz
    a0, rin, gbw = mn.aol_v_per_v, mn.rin_ohm, mn.gbw_hz
    st = s.stage
    rows = [Explained("gain_accuracy", "allowed gain error", b.allowed, "ratio",
                      GAIN_ACCURACY.formula,
                      f"{fmt(req.gain_error, 'ratio', 4)} / {m:g} = "
                      f"{fmt(b.allowed, 'ratio', 4)}")]
    rows.append(Explained(
        "aol_v_per_v", "minimum open-loop gain", a0, "gain",
        "A0 >= NG·(1 - eA)/eA  (DC loss 1/(1 + A0/NG) = eA, A0's share of the budget)",
        "-" if a0 is None else
        f"{ng:.5g} × (1 - {b.open_loop:.4g}) / {b.open_loop:.4g} = {a0:.5g}"))
    rows.append(Explained(
        "rin_ohm", "minimum input resistance", rin, "resistance",
        "Rin = (rg·zp + rf·rg + rf·zp)/(rg·(N - NG)), N = A0,min·e_dc/(1 - e_dc)",
        "does not matter here (no resistance at the inputs)" if rin is None else
        f"rf {fmt(st.rf, 'resistance', 4)}, rg {fmt(st.rg, 'resistance', 4)}, zp "
        f"{fmt(st.zp, 'resistance', 4)}, e_dc {b.dc:.4g} -> {fmt(rin, 'resistance', 4)}"))
    if gbw is not None and a0 is not None:
        lg = (1 - b.dc) / b.dc
        gbw_numbers = (f"{fmt(f, 'frequency', 4)} × {a0:.5g} / √({lg:.5g}² / (1 - "
                       f"{b.opamp:.4g})² - {1 + lg:.5g}²) = {fmt(gbw, 'frequency', 4)}")
    else:
        gbw_numbers = "-"
    rows.append(Explained(
        "gbw_hz", "minimum gain-bandwidth product", gbw, "frequency",
        "GBW >= f·A0,min/√(L²/(1-ℓ)² - (1+L)²), L = (1 - e_dc)/e_dc: for the magnitude "
        "error only; the phase shift at f is shown, and limited only by --phase-error",
        gbw_numbers))
    rows.append(Explained(
        "gbw_phase_rule", "GBW the phase rule would ask", ng * f / b.allowed, "frequency",
        "GBW >= NG·f/e: the closed-loop pole 1/e times above f keeps the phase lag at f "
        "below e radians (stricter than the magnitude rule; not applied unless --phase-error)",
        f"{ng:.5g} × {fmt(f, 'frequency', 4)} / {b.allowed:.4g} = "
        f"{fmt(ng * f / b.allowed, 'frequency', 4)}"))
    return rows


def phase_deg(p: Parts, s: Spec) -> Array:
    """Per part, the phase of the closed-loop gain at the top frequency relative to the
    ideal stage's (0° or 180°), degrees; negative is a lag. NaN where A0 or GBW is blank.

    arg G(j2πf) from the exact loop, G = (n0 + n1·A)/(d0 + d1·A), A = A0/(1 + jf·A0/GBW).
    """
    st = s.stage
    sign = 1.0 if st.ideal_gain >= 0 else -1.0
    f = s.requirement.freq_hz
    with np.errstate(invalid="ignore"):
        g = (gain_at(p, st, f) if caps_matter(p, st)
             else _loop(p, st).gain(open_loop(p["aol_v_per_v"], p["gbw_hz"], f)))
        return np.degrees(np.angle(g * sign))  # type: ignore[no-any-return]


def _gain_detail(s: Spec, p: Parts, i: int) -> str:
    one = p.take([i])
    st, req = s.stage, s.requirement
    f = req.freq_hz
    err_dc, err_f = (float(e[0]) for e in _errors(one, s, f))
    g_dc, g_f = (float(g[0]) for g in _gains(one, st, f))
    phase = float(phase_deg(one, s)[0])
    f_cl = float(pole(one, st)[0])
    b = s.budget
    return (f"DC {g_dc:.7g} V/V, at {fmt(f, 'frequency')} {g_f:.7g} V/V; with the resistors "
            f"-{b.tolerance_low:.3%}/+{b.tolerance_high:.3%}: errors {err_dc:.4%} at DC, "
            f"{err_f:.4%} at f; phase {phase:+.3g}° from the ideal; closed-loop pole "
            f"{fmt(f_cl, 'frequency')}")


_GAIN_READS = ("aol_v_per_v", "gbw_hz", "rin_ohm", "rout_ohm", "cin_diff_f", "cin_cm_f")

GAIN_ACCURACY = Check(
    name="gain_accuracy", kind="ratio", reads=_GAIN_READS,
    run=_gain_accuracy, needs=_gain_needs,
    formula="| |G|·(1 ± w)/G - 1 | <= gain error/m at DC and at f; G exact from the nodal "
            "solution (A(s) = A0/(1 + s·A0/(2π·GBW)), Rin, Ro, source, load, load "
            "capacitance, input capacitances, network), "
            "w the resistor tolerance's gain spread",
    explain=_gain_explain, detail=_gain_detail, amplitude="independent")


def _phase(p: Parts, s: Spec) -> CheckResult:
    """|phase shift at f| <= --phase-error."""
    assert s.requirement.phase_error_deg is not None
    return result("phase", "angle", "<=", s.requirement.phase_error_deg,
                  np.abs(phase_deg(p, s)))


def _phase_explain(s: Spec) -> list[Explained]:
    req, ng = s.requirement, s.noise_gain
    lim = req.phase_error_deg
    assert lim is not None
    gbw = ng * req.freq_hz / math.tan(math.radians(lim))
    return [
        Explained("phase", "largest phase shift at f", lim, "angle", PHASE.formula,
                  f"{fmt(lim, 'angle', 4)} = {fmt(lim, 'angle', 4)}"),
        Explained("gbw_phase", "GBW that keeps the phase shift within it (single pole)", gbw,
                  "frequency", "GBW >= NG·f/tan(φmax)",
                  f"{ng:.5g} × {fmt(req.freq_hz, 'frequency', 4)} / tan({lim:g}°) = "
                  f"{fmt(gbw, 'frequency', 4)}"),
    ]


def _phase_detail(s: Spec, p: Parts, i: int) -> str:
    return (f"phase at {fmt(s.requirement.freq_hz, 'frequency')} "
            f"{fmt(float(phase_deg(p.take([i]), s)[0]), 'angle', 4)} from the ideal")


PHASE = Check(
    name="phase", kind="angle", reads=_GAIN_READS,
    run=_phase, needs=_gain_needs,
    formula="|arg G(j2πf) - arg G_ideal| <= phase error, G exact from the nodal solution",
    explain=_phase_explain, detail=_phase_detail,
    applies=lambda s: s.requirement.phase_error_deg is not None, amplitude="independent")


def pole(p: Parts, st: Stage) -> Array:
    """The closed loop's pole per part (Hz)."""
    return closed_loop_pole_hz(_loop(p, st), p["aol_v_per_v"], p["gbw_hz"])


__all__ = ["GAIN_ACCURACY", "PHASE", "caps_matter", "gain_at", "phase_deg", "pole"]
