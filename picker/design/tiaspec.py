"""Minimum op-amp specifications of a transimpedance stage (picker.stages.transimpedance).

With Zt the transimpedance, B the bandwidth asked for and m the design margin:

- swing: the output reaches ref - I·Zt for every sensor current I of ``--iin`` (a peak p
  swings ±p·Zt; a DC range goes one way);
- slew: m·2π·f·Vp,out for a peak current (a sine at the top frequency, default B),
  SR >= m·2π·B·ΔV for a DC range (a step over the whole range ΔV = (high - low)·Zt
  through a single pole at B: the steepest slope of its response, an upper bound for
  the second-order loop; common practice, no source);
- GBW: the least GBW that keeps the loop's Q at or below the response's (Butterworth
  1/√2) and reaches the bandwidth B, with the designed rf and cf and the sensor's
  capacitance, times m; each part's check adds its own input capacitance
  (``gbw_needed``);
- output current: m·Vp,out·(1/RL + |1/rf + j2πB·cf|);
- the inputs stay at the reference (the sensor works into a virtual ground).

The gain-error budget of a voltage stage does not apply; the bandwidth check solves
each part's closed loop.
"""

from __future__ import annotations

import math

from picker.design.requirement import Requirement
from picker.design.spec import Budget, Explained, Minimums, Spec
from picker.quantities import fmt
from picker.stages.transimpedance import RESPONSE_Q, TiaStage, f3db_of, fn_of, gbw_needed, q_of


def step_span(req: Requirement) -> float:
    """ΔV of a DC range's full step, V (0 for a peak current)."""
    assert req.iin_a is not None and req.zt_ohm is not None
    lo, hi = req.iin_a
    return 0.0 if lo == -hi else (hi - lo) * req.zt_ohm


def slew_need(req: Requirement) -> float:
    """The minimum slew rate, V/s (module docstring)."""
    dv = step_span(req)
    if dv > 0:
        return req.margin * 2 * math.pi * req.band_hz * dv  # type: ignore[operator]
    return req.margin * 2 * math.pi * req.freq_hz * req.vout


def gbw_need(st: TiaStage, m: float, cin: float = 0.0) -> float:
    """m times the GBW for the response's Q with Ct = Cd + cin, Hz."""
    return float(m * gbw_needed(st.response_q, st.band_hz, st.rf, st.cf, st.cd + cin))


def tia_specs(req: Requirement, st: TiaStage) -> Spec:
    """The minimum specifications of a transimpedance stage (module docstring)."""
    m = req.margin
    low, high = req.output_levels()
    minimum = Minimums(
        slew_v_per_s=slew_need(req), gbw_hz=gbw_need(st, m), aol_v_per_v=None, rin_ohm=None,
        swing_pos_v=high, swing_neg_v=low, cm_low_v=req.ref, cm_high_v=req.ref,
        iout_a=m * req.vout * st.amps_per_volt_out, supply_span_v=req.span)
    budget = Budget(0.0, 0.0, st.network_error, 0.0, 0.0, 0.0, 0.0, None, 0.0, 0.0)
    notes = [f"design margin {m:g}: GBW, slew and output current x{m:g}, offset and noise "
             f"limits /{m:g}; the bandwidth is checked as asked",
             f"network: rf {fmt(st.rf, 'resistance', 4)} ({st.rf / st.zt - 1:+.2%} from "
             f"Zt {fmt(st.zt, 'resistance', 4)}), cf {fmt(st.cf, 'capacitance', 4)}",
             "each part's GBW need and bandwidth include its own input capacitance "
             "(cin_diff + cin_cm at the inverting input)"]
    if math.isinf(st.rsh):
        notes.append(f"open shunt: the netlist's Norton resistance is "
                     f"{fmt(st.rn, 'resistance', 4)} (the DC noise gain moves by "
                     f"{st.rf / st.rn:.1e})")
    if st.cf > 0 and st.feedback_pole_hz > 2 * st.band_hz:
        notes.append("cf is the smallest capacitor the series offers above 0.1 pF; the "
                     "feedback pole lies well above the bandwidth")
    return Spec(req, st, st.gain, st.noise_gain, m, minimum, budget, notes)


def tia_rows(s: Spec) -> list[Explained]:
    """The transimpedance stage's own lines of ``--explain``."""
    st, req = s.stage, s.requirement
    assert isinstance(st, TiaStage)
    q = RESPONSE_Q[req.tia_response]
    g1 = gbw_need(st, 1.0)
    ct = st.cd
    fn0 = math.sqrt(g1 / (2 * math.pi * st.rf * ct)) if ct > 0 else math.inf
    cf45 = math.sqrt(ct / (2 * math.pi * st.rf * g1)) if ct > 0 else 0.0
    f = lambda x: fmt(x, "frequency", 4)  # noqa: E731
    return [
        Explained("transimpedance", "transimpedance as built", st.rf, "resistance",
                  "Zt = rf (vo = ref - I·rf at DC; rf the series value nearest Zt)",
                  f"rf {fmt(st.rf, 'resistance', 4)} = Zt {fmt(st.zt, 'resistance', 4)} "
                  f"{st.rf / st.zt - 1:+.2%}"),
        Explained("feedback_pole", "feedback pole (the bandwidth with unlimited GBW)",
                  st.feedback_pole_hz, "frequency", "fp = 1/(2π·rf·cf) >= B",
                  f"1/(2π × {fmt(st.rf, 'resistance', 4)} × {fmt(st.cf, 'capacitance', 4)}) = "
                  f"{f(st.feedback_pole_hz)} (B {f(st.band_hz)})"),
        Explained("tia_loop", "the loop at the least GBW (sensor capacitance only)", g1,
                  "frequency",
                  "Q = √(ωa·rf·(cf + Ct))/(1 + ωa·rf·cf) <= Q_response, f3 >= B; fn = √(GBW/(2π·rf·"
                  "(cf + Ct))); without cf fn = √(GBW/(2π·rf·Ct)); cf(45°) = √(Ct/(2π·rf·GBW))",
                  f"GBW {f(g1)} gives Q {float(q_of(g1, st.rf, st.cf, ct)):.4g} (at most "
                  f"{q:.4g}, {req.tia_response}), -3 dB at "
                  f"{f(float(f3db_of(g1, st.rf, st.cf, ct)))}, fn {f(float(fn_of(g1, st.rf, st.cf, ct)))}; "
                  f"without cf fn {f(fn0)}; cf for 45° at that GBW "
                  f"{fmt(cf45, 'capacitance', 4)}"),
    ]


__all__ = ["gbw_need", "slew_need", "step_span", "tia_rows", "tia_specs"]
