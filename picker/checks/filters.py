"""Checks of a second-order filter stage (picker.stages.filterbase; minimums in
picker.design.filterspec). They replace the resistive stage's gain, phase, noise, slew
and output-current checks, which assume a frequency-independent network.

- filter_gbw: GBW >= 100·G·Q·fn, the rule of thumb (a screen; source in filterspec);
- filter_response: the part's own f0, Q and pass-band gain, fitted (Levy's least squares,
  picker.stages.sections.fit_many) to the exact solver response of the whole circuit with
  the part's A0, GBW, Rin and Ro (single-pole A(s); picker.design.response.solved_gain)
  at 41 points from fn/2 to 2·fn; the largest relative move of the three from the
  network's own section (ideal op-amp) must stay within --response-error/m;
- filter_slew: SR >= m·Vp,in·max 2π·f·|H(f)| up to --freq;
- filter_current: Iout >= m·Vp,in·max|I_out(f)| (load plus network) up to --freq;
- filter_min_gain: a decompensated part (stable only above a noise gain) must see at
  least that noise gain where its loop crosses unity, far above fn. The single-pole
  model of filter_response cannot see this;
- filter_stability (picker.checks.filterloop): the phase margin of the filter's loop with
  the two-pole part model, β(s) of the network with its capacitors;
- filter_noise (picker.checks.filternoise): the output noise, every source through its own
  transfer function, integrated over frequency.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from picker.checks import Check
from picker.checks.core import Array, CheckResult, Parts, result
from picker.checks.filterloop import FILTER_STABILITY
from picker.checks.filternoise import FILTER_NOISE
from picker.checks.limits import rated_slew
from picker.circuit.nullor import transfer
from picker.circuit.opamp import loop
from picker.design.filterspec import RULE_FACTOR, gbw_rule, rule_gain
from picker.design.response import solved_gain
from picker.design.spec import Explained
from picker.quantities import fmt
from picker.stages.filterbase import FilterStage
from picker.stages.sections import fit_grid, fit_many

if TYPE_CHECKING:
    from picker.design.spec import Spec


def _is_filter(s: Spec) -> bool:
    return isinstance(s.stage, FilterStage)


def _st(s: Spec) -> FilterStage:
    st = s.stage
    assert isinstance(st, FilterStage) and st.ideal is not None
    return st


def _f(x: float) -> str:
    return fmt(x, "frequency", 4)


# -- GBW rule ------------------------------------------------------------------------------

def _gbw(p: Parts, s: Spec) -> CheckResult:
    return result("filter_gbw", "frequency", ">=", gbw_rule(_st(s)), p["gbw_hz"])


def _gbw_explain(s: Spec) -> list[Explained]:
    st = _st(s)
    own = st.ideal
    assert own is not None
    return [Explained("filter_gbw", "GBW for the section (rule of thumb)", gbw_rule(st),
                      "frequency", FILTER_GBW.formula,
                      f"{RULE_FACTOR:g} × {rule_gain(st):.4g} × {own.q:.4g} × "
                      f"{_f(own.f0_hz)} = {_f(gbw_rule(st))}")]


FILTER_GBW = Check(
    name="filter_gbw", kind="frequency", reads=("gbw_hz",), run=_gbw,
    formula="GBW >= 100·G·Q·fn (G the section's noise gain in its pass band: K for a "
            "non-inverting section, 1 + |K| for an inverting one; a screen, the response "
            "check solves each part)",
    explain=_gbw_explain,
    detail=lambda s, p, i: f"GBW {_f(float(p['gbw_hz'][i]))}",
    applies=_is_filter, amplitude="independent")


# -- the response with the part ---------------------------------------------------------

#: part columns the response check reads
RESPONSE_READS = ("aol_v_per_v", "gbw_hz", "rin_ohm", "rout_ohm")


def part_sections(p: Parts, s: Spec) -> tuple[Array, Array, Array]:
    """Per part the fitted (f0 Hz, Q, gain) of the whole circuit with the part (module
    docstring); NaN where GBW is unknown. Unknown A0 counts as infinite, Rin as open,
    Ro as 0: the unknown rule of the registry then keeps such a part from passing."""
    st = _st(s)
    assert st.ideal is not None
    key = ("filter_sections", st.topology, tuple(sorted(st.resistors.items())), st.load)

    def make() -> tuple[Array, Array, Array]:
        f = fit_grid(st.ideal.f0_hz)  # type: ignore[union-attr]
        gbw = p["gbw_hz"]
        known = np.isfinite(gbw) & (gbw > 0)
        cols = {c: p[c] for c in RESPONSE_READS}
        h = solved_gain(st, cols, np.where(known, gbw, 1.0), f)
        h[~known] = np.nan
        return fit_many(st.kind, f, h)

    return p.memo(key, make)  # type: ignore[no-any-return]


def _moves(p: Parts, s: Spec) -> tuple[Array, Array, Array]:
    """Relative moves of f0, Q and gain from the network's own section, per part."""
    own = _st(s).ideal
    assert own is not None
    f0, q, k = part_sections(p, s)
    return f0 / own.f0_hz - 1, q / own.q - 1, k / own.gain - 1


