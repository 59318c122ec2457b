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

With Ro = 0 the exact gain (picker.circuit.opamp) is G = G_net·T/(1 + T) with loop
gain T = A(s)/NG_eff, NG_eff = (1 + rf/(rg‖(Rin + zp)))·(1 + zp/Rin) (the return ratio
of the op-amp's source; Bode's asymptotic-gain view, e.g. Sedra and Smith,
Microelectronic Circuits, 7th ed., ch. 11, from memory). Hence, with L = A0/NG_eff:
DC loss 1/(1 + L); loss at f: 1 - L/√((1 + L)² + x²), x = f·A0/GBW.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field
from functools import cached_property
from typing import Any

from picker.design.requirement import Requirement
from picker.quantities import Kind, fmt
from picker.stages import Stage, kind, stage

DC_SHARE = 0.2  # of the op-amp's gain-error allowance, spent at DC
RIN_SHARE = 0.2  # of the DC share, left to the input resistance (when it matters)


@dataclass(frozen=True)
class Explained:
    """One line of ``picker spec --explain`` and ``picker why``: a value, its formula
    and the numbers that give it (``expression = value``)."""

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
    tolerance_low: float  # how far resistor tolerance may lower the network's gain
    tolerance_high: float  # ... and raise it (worst case, or RSS on request)
    opamp: float  # loss the op-amp may add (ℓ); <= 0: the network alone misses
    open_loop: float  # A0's DC share
    input_resistance: float | None  # Rin's DC share (None: Rin cannot matter)
    dc: float  # A0 + Rin shares
    bandwidth: float  # the remainder, used at the top frequency


@dataclass(frozen=True)
class Minimums:
    """The least a part must have for the stage (SI units; None = no part can do it or
    it does not matter here). The checks compare each part with these."""

    slew_v_per_s: float
    gbw_hz: float | None
    aol_v_per_v: float | None
    rin_ohm: float | None
    swing_pos_v: float  # the output must reach this level toward V+
    swing_neg_v: float  # ... and this one toward V-
    cm_low_v: float  # the inputs reach down to this level
    cm_high_v: float  # ... and up to this one
    iout_a: float
    supply_span_v: float


@dataclass(frozen=True)
class Spec:
    """The minimum specifications of one stage (SI units)."""

    requirement: Requirement
    stage: Stage
    signal_gain: float
    noise_gain: float
    margin: float
    minimum: Minimums
    budget: Budget
    notes: list[str] = field(default_factory=list)

    @property
    def common_mode(self) -> tuple[float, float]:
        """Lowest and highest level the op-amp's inputs reach, V."""
        return self.minimum.cm_low_v, self.minimum.cm_high_v

    @cached_property
    def explain(self) -> list[Explained]:
        """Each minimum with its formula and numbers (``picker spec --explain``): the
        stage's gains and budget, then what each applicable check asks."""
        from picker.checks import applicable

        if self.requirement.is_filter:  # here: filterspec imports this module
            from picker.design.filterspec import filter_rows

            rows = filter_rows(self)
        elif self.requirement.is_tia:  # here: tiaspec imports this module
            from picker.design.tiaspec import tia_rows

            rows = tia_rows(self)
        else:
            rows = stage_rows(self)
        for check in applicable(self):
            rows += check.explain(self)
        return rows

    @property
    def cautions(self) -> list[str]:
        return self.requirement.cautions

    def to_json(self) -> dict[str, Any]:
        """The JSON shape of ``picker spec --json`` (SI base units); an AC-coupled stage
        adds ``coupling`` (picker.design.coupling.Coupling.to_json)."""
        out = {
            "signal_gain": self.signal_gain,
            "noise_gain": self.noise_gain,
            "margin": self.margin,
            "min": asdict(self.minimum),
            "budget": asdict(self.budget),
        }
        if self.stage.coupling is not None:
            out["coupling"] = self.stage.coupling.to_json()
        return out


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


