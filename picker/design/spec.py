"""Minimum op-amp specifications a stage requirement implies, each with its formula.

The design margin m makes every need stricter: amounts the part must deliver (slew
rate, output current, and the A0, Rin and GBW that follow from the gain budget) are
multiplied by m, and allowed errors (gain error, offset, noise) are divided by m.
Output swing and input common-mode range are not scaled: the amplitude is already the
stated largest signal and the headrooms in the parts table are the datasheet's limits,
so a stage that swings 4 Vpp on a 5 V rail-to-rail part is not refused for want of
25% more than the rails. ``--margin 1`` gives the bare physics minimums.

Gain-error budget e = gain error / m, split so that a part exactly at all three
minimums (A0, Rin, GBW, with Ro = 0) lands exactly on the budget at the top frequency:

- the network's own ratio error is taken first (0 for the ideal-ratio network);
- the op-amp may lose ℓ = 1 - (1 - e)/(|G_net|/G) of the gain;
- at DC (a fifth of ℓ), finite open-loop gain A0 gets 16% of ℓ and finite input
  resistance Rin 4% (A0 gets the whole fifth when Rin cannot matter, e.g. a follower
  fed from 0 Ω). Rin lowers the loop gain at every frequency, so its share is small;
- at the top frequency the single-pole roll-off takes the rest, with A0 and Rin at
  their minimums. Typical parts have far more A0 and Rin than these minimums and get
  by with somewhat less GBW; the exact check of each part decides.

With Ro = 0 the exact gain (picker.design.circuit) is G = G_net·T/(1 + T) with loop
gain T = A(s)/NG_eff, NG_eff = (1 + rf/(rg‖(Rin + zp)))·(1 + zp/Rin) (the return ratio
of the op-amp's source; Bode's asymptotic-gain view, e.g. Sedra and Smith,
Microelectronic Circuits, 7th ed., ch. 11, from memory). Hence, with L = A0/NG_eff:
DC loss 1/(1 + L); loss at f: 1 - L/√((1 + L)² + x²), x = f·A0/GBW.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

from picker.design.requirement import Requirement
from picker.quantities import Kind, fmt
from picker.stages import Stage, stage

DC_SHARE = 0.2  # of the op-amp's gain-error allowance, spent at DC
RIN_SHARE = 0.2  # of the DC share, left to the input resistance (when it matters)

MIN_KEYS: tuple[str, ...] = (
    "slew_rate", "gbw", "open_loop_gain", "swing_pos", "swing_neg",
    "output_current", "input_resistance", "supply_span",
)


@dataclass(frozen=True)
class Explained:
    """One line of ``picker spec --explain``: a value, its formula and its numbers."""

    name: str
    title: str
    value: float | None
    kind: Kind
    formula: str
    numbers: str


@dataclass(frozen=True)
class Budget:
    """How the gain-error budget is shared (all relative errors)."""

    total: float  # the requirement's gain error
    allowed: float  # total / margin
    network: float  # the network's own ratio error (signed)
    opamp: float  # loss the op-amp may add (ℓ); <= 0: the network alone misses
    open_loop: float  # A0's DC share
    input_resistance: float | None  # Rin's DC share (None: Rin cannot matter)
    dc: float  # A0 + Rin shares
    bandwidth: float  # the remainder, used at the top frequency


@dataclass(frozen=True)
class Spec:
    """The minimum specifications of one stage (SI units; None = does not apply)."""

    requirement: Requirement
    stage: Stage
    signal_gain: float
    noise_gain: float
    margin: float
    minimum: dict[str, float | None]
    common_mode: tuple[float, float]  # lowest and highest level the inputs reach
    budget: Budget
    notes: list[str] = field(default_factory=list)

    @cached_property
    def explain(self) -> list[Explained]:
        """Each minimum with its formula and numbers (``picker spec --explain``)."""
        return _explain(self)

    @property
    def cautions(self) -> list[str]:
        return self.requirement.cautions

    def to_json(self) -> dict[str, Any]:
        """The JSON shape of ``picker spec --json`` (SI base units)."""
        return {
            "signal_gain": self.signal_gain,
            "noise_gain": self.noise_gain,
            "margin": self.margin,
            "min": {k: self.minimum.get(k) for k in MIN_KEYS},
        }


def ng_eff(st: Stage, rin: float) -> float:
    """Noise gain seen by the op-amp with input resistance Rin (Ro = 0)."""
    if math.isinf(rin):
        return st.noise_gain
    z = rin + st.zp
    zg = z if math.isinf(st.rg) else st.rg * z / (st.rg + z)
    return (1 + st.rf / zg) * (1 + st.zp / rin)


def rin_matters(st: Stage) -> bool:
    """Rin changes the loop only through a resistance at an input (zp or rf)."""
    return st.zp > 0 or st.rf > 0


def rin_for(st: Stage, ng_target: float) -> float:
    """The Rin at which NG_eff equals ``ng_target`` (the formula above solved for Rin):

    Rin = (rg·zp + rf·rg + rf·zp) / (rg·(N - NG)), or (zp + rf)/(N - NG) for rg open.
    """
    ng = st.noise_gain
    if math.isinf(st.rg):
        return (st.zp + st.rf) / (ng_target - ng)
    return (st.rg * st.zp + st.rf * st.rg + st.rf * st.zp) / (st.rg * (ng_target - ng))


def _split(req: Requirement, st: Stage) -> tuple[Budget, float | None, float | None, float | None]:
    """The budget and the minimum A0, Rin and GBW (None when the network alone misses)."""
    allowed = req.gain_error / req.margin
    r_net = abs(st.ideal_gain) / st.gain
    opamp = 1 - (1 - allowed) / r_net if r_net <= 1 + allowed else 0.0
    matters = rin_matters(st)
    dc = opamp * DC_SHARE
    a_share = dc * (1 - RIN_SHARE) if matters else dc
    budget = Budget(req.gain_error, allowed, r_net - 1, opamp, a_share,
                    dc - a_share if matters else None, dc, opamp - dc)
    if opamp <= 0:
        return budget, None, None, None
    ng = st.noise_gain
    a0 = ng * (1 - a_share) / a_share
    ng_target = a0 * dc / (1 - dc)
    rin = rin_for(st, ng_target) if matters else None
    loop_gain = (1 - dc) / dc  # L = A0/NG_eff at the minimums
    x = math.sqrt(loop_gain**2 / (1 - opamp) ** 2 - (1 + loop_gain) ** 2)
    gbw = req.freq_hz * a0 / x
    return budget, a0, rin, gbw


def minimum_specs(req: Requirement) -> Spec:
    """Turn a requirement into minimum specifications (see the module docstring)."""
    st = stage(req)
    m, f, vp, ref = req.margin, req.freq_hz, req.vout, req.ref
    ng = st.noise_gain
    budget, a0, rin, gbw = _split(req, st)
    slew = 2 * math.pi * f * vp * m
    swing_pos, swing_neg = ref + vp, ref - vp  # not scaled by m (module docstring)
    vcm = st.cm_per_volt * req.vin
    cm = (ref - vcm, ref + vcm)
    amps = m * vp * st.amps_per_volt_out
    minimum: dict[str, float | None] = {
        "slew_rate": slew, "gbw": gbw, "open_loop_gain": a0,
        "swing_pos": swing_pos, "swing_neg": swing_neg, "output_current": amps,
        "input_resistance": rin, "supply_span": req.span,
    }
    notes = [f"design margin {m:g}: amounts x{m:g}, allowed errors /{m:g} "
             "(swing and common-mode range are checked at the stated amplitude)",
             "minimum A0, Rin and GBW assume Ro = 0; each part's check uses its own Ro"]
    if swing_pos > req.rail_pos or swing_neg < req.rail_neg:
        notes.append(f"the output would have to reach {swing_neg:.4g} V .. {swing_pos:.4g} V, "
                     "beyond the rails: no part can pass swing; lower the amplitude, move "
                     "--ref or widen the rails")
    if budget.opamp <= 0:
        notes.append(f"the network alone misses the gain budget ({budget.network:+.3%} vs "
                     f"{budget.allowed:.3%}); no op-amp can meet it")
    if not st.ideal_network:
        notes.append("network: " + ", ".join(f"{k} {fmt(v, 'resistance')}"
                                              for k, v in st.resistors.items()))
    return Spec(req, st, st.gain, ng, m, minimum, cm, budget, notes)


def _v(x: float | None, kind: Kind) -> str:
    return fmt(x, kind)


def _explain(s: Spec) -> list[Explained]:
    req, st, b, mn = s.requirement, s.stage, s.budget, s.minimum
    m, f, vp, ref = req.margin, req.freq_hz, req.vout, req.ref
    ng = s.noise_gain
    rows = [
        Explained("signal_gain", "signal gain", s.signal_gain, "gain", "G = |vout/vin|",
                  f"{s.signal_gain:.6g} V/V ({req.topology})"),
        Explained("noise_gain", "noise gain", ng, "gain", "NG = 1 + rf/rg (rg with the source)",
                  f"1 + {_v(st.rf, 'resistance')}/{_v(st.rg, 'resistance')} = {ng:.6g} V/V"),
        Explained(
            "gain_error", "gain-error budget", b.allowed, "ratio",
            "e = gain error/m; network first, op-amp ℓ = 1-(1-e)/(|Gnet|/G): DC ℓ/5 "
            "(A0 16%, Rin 4% of ℓ), top frequency the rest (A0, Rin at their minimums)",
            f"{_v(b.total, 'ratio')}/{m:g} = {_v(b.allowed, 'ratio')}: network "
            f"{b.network:+.3%}, A0 {b.open_loop:.3%}, Rin "
            + ("n/a" if b.input_resistance is None else f"{b.input_resistance:.3%}")
            + f", bandwidth {b.bandwidth:.3%} more at {_v(f, 'frequency')}"),
        Explained("slew_rate", "minimum slew rate", mn["slew_rate"], "slew",
                  "SR >= 2π·f·Vp,out·m",
                  f"2π × {_v(f, 'frequency')} × {vp:.4g} V × {m:g} = {_v(mn['slew_rate'], 'slew')}"),
    ]
    a0, rin, gbw = mn["open_loop_gain"], mn["input_resistance"], mn["gbw"]
    rows.append(Explained(
        "open_loop_gain", "minimum open-loop gain", a0, "gain",
        "A0 >= NG·(1 - eA)/eA  (DC loss 1/(1 + A0/NG) = eA)",
        "-" if a0 is None else
        f"{ng:.5g} × (1 - {b.open_loop:.4g})/{b.open_loop:.4g} = {a0:.4g} V/V ({_v(a0, 'gain')})"))
    rows.append(Explained(
        "input_resistance", "minimum input resistance", rin, "resistance",
        "Rin = (rg·zp + rf·rg + rf·zp)/(rg·(N - NG)), N = A0,min·e_dc/(1 - e_dc)",
        "does not matter here (no resistance at the inputs)" if rin is None else
        f"rf {_v(st.rf, 'resistance')}, rg {_v(st.rg, 'resistance')}, zp "
        f"{_v(st.zp, 'resistance')}, e_dc {b.dc:.4g} -> {_v(rin, 'resistance')}"))
    if gbw is not None and a0 is not None:
        lg = (1 - b.dc) / b.dc
        gbw_numbers = (f"L = {lg:.5g}, ℓ = {b.opamp:.4g}: {_v(f, 'frequency')} × {a0:.4g} / "
                       f"√({lg:.5g}²/(1-{b.opamp:.4g})² - {1 + lg:.5g}²) = {_v(gbw, 'frequency')}")
    else:
        gbw_numbers = "-"
    rows.append(Explained(
        "gbw", "minimum gain-bandwidth product", gbw, "frequency",
        "GBW >= f·A0,min/√(L²/(1-ℓ)² - (1+L)²), L = (1 - e_dc)/e_dc", gbw_numbers))
    rows += [
        Explained("swing_pos", "output must reach (toward V+)", mn["swing_pos"], "voltage",
                  "ref + Vp,out",
                  f"{ref:.4g} V + {vp:.4g} V = {mn['swing_pos']:.4g} V "
                  f"(within {req.rail_pos - mn['swing_pos']:.3g} V of V+)"),  # type: ignore[operator]
        Explained("swing_neg", "output must reach (toward V-)", mn["swing_neg"], "voltage",
                  "ref - Vp,out",
                  f"{ref:.4g} V - {vp:.4g} V = {mn['swing_neg']:.4g} V "
                  f"(within {mn['swing_neg'] - req.rail_neg:.3g} V of V-)"),  # type: ignore[operator]
        Explained("common_mode", "input common-mode range", s.common_mode[1] - s.common_mode[0],
                  "voltage", "ref ± |kp|·Vp,in (the inputs follow the non-inverting input)",
                  f"{s.common_mode[0]:.4g} V .. {s.common_mode[1]:.4g} V"
                  + (" (inputs sit at the reference)" if st.cm_per_volt == 0 else "")),
        Explained("output_current", "minimum output current", mn["output_current"], "current",
                  "m·Vp,out·(1/RL + (1 - vn/vo)/rf)",
                  f"{m:g} × {vp:.4g} V × {st.amps_per_volt_out:.4g} S = "
                  f"{_v(mn['output_current'], 'current')}"),
        Explained("supply_span", "supply span to be rated for", req.span, "voltage",
                  "V+ - V-", f"{req.rail_pos:g} V - ({req.rail_neg:g} V) = {req.span:g} V"),
    ]
    if req.offset_max_v is not None:
        lim = req.offset_max_v / m
        rows.append(Explained(
            "offset", "allowed output offset", lim, "voltage",
            "NG·(Vos + drift·ΔT) + |Ib·(rf - zp·NG)| + Ios/2·(rf + zp·NG) <= Vmax/m",
            f"{_v(req.offset_max_v, 'voltage')}/{m:g} = {_v(lim, 'voltage')}; Vos alone "
            f"<= {_v(lim / ng, 'voltage')}; ΔT = {req.drift_span_c:g} °C"))
    if req.noise_max_v is not None:
        lim = req.noise_max_v / m
        rows.append(Explained(
            "noise", "allowed output noise (RMS)", lim, "voltage",
            "√(Σ density²·π/2·f_cl) <= Vn,max/m, f_cl = closed-loop pole",
            f"{_v(req.noise_max_v, 'voltage')}/{m:g} = {_v(lim, 'voltage')} at "
            f"{req.temp_max_c:g} °C"))
    return rows


__all__ = ["MIN_KEYS", "Budget", "Explained", "Spec", "minimum_specs", "ng_eff", "rin_for",
           "rin_matters"]
