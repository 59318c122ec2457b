"""Checks of hard limits: output swing, input common-mode range, slew rate, output
current, supply span and stock. Pure functions over part arrays (one element per part).

Swing and common mode are measured as distances from the reference level: the part
has ``(V+ - headroom+) - ref`` towards V+ and ``ref - (V- + headroom-)`` towards V-,
and the stage needs ``Vp`` on each side (not scaled by the design margin: see
picker.design.spec). The worse side is reported. Headrooms are the datasheet's
"output (or input) within X V of the rail".
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import TYPE_CHECKING

import numpy as np

from picker.checks import Check
from picker.checks.core import ASSUMED, Array, CheckResult, Coded, Parts, result, worse
from picker.circuit.output import reach
from picker.design.spec import Explained
from picker.quantities import fmt
from picker.stages.difference import input_impedances

if TYPE_CHECKING:
    from picker.design.spec import Spec


def _v(x: float) -> str:
    return fmt(x, "voltage", 4)


# -- swing -------------------------------------------------------------------------------

#: The note a part gets when its swing is taken from light-load figures (--light-load-swing).
LIGHT_LOAD_ASSUMED = ASSUMED + "light-load headroom, no Rsat"


def _peak_current(s: Spec) -> float:
    """Output pin current at the peak, A: load plus feedback network (no margin: the
    swing is checked at the stated amplitude)."""
    return s.requirement.vout * s.stage.amps_per_volt_out


def _swing_light_load(s: Spec) -> bool:
    """Whether a part without Rsat is checked with its light-load headroom (opt-in)."""
    return s.requirement.light_load_swing and s.stage.amps_per_volt_out > 0


def _reach(p: Parts, s: Spec) -> tuple[Array, Array]:
    """Distance from the reference the output reaches toward V+ and toward V- while
    driving the stage at the peak (picker.circuit.output.reach, the waveform's model)."""
    req, g = s.requirement, s.stage.amps_per_volt_out
    up = reach((req.rail_pos - req.ref) - p["out_head_pos_v"], p["out_rsat_pos_ohm"], g)
    down = reach((req.rail_neg - req.ref) + p["out_head_neg_v"], p["out_rsat_neg_ohm"], g)
    return up, -down


def _swing(p: Parts, s: Spec) -> CheckResult:
    """Output must reach ref ± Vp,out driving the stage: rail minus the headroom at the
    peak output current, per side."""
    req = s.requirement
    up_has, down_has = _reach(p, s)
    notes: list[Coded | str] = ["toward V+", "toward V-"]
    if _swing_light_load(s):
        for k, (side, f) in enumerate((("toward V+", "out_rsat_pos_ohm"),
                                       ("toward V-", "out_rsat_neg_ohm"))):
            assumed = np.isnan(p[f])
            notes[k] = Coded(assumed.astype(np.int8), (side, f"{side}; {LIGHT_LOAD_ASSUMED}"))
    up = result("swing", "voltage", ">=", s.minimum.swing_pos_v - req.ref, up_has,
                note=notes[0])
    down = result("swing", "voltage", ">=", req.ref - s.minimum.swing_neg_v, down_has,
                  note=notes[1])
    return worse(up, down)


def _swing_needs(s: Spec) -> tuple[str, ...]:
    """The light-load headrooms always; the saturation resistances when the stage draws
    output current, unless the user opted in to light-load figures."""
    heads = ("out_head_pos_v", "out_head_neg_v")
    if s.stage.amps_per_volt_out > 0 and not s.requirement.light_load_swing:
        return heads + ("out_rsat_pos_ohm", "out_rsat_neg_ohm")
    return heads


def _swing_explain(s: Spec) -> list[Explained]:
    req, mn = s.requirement, s.minimum
    g = s.stage.amps_per_volt_out
    return [
        Explained("swing", "output swing, each side of the reference", req.vout, "voltage",
                  SWING.formula,
                  f"{_v(mn.swing_pos_v)} - {_v(req.ref)} = {_v(mn.swing_pos_v - req.ref)}"),
        Explained("swing_levels", "output levels to reach", None, "voltage", "ref ± Vp,out",
                  f"{_v(mn.swing_neg_v)} .. {_v(mn.swing_pos_v)} (rails {req.rail_neg:g} V "
                  f"/ {req.rail_pos:+g} V)"),
        Explained("swing_current", "output current at the peak (headroom grows by Rsat × it)",
                  _peak_current(s), "current", "I_pk = Vp,out/R_eff (load plus network)",
                  f"{_v(req.vout)} / {fmt(math.inf if g == 0 else 1 / g, 'resistance', 4)} = "
                  f"{fmt(_peak_current(s), 'current', 4)}"
                  + (" (light-load headroom assumed where Rsat is unknown)"
                     if _swing_light_load(s) else "")),
    ]


def _swing_detail(s: Spec, p: Parts, i: int) -> str:
    req, ipk = s.requirement, _peak_current(s)
    one = p.take([i])
    up, down = (float(x[0]) for x in _reach(one, s))
    sides = []
    for name, rail, sign, head, rsat, got in (
            ("V+", req.rail_pos, 1, "out_head_pos_v", "out_rsat_pos_ohm", up),
            ("V-", req.rail_neg, -1, "out_head_neg_v", "out_rsat_neg_ohm", down)):
        h, r = float(one[head][0]), float(one[rsat][0])
        light = sign * (rail - req.ref) - h
        r_text = ("Rsat unknown" + (", light-load headroom assumed" if req.light_load_swing
                                    else "") if math.isnan(r) else f"Rsat {fmt(r, 'resistance')}")
        sides.append(f"toward {name} {_v(light)} at light load (head {_v(h)}), {r_text}: "
                     f"reaches {_v(got)} at {fmt(ipk, 'current')}")
    return "; ".join(sides)


SWING = Check(
    name="swing", kind="voltage",
    reads=("out_head_pos_v", "out_head_neg_v", "out_rsat_pos_ohm", "out_rsat_neg_ohm"),
    run=_swing, needs=_swing_needs,
    formula="each side (V± ∓ head± - ref)/(1 + Rsat±/R_eff) >= need = Vp,out (the output "
            "must reach ref ± Vp,out while driving the load and network, headroom + Rsat·I)",
    explain=_swing_explain, detail=_swing_detail, amplitude="proportional")


# -- common mode -------------------------------------------------------------------------

def _cm_centre(s: Spec) -> float:
    """The middle of the inputs' excursion, V: the reference, except for a difference
    stage whose --vcm moves it (the distances on each side are measured from here)."""
    return (s.minimum.cm_low_v + s.minimum.cm_high_v) / 2


def _common_mode(p: Parts, s: Spec) -> CheckResult:
    """The inputs' levels (Minimums.cm_low_v .. cm_high_v) inside the part's
    common-mode range, per side, as distances from the middle of the excursion."""
    req, c = s.requirement, _cm_centre(s)
    up = result("common_mode", "voltage", ">=", s.minimum.cm_high_v - c,
                (req.rail_pos - c) - p["cm_head_pos_v"], note="toward V+")
    down = result("common_mode", "voltage", ">=", c - s.minimum.cm_low_v,
                  (c - req.rail_neg) - p["cm_head_neg_v"], note="toward V-")
    return worse(up, down)


def _cm_explain(s: Spec) -> list[Explained]:
    req, st, c = s.requirement, s.stage, _cm_centre(s)
    lo, hi = s.common_mode
    levels = f"inputs at {_v(lo)} .. {_v(hi)}"
    if req.topology != "difference":
        kp = st.cm_per_volt
        return [Explained(
            "common_mode", "input common-mode excursion, each side of the reference",
            kp * req.vin, "voltage", COMMON_MODE.formula,
            f"{kp:.4g} × {_v(req.vin)} = {_v(kp * req.vin)} ({levels})")]
    vcm = req.vcm if req.vcm is not None else (req.ref, req.ref)
    rs, r = req.source_ohm, st.resistors
    k = r["r4"] / (rs + r["r3"] + r["r4"])
    z = input_impedances(r)
    ohm = {n: fmt(v, "resistance", 4) for n, v in z.items()}
    return [
        Explained(
            "common_mode", "input excursion each side of its middle", hi - c, "voltage",
            COMMON_MODE.formula,
            f"({_v(hi)} - ({_v(lo)})) / 2 = {_v(hi - c)} (inputs from {_v(lo)} to {_v(hi)}, "
            f"middle {_v(c)}: vp = ref + k·(Vcm - ref ± Vp,in/2), ref {_v(req.ref)}, Vcm "
            f"{_v(vcm[0])} .. {_v(vcm[1])}"
            + ("" if req.vcm is not None else " (no --vcm: the reference)")
            + f", Vp,in {_v(req.vin)}, k = r4/(Rs + r3 + r4) = {k:.5g} nominal, at r3, r4 "
            f"±{fmt(req.tolerance, 'ratio')} its extremes)"),
        Explained(
            "input_impedance", "input impedance of each input (ideal op-amp)", z["plus"],
            "resistance",
            "+ input: r3 + r4 (either mode); - input: r1/(1 + k) balanced differential, "
            "r1/(1 - k) common mode, k = r4/(r3 + r4); floating source: r1 + r3",
            f"+ {ohm['plus']}; - {ohm['minus_diff']} differential, {ohm['minus_cm']} common "
            f"mode; floating {ohm['floating']}"),
    ]


def _cm_detail(s: Spec, p: Parts, i: int) -> str:
    req, c = s.requirement, _cm_centre(s)
    hp, hn = float(p["cm_head_pos_v"][i]), float(p["cm_head_neg_v"][i])
    return (f"toward V+ ({_v(req.rail_pos)} - {_v(hp)}) - {_v(c)} = "
            f"{_v(req.rail_pos - hp - c)}; toward V- {_v(c)} - ({_v(req.rail_neg)} "
            f"+ {_v(hn)}) = {_v(c - req.rail_neg - hn)}")


COMMON_MODE = Check(
    name="common_mode", kind="voltage", reads=("cm_head_pos_v", "cm_head_neg_v"),
    run=_common_mode,
    formula="each side (V+ - cm head+) - c and c - (V- + cm head-) >= need, the inputs' "
            "excursion from its middle c (= ref and |kp|·Vp,in: the inputs follow the "
            "non-inverting input; difference stage: vp = ref + k·(Vcm - ref ± Vp,in/2), "
            "k = r4/(Rs + r3 + r4) at its tolerance extremes, both ends of --vcm)",
    explain=_cm_explain, detail=_cm_detail,
    # with --vcm the levels' middle moves with the common mode, not with the amplitude
    amplitude=lambda s: "other" if s.requirement.vcm is not None else "proportional")


# -- slew --------------------------------------------------------------------------------

def _slew_explain(s: Spec) -> list[Explained]:
    req = s.requirement
    return [Explained(
        "slew", "minimum slew rate", s.minimum.slew_v_per_s, "slew", SLEW.formula,
        f"2π × {fmt(req.freq_hz, 'frequency', 4)} × {_v(req.vout)} × {req.margin:g} = "
        f"{fmt(s.minimum.slew_v_per_s, 'slew', 4)}")]


def _every_stage(s: Spec) -> bool:
    return True


def rated_slew(name: str, formula: str, explain: Callable[[Spec], list[Explained]],
               applies: Callable[[Spec], bool] = _every_stage) -> Check:
    """A check that the part's rated slew rate reaches the stage's minimum
    (``Spec.minimum.slew_v_per_s``); each stage family gives the formula of its minimum
    and its explanation (``applies``: the stages it holds for)."""
    def run(p: Parts, s: Spec) -> CheckResult:
        return result(name, "slew", ">=", s.minimum.slew_v_per_s, p["slew_v_per_s"])

    return Check(name=name, kind="slew", reads=("slew_v_per_s",), run=run, formula=formula,
                 explain=explain, amplitude="proportional",
                 detail=lambda s, p, i: f"rated {fmt(float(p['slew_v_per_s'][i]), 'slew', 4)}",
                 applies=applies)


#: SR >= 2π·f·Vp,out·m: a sine's steepest slope (Vp·ω at the zero crossing)
SLEW = rated_slew("slew", "SR >= 2π·f·Vp,out·m (a sine's steepest slope, with the margin)",
                  _slew_explain)


# -- output current ------------------------------------------------------------------------

def _output_current(p: Parts, s: Spec) -> CheckResult:
    """Iout >= m·Vp,out·(1/RL + (1 - vn/vo)/rf): load plus feedback network at the peak."""
    need = s.minimum.iout_a
    r = result("output_current", "current", ">=", need, p["iout_a"])
    if need == 0:  # nothing to drive: no limit to meet, whatever the part
        return CheckResult(r.name, r.kind, r.sense, r.need, r.has,
                           np.full(len(p), math.inf), r.note)
    return r


def _current_explain(s: Spec) -> list[Explained]:
    req, st = s.requirement, s.stage
    g = st.amps_per_volt_out
    r_eff = math.inf if g == 0 else 1 / g
    return [Explained(
        "output_current", "minimum output current", s.minimum.iout_a, "current",
        OUTPUT_CURRENT.formula,
        f"{req.margin:g} × {_v(req.vout)} / {fmt(r_eff, 'resistance', 4)} = "
        f"{fmt(s.minimum.iout_a, 'current', 4)}")]


def _current_detail(s: Spec, p: Parts, i: int) -> str:
    return f"output current limit {fmt(float(p['iout_a'][i]), 'current', 4)}"


OUTPUT_CURRENT = Check(
    name="output_current", kind="current", reads=("iout_a",), run=_output_current,
    needs=lambda s: ("iout_a",) if s.minimum.iout_a > 0 else (),
    formula="Iout >= m·Vp,out/R_eff, 1/R_eff = 1/RL + (1 - vn/vo)/rf "
            "(load plus feedback network at the peak)",
    explain=_current_explain, detail=_current_detail, amplitude="proportional")


# -- supply ------------------------------------------------------------------------------

def _supply(p: Parts, s: Spec) -> CheckResult:
    """The rail span must lie inside the part's rated supply range."""
    span = s.requirement.span
    high = result("supply", "voltage", ">=", span, p["supply_max_v"], note="rated maximum")
    low = result("supply", "voltage", "<=", span, p["supply_min_v"], note="rated minimum")
    return worse(high, low)


def _supply_explain(s: Spec) -> list[Explained]:
    req = s.requirement
    return [Explained("supply", "supply span to be rated for", req.span, "voltage",
                      SUPPLY.formula,
                      f"{_v(req.rail_pos)} - ({_v(req.rail_neg)}) = {_v(req.span)}")]


def _supply_detail(s: Spec, p: Parts, i: int) -> str:
    return (f"rated {_v(float(p['supply_min_v'][i]))} .. {_v(float(p['supply_max_v'][i]))}, "
            f"span {_v(s.requirement.span)}")


SUPPLY = Check(name="supply", kind="voltage", reads=("supply_min_v", "supply_max_v"),
               run=_supply, formula="Vs,min <= V+ - V- <= Vs,max", explain=_supply_explain,
               detail=_supply_detail, ranked=False,  # a rating, not headroom
               amplitude="independent")


# -- stock -------------------------------------------------------------------------------

def _stock(p: Parts, s: Spec) -> CheckResult:
    """Channels available (packages on hand and not reserved, x channels) against
    channels needed.

    With the channel count unknown each package counts as one channel: enough packages
    pass; too few are unknown, not failed.
    """
    qty, ch = p["available"], p["channels"]
    no_ch = np.isnan(ch)
    lower = qty * np.where(no_ch, 1.0, ch)
    has = np.where(no_ch & (lower < s.requirement.qty), np.nan, lower)
    return result("stock", "count", ">=", float(s.requirement.qty), has)


def _stock_explain(s: Spec) -> list[Explained]:
    q = s.requirement.qty
    return [Explained("stock", "channels needed", float(q), "count", STOCK.formula,
                      f"{q} = {q}")]


def _stock_detail(s: Spec, p: Parts, i: int) -> str:
    qty, ch = float(p["available"][i]), float(p["channels"][i])
    return f"{_count(qty)} packages available × {_count(ch)} channels"


def _count(x: float) -> str:
    return "-" if math.isnan(x) else str(int(x))


STOCK = Check(name="stock", kind="count", reads=("available", "channels"), run=_stock,
              needs=lambda s: ("available",),
              formula="packages available (on hand - reserved) × channels >= channels needed",
              explain=_stock_explain, detail=_stock_detail, ranked=False,  # logistics
              amplitude="none")


__all__ = ["COMMON_MODE", "OUTPUT_CURRENT", "SLEW", "STOCK", "SUPPLY", "SWING"]