def tolerance_spread(req: Requirement, st: Stage) -> tuple[float, float]:
    """How far the gain-setting resistors' tolerance may move the network's gain,
    relative to its nominal value: (down, up).

    ``worst``: the extreme corners of R·(1 ± t) (picker.design.tolerance.worst_case).
    ``rss``: t·√(Σ Sᵢ²) either way, Sᵢ = ∂ln G/∂ln Rᵢ (the usual root-sum-square of
    independent tolerances, first order; common practice, no source).
    """
    from picker.design.tolerance import worst_case

    t = req.tolerance
    nominal = abs(st.ideal_gain)
    names = [n for n in kind(req.topology).gain_names if n in st.resistors
             and math.isfinite(st.resistors[n]) and st.resistors[n] > 0]
    if t == 0 or not names or nominal == 0:
        return 0.0, 0.0
    if req.tolerance_rule == "worst":
        lo, hi = worst_case(req.topology, req.source_ohm, st.resistors, t)
        return max(0.0, 1 - lo / nominal), max(0.0, hi / nominal - 1)
    step, total = 1e-6, 0.0
    gain = kind(req.topology).ideal_gain
    for n in names:
        moved = float(abs(gain(req.source_ohm, {**st.resistors, n: st.resistors[n] * (1 + step)})))
        total += ((moved / nominal - 1) / step) ** 2
    w = t * math.sqrt(total)
    return w, w