def _response(p: Parts, s: Spec) -> CheckResult:
    df, dq, dk = _moves(p, s)
    with np.errstate(invalid="ignore"):
        has = np.maximum(np.maximum(np.abs(df), np.abs(dq)), np.abs(dk))
    return result("filter_response", "ratio", "<=", s.budget.allowed, has)


def _response_explain(s: Spec) -> list[Explained]:
    req, own = s.requirement, _st(s).ideal
    assert own is not None
    return [Explained(
        "filter_response", "largest move of f0, Q or gain the op-amp may cause",
        s.budget.allowed, "ratio", FILTER_RESPONSE.formula,
        f"{fmt(req.response_error, 'ratio', 4)} / {req.margin:g} = "
        f"{fmt(s.budget.allowed, 'ratio', 4)} of the network's fn {_f(own.f0_hz)}, "
        f"Q {own.q:.4g}, gain {own.gain:+.4g} V/V")]


def _response_detail(s: Spec, p: Parts, i: int) -> str:
    one = p.take([i])
    f0, q, k = (float(x[0]) for x in part_sections(one, s))
    df, dq, dk = (float(x[0]) for x in _moves(one, s))
    return (f"with the part: fn {_f(f0)} ({df:+.3%}), Q {q:.5g} ({dq:+.3%}), gain "
            f"{k:+.5g} V/V ({dk:+.3%}) from the network's own")


FILTER_RESPONSE = Check(
    name="filter_response", kind="ratio", reads=RESPONSE_READS, run=_response,
    formula="max(|fn/fn,net - 1|, |Q/Qnet - 1|, |K/Knet - 1|) <= response error/m; fn, Q, K "
            "fitted to the exact nodal solution with the part (A(s) = A0/(1 + s·A0/(2π·GBW)), "
            "Rin, Ro, source, load, network) from fn/2 to 2·fn",
    explain=_response_explain, detail=_response_detail, applies=_is_filter,
    amplitude="independent")


# -- slew and output current at the response's peak ---------------------------------------

def _slew_explain(s: Spec) -> list[Explained]:
    req, st = s.requirement, _st(s)
    return [Explained(
        "filter_slew", "minimum slew rate (at the response's steepest output)",
        s.minimum.slew_v_per_s, "slew", FILTER_SLEW.formula,
        f"{req.margin:g} × {fmt(req.vin, 'voltage', 4)} × "
        f"{fmt(st.slew_per_volt, 'slew', 4)} per volt (up to {_f(req.freq_hz)}) = "
        f"{fmt(s.minimum.slew_v_per_s, 'slew', 4)}")]


FILTER_SLEW = rated_slew(
    "filter_slew", "SR >= m·Vp,in·max 2π·f·|H(j2πf)| for f up to --freq (a sine's steepest "
    "output slope wherever the response makes it largest)", _slew_explain, applies=_is_filter)


def _current(p: Parts, s: Spec) -> CheckResult:
    return result("filter_current", "current", ">=", s.minimum.iout_a, p["iout_a"])


def _current_explain(s: Spec) -> list[Explained]:
    req, st = s.requirement, _st(s)
    return [Explained(
        "filter_current", "minimum output current (load plus network, at its peak)",
        s.minimum.iout_a, "current", FILTER_CURRENT.formula,
        f"{req.margin:g} × {fmt(req.vin, 'voltage', 4)} × {fmt(st.amps_peak, 'current', 4)} "
        f"per volt (up to {_f(req.freq_hz)}) = {fmt(s.minimum.iout_a, 'current', 4)}")]


