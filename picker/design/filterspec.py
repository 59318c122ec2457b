"""Minimum op-amp specifications of a second-order filter stage.

The band scan of picker.stages.filterbase gives what an ideal op-amp must deliver for an
input of Vp,in at any frequency up to the top frequency f_top (``--freq``, default
10·f0: the band a second-order section acts on):

- slew: SR >= m·Vp,in·max 2π·f·|H(f)| (the steepest slope of the output sine, at the
  frequency where f·|H(f)| peaks: near f0 for a low- or band-pass, f_top for a high-pass);
- swing: the output reaches ref ± Vp,in·max|H(f)| (the response's peak: a chebyshev or
  high-Q section rises above its pass-band gain);
- output current: Iout >= m·Vp,in·max|I_out(f)| (load plus network; the capacitors' share
  grows with frequency);
- common mode: the inputs reach ref ± Vp,in·max|v_p(f)|;
- GBW (rule of thumb): GBW >= 100·G·Q·fn, G the section's noise gain at its pass band
  (K for the non-inverting sections, 1 + |K| for the inverting ones), fn its natural
  frequency (the common active-filter rule that keeps the op-amp's shift of f0 and Q
  near 1%; e.g. the finite-GBW sections of Franco, Design with Operational Amplifiers
  and Analog Integrated Circuits, 4th ed., ch. 3 and 4, from memory; common practice).
  It is a screen: the ``filter_response`` check solves each part exactly.

The gain-error budget of a resistive stage does not apply; the response budget does:
the op-amp may move f0, Q and the pass-band gain by at most ``--response-error``/m each
from the network's own (ideal op-amp) values.
"""

from __future__ import annotations

from picker.design.requirement import Requirement
from picker.design.spec import Budget, Explained, Minimums, Spec
from picker.quantities import fmt
from picker.stages.filterbase import FilterStage

#: GBW >= RULE_FACTOR·G·Q·fn (module docstring).
RULE_FACTOR = 100.0


def rule_gain(st: FilterStage) -> float:
    """G of the GBW rule: the section's noise gain at its pass band."""
    assert st.ideal is not None
    k = abs(st.ideal.gain)
    return 1 + k if st.inverting else k


def gbw_rule(st: FilterStage) -> float:
    """GBW the rule of thumb asks, Hz: RULE_FACTOR·G·Q·fn."""
    assert st.ideal is not None
    return RULE_FACTOR * rule_gain(st) * st.ideal.q * st.ideal.f0_hz


def filter_specs(req: Requirement, st: FilterStage) -> Spec:
    """The minimum specifications of a filter stage (module docstring).

    Returns
    -------
    Spec
        ``minimum.gbw_hz`` is the rule's GBW; A0 and Rin are None (the response check
        solves each part with its own); ``budget`` carries the response budget as
        ``allowed``.
    """
    m, vin, ref = req.margin, req.vin, req.ref
    peak = vin * st.peak_gain
    vcm = vin * st.cm_peak
    minimum = Minimums(
        slew_v_per_s=m * vin * st.slew_per_volt, gbw_hz=gbw_rule(st), aol_v_per_v=None,
        rin_ohm=None, swing_pos_v=ref + peak, swing_neg_v=ref - peak,
        cm_low_v=ref - vcm, cm_high_v=ref + vcm, iout_a=m * vin * st.amps_peak,
        supply_span_v=req.span)
    allowed = req.response_error / m
    budget = Budget(req.response_error, allowed, st.network_error, 0.0, 0.0, allowed,
                    0.0, None, 0.0, allowed)
    assert st.target is not None and st.ideal is not None
    notes = [f"design margin {m:g}: amounts x{m:g}, the response budget /{m:g} (swing and "
             "common-mode range at the stated amplitude, the response's peak included)",
             f"signals up to {fmt(req.freq_hz, 'frequency', 4)} (--freq; default 10 x --f0)",
             "network: " + network_text(st.resistors)]
    if minimum.swing_pos_v > req.rail_pos or minimum.swing_neg_v < req.rail_neg:
        notes.append(f"the output would have to reach {minimum.swing_neg_v:.4g} V .. "
                     f"{minimum.swing_pos_v:.4g} V (the response's peak), beyond the rails: "
                     "no part can pass swing; lower the amplitude or widen the rails")
    return Spec(req, st, abs(st.ideal.gain), st.noise_gain, m, minimum, budget, notes)


def network_text(values: dict[str, float]) -> str:
    """``r1 12 kΩ, c1 27 nF, ...``: resistors in Ω, capacitors in F."""
    def one(k: str, v: float) -> str:
        if k.startswith("c"):
            return f"{k} {fmt(v, 'capacitance', 4)}"
        return f"{k} {'open' if v == float('inf') else fmt(v, 'resistance', 4)}"
    return ", ".join(one(k, v) for k, v in values.items())


def filter_rows(s: Spec) -> list[Explained]:
    """The filter stage's own lines of ``--explain``: the section asked for, the network's
    own section, and the response budget."""
    st, req = s.stage, s.requirement
    assert isinstance(st, FilterStage) and st.target is not None and st.ideal is not None
    t, own = st.target, st.ideal
    shape = ("Q = f0/bandwidth" if t.kind == "bandpass" else
             f"{req.response}" + (f", ripple {req.passband_ripple_db:g} dB"
                                  if req.passband_ripple_db else ""))
    return [
        Explained("section", f"{st.topology} section asked for", t.f0_hz, "frequency",
                  "fn, Q of the response shape's second-order prototype at --f0 "
                  "(picker.stages.sections)",
                  f"{shape}: fn {fmt(t.f0_hz, 'frequency', 5)}, Q {t.q:.5g}, gain "
                  f"{t.gain:+.5g} V/V"),
        Explained("network_section", "the network's own section (ideal op-amp)", own.f0_hz,
                  "frequency", "fn = ωn/2π, Q, K from the stage's closed form",
                  f"fn {fmt(own.f0_hz, 'frequency', 5)} ({own.f0_hz / t.f0_hz - 1:+.2%}), "
                  f"Q {own.q:.5g} ({own.q / t.q - 1:+.2%}), gain {own.gain:+.5g} V/V "
                  f"({own.gain / t.gain - 1:+.2%}); {network_text(dict(st.resistors))}"),
        Explained("response_budget", "how far the op-amp may move f0, Q and gain",
                  s.budget.allowed, "ratio", "e = response error / m",
                  f"{fmt(req.response_error, 'ratio', 4)} / {req.margin:g} = "
                  f"{fmt(s.budget.allowed, 'ratio', 4)} (each of f0, Q, gain, against the "
                  "network's own)"),
    ]


__all__ = ["RULE_FACTOR", "filter_rows", "filter_specs", "gbw_rule", "network_text",
           "rule_gain"]