def _split(req: Requirement, st: Stage) -> tuple[Budget, float | None, float | None, float | None]:
    """The budget and the minimum A0, Rin and GBW (None when the network alone misses).

    With the resistors at the low end of their tolerance (gain r_net·(1 - w-)), the
    op-amp may lose ℓ = 1 - (1 - e)/(r_net·(1 - w-)); the high end r_net·(1 + w+) must
    stay within 1 + e by itself.
    """
    allowed = req.gain_error / req.margin
    r_net = abs(st.ideal_gain) / st.gain
    w_lo, w_hi = tolerance_spread(req, st)
    low = r_net * (1 - w_lo)
    fits = low > 0 and r_net * (1 + w_hi) <= 1 + allowed and low >= 1 - allowed
    opamp = 1 - (1 - allowed) / low if fits else 0.0
    matters = rin_matters(st)
    dc = opamp * DC_SHARE
    a_share = dc * (1 - RIN_SHARE) if matters else dc
    budget = Budget(req.gain_error, allowed, r_net - 1, w_lo, w_hi, opamp, a_share,
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


def tolerance_that_fits(req: Requirement, st: Stage) -> float | None:
    """The largest standard resistor tolerance that leaves the op-amp at least half of
    the gain budget (None when even the tightest class does not).

    A network picker designed is designed again with each class tried (the designer
    counts gain error down to a fifth of the tolerance, so finer resistors may bring
    other values), exactly as a rerun with ``--tolerance`` would build the stage."""
    from picker.design.network import with_designed_network  # here: it imports this one
    from picker.design.tolerance import STANDARD_TOLERANCES
    from picker.errors import BadRequirement

    for t in STANDARD_TOLERANCES:
        if t > req.tolerance:
            continue
        moved = req.with_changes(tolerance=t)
        st_t = st
        if req.network_designed:
            try:
                moved = with_designed_network(moved.with_changes(network=None,
                                                                 network_designed=False))
            except BadRequirement:  # no network at this class: the advice cannot be it
                continue
            st_t = stage(moved)
        b, *_ = _split(moved, st_t)
        if b.opamp >= b.allowed / 2:
            return t
    return None


def minimum_specs(req: Requirement, *, advice: bool = True) -> Spec:
    """Turn a requirement into minimum specifications (see the module docstring).

    Parameters
    ----------
    req : Requirement
        The stage, with its network (an explicit one, or the ideal ratio from ``rf``;
        picker.api designs the E-series network first).
    advice : bool
        Name the resistor tolerance class that fits when the tolerance takes most of
        the gain budget (a network design per class tried; a search that reads only
        the verdict leaves it out).

    Returns
    -------
    Spec
        Gains, the budget split and the ``Minimums`` (SI units).
    """
    st = stage(req)
    if req.is_filter:  # a second-order section (picker.design.filterspec)
        from picker.design.filterspec import filter_specs  # here: it imports this module
        from picker.stages.filterbase import FilterStage

        assert isinstance(st, FilterStage)
        return _with_left_out(filter_specs(req, st))
    if req.is_tia:  # a transimpedance stage (picker.design.tiaspec)
        from picker.design.tiaspec import tia_specs  # here: it imports this module
        from picker.stages.transimpedance import TiaStage

        assert isinstance(st, TiaStage)
        return _with_left_out(tia_specs(req, st))
    m, f, vp, ref = req.margin, req.freq_hz, req.vout, req.ref
    budget, a0, rin, gbw = _split(req, st)
    cm_low, cm_high = kind(req.topology).input_levels(req, st)
    minimum = Minimums(
        slew_v_per_s=2 * math.pi * f * vp * m, gbw_hz=gbw, aol_v_per_v=a0, rin_ohm=rin,
        swing_pos_v=ref + vp, swing_neg_v=ref - vp,  # not scaled by m (module docstring)
        cm_low_v=cm_low, cm_high_v=cm_high,
        iout_a=m * vp * st.amps_per_volt_out, supply_span_v=req.span)
    notes = [f"design margin {m:g}: amounts x{m:g}, allowed errors /{m:g} "
             "(swing and common-mode range are checked at the stated amplitude)",
             "minimum A0, Rin and GBW assume Ro = 0; each part's check uses its own Ro"]
    if minimum.swing_pos_v > req.rail_pos or minimum.swing_neg_v < req.rail_neg:
        notes.append(f"the output would have to reach {minimum.swing_neg_v:.4g} V .. "
                     f"{minimum.swing_pos_v:.4g} V, beyond the rails: no part can pass swing; "
                     "lower the amplitude, move --ref or widen the rails")
    spread = max(budget.tolerance_low, budget.tolerance_high)
    if advice and budget.opamp < budget.allowed / 2 and spread > 0:
        fit = tolerance_that_fits(req, st)
        cls = ("no standard tolerance leaves it room; widen --gain-error" if fit is None else
               f"{fmt(fit, 'ratio')} resistors leave it at least half (--tolerance "
               f"{fmt(fit, 'ratio')})")
        notes.append(f"resistor tolerance {fmt(req.tolerance, 'ratio')} ({req.tolerance_rule}) "
                     f"moves the gain by up to ±{spread:.3%} of the {budget.allowed:.3%} budget, "
                     f"leaving the op-amp {max(budget.opamp, 0.0):.3%}; {cls}")
    if budget.opamp <= 0:
        notes.append(f"the network alone misses the gain budget (nominal {budget.network:+.3%}, "
                     f"tolerance -{budget.tolerance_low:.3%}/+{budget.tolerance_high:.3%} vs "
                     f"{budget.allowed:.3%}); no op-amp can meet it")
    if not st.ideal_network:
        notes.append("network: " + ", ".join(f"{k} {fmt(v, 'resistance')}"
                                              for k, v in st.resistors.items()))
    notes += kind(req.topology).notes(req, st)
    return Spec(req, st, st.gain, st.noise_gain, m, minimum, budget, notes)


def _with_left_out(s: Spec) -> Spec:
    """``s`` with a note naming the checks that would apply but this stage type does not
    support (a verdict must say what it leaves out)."""
    from picker.checks import registered

    left = [c.name for c in registered() if not s.stage.allows(c.name) and c.applies(s)
            and s.stage.replaced_by(c.name) is None]
    if left:
        s.notes.append("not checked for this stage type (the model leaves them out): "
                       + ", ".join(left))
    return s


def stage_rows(s: Spec) -> list[Explained]:
    """The stage's own lines of ``--explain``: signal gain, noise gain, the budget split."""
    req, st, b = s.requirement, s.stage, s.budget
    m, f = req.margin, req.freq_hz
    rin_share = "n/a" if b.input_resistance is None else f"{b.input_resistance:.3%}"
    return [
        Explained("signal_gain", "signal gain", s.signal_gain, "gain", "G = |vout/vin|",
                  f"{s.signal_gain:.6g} V/V ({req.topology})"),
        Explained("noise_gain", "noise gain", s.noise_gain, "gain",
                  "NG = 1 + rf/rg (rg with the source)",
                  f"1 + {fmt(st.rf, 'resistance')}/{fmt(st.rg, 'resistance')} = "
                  f"{s.noise_gain:.6g} V/V"),
        Explained(
            "gain_budget", "gain-error budget split", b.allowed, "ratio",
            "network and resistor tolerance first, op-amp ℓ = 1-(1-e)/(|Gnet|/G·(1-w-)): "
            "DC ℓ/5 (A0 16%, Rin 4% of ℓ), "
            "top frequency the rest (A0, Rin at their minimums)",
            f"e = {fmt(b.allowed, 'ratio')}: network {b.network:+.3%}, resistor tolerance "
            f"-{b.tolerance_low:.3%}/+{b.tolerance_high:.3%} ({req.tolerance_rule}, "
            f"{fmt(req.tolerance, 'ratio')}), A0 {b.open_loop:.3%}, "
            f"Rin {rin_share}, bandwidth {b.bandwidth:.3%} more at {fmt(f, 'frequency')} "
            f"(margin {m:g})"),
    ]


__all__ = ["Budget", "Explained", "Minimums", "Spec", "minimum_specs", "ng_eff", "rin_for",
           "rin_matters", "stage_rows"]