FILTER_CURRENT = Check(
    name="filter_current", kind="current", reads=("iout_a",), run=_current,
    formula="Iout >= m·Vp,in·max |I_out(j2πf)| for f up to --freq (into the load and every "
            "resistor and capacitor at the output, ideal op-amp)",
    explain=_current_explain,
    detail=lambda s, p, i: f"output current limit {fmt(float(p['iout_a'][i]), 'current', 4)}",
    applies=_is_filter, amplitude="proportional")


def phase_deg(p: Parts, s: Spec) -> Array:
    """Per part the phase of the real response at --freq from the ideal-op-amp response's
    (the network's own), degrees; negative is a lag. NaN where GBW is blank."""
    st = _st(s)
    f = s.requirement.freq_hz
    gbw = p["gbw_hz"]
    known = np.isfinite(gbw) & (gbw > 0)
    cols = {c: p[c] for c in RESPONSE_READS}
    real = solved_gain(st, cols, np.where(known, gbw, 1.0), [f])[:, 0]
    ideal = complex(transfer(st.circuit, [f])[0])
    return np.where(known, np.degrees(np.angle(real / ideal)), np.nan)  # type: ignore[no-any-return]


# -- decompensated parts -------------------------------------------------------------------

def hf_noise_gain(s: Spec) -> float:
    """The section's noise gain 1/|β| far above fn (1000·fn, ideal Rin and Ro): where a
    decompensated part's loop crosses unity (K for a non-inverting section, whose gain
    pair sets it; 1 for a multiple-feedback one, whose feedback capacitor shorts it)."""
    st = _st(s)
    assert st.ideal is not None
    lp = loop(st, [np.inf], [0.0], freq_hz=1000 * st.ideal.f0_hz)
    return float(1 / abs(complex(lp.beta[0])))


def _min_gain(p: Parts, s: Spec) -> CheckResult:
    """The part's least stable noise gain (blank with a phase margin known: unity-gain
    stable, as the field says; blank with neither: unknown)."""
    mng, pm = p["min_noise_gain"], p["pm_unity_deg"]
    has = np.where(np.isnan(mng), np.where(np.isnan(pm), np.nan, 1.0), mng)
    return result("filter_min_gain", "gain", "<=", hf_noise_gain(s), has)


def _min_gain_explain(s: Spec) -> list[Explained]:
    ng = hf_noise_gain(s)
    return [Explained("filter_min_gain", "noise gain the loop crosses unity at", ng, "gain",
                      FILTER_MIN_GAIN.formula,
                      f"1/|β(1000·fn)| = {ng:.4g} V/V: a part must be stable at it")]


def _min_gain_detail(s: Spec, p: Parts, i: int) -> str:
    mng, pm = float(p["min_noise_gain"][i]), float(p["pm_unity_deg"][i])
    if not np.isnan(mng):
        return f"stable for noise gain >= {mng:.4g} V/V"
    return ("unity-gain stable (phase margin " + fmt(pm, "angle", 3) + ")"
            if not np.isnan(pm) else "neither the least stable noise gain nor the phase "
            "margin is recorded")


FILTER_MIN_GAIN = Check(
    name="filter_min_gain", kind="gain", reads=("min_noise_gain", "pm_unity_deg"),
    run=_min_gain, needs=lambda s: (),
    formula="least stable noise gain of the part <= the section's noise gain far above fn "
            "(a decompensated part oscillates below it; blank: unity-gain stable only when "
            "its phase margin is recorded)",
    explain=_min_gain_explain, detail=_min_gain_detail, applies=_is_filter, ranked=False,
    amplitude="independent")


CHECKS: tuple[Check, ...] = (FILTER_GBW, FILTER_RESPONSE, FILTER_STABILITY, FILTER_SLEW,
                             FILTER_CURRENT, FILTER_MIN_GAIN, FILTER_NOISE)

__all__ = ["CHECKS", "FILTER_CURRENT", "FILTER_GBW", "FILTER_MIN_GAIN", "FILTER_RESPONSE", "FILTER_SLEW",
           "part_sections", "phase_deg"]
