"""Every check of picker.design written as a straightforward per-row Python loop.

This is the comparison scripts/bench times against the vectorised core, and the
tests prove it reaches the same verdicts (tests/scripts/test_bench.py), so the
comparison is fair: same formulas (see picker.checks.limits and .accuracy), same
treatment of unknown values, one part at a time with the math module and complex
numbers. Columns come in as plain Python lists (NaN = unknown).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any

from picker.circuit.loopgain import Model, margins

BOLTZMANN = 1.380649e-23  # J/K, exact since the 2019 SI redefinition (CODATA 2018)
nan = math.nan


def _at_least(need: float, has: float) -> float:
    if math.isnan(has):
        return nan
    if need == 0:
        return math.inf if has >= 0 else -math.inf
    return has / need


def _at_most(need: float, has: float) -> float:
    if math.isnan(has):
        return nan
    if has == 0:
        return math.inf
    return need / has


def _rank(m: float) -> int:
    return 1 if math.isnan(m) else (2 if m >= 1 else 0)


def _worse(a: float, b: float) -> float:
    ra, rb = _rank(a), _rank(b)
    return b if rb < ra or (rb == ra and b < a) else a


def _status(m: float) -> str:
    return "unknown" if math.isnan(m) else ("pass" if m >= 1 else "fail")


def _det3(a: Sequence[Any], b: Sequence[Any], c: Sequence[Any]) -> Any:
    return (a[0] * (b[1] * c[2] - b[2] * c[1]) - a[1] * (b[0] * c[2] - b[2] * c[0])
            + a[2] * (b[0] * c[1] - b[1] * c[0]))


def _loop(st: Any, rin: float, ro: float, s: complex = 0j, cin: float = 0.0,
          ccm: float = 0.0) -> tuple[Any, Any, Any, Any]:
    """n0, n1, d0, d1 of the nodal solution of one part (picker.circuit.opamp), at s with
    the input capacitances (differential cin, common-mode ccm from each input)."""
    gin = 0.0 if math.isnan(rin) or math.isinf(rin) else 1.0 / rin
    if s:
        gin = gin + s * (0.0 if math.isnan(cin) else cin)
    ycm = s * (0.0 if math.isnan(ccm) else ccm) if s else 0.0
    ro = 0.0 if math.isnan(ro) else ro
    gg = 0.0 if math.isinf(st.rg) else 1.0 / st.rg
    gl = 0.0 if math.isinf(st.load) else 1.0 / st.load
    kp, kg, zp, rf = st.kp, st.kg, st.zp, st.rf
    r1 = (1 + zp * gin + zp * ycm, -zp * gin, 0.0)
    r2 = (-rf * gin, 1 + rf * gg + rf * gin + rf * ycm, -1.0)
    r3 = (-ro * gin, ro * gg + ro * gin + ro * ycm, 1 + ro * gl)
    ra = (-1.0, 1.0, 0.0)
    rhs = (kp, rf * gg * kg, ro * gg * kg)
    d0 = _det3(r1, r2, r3)
    d1 = _det3(r1, r2, ra)
    n0 = _det3((r1[0], r1[1], rhs[0]), (r2[0], r2[1], rhs[1]), (r3[0], r3[1], rhs[2]))
    n1 = _det3((r1[0], r1[1], rhs[0]), (r2[0], r2[1], rhs[1]), (ra[0], ra[1], 0.0))
    return n0, n1, d0, d1


def _spread_error(g: float, budget: Any) -> float:
    """|G|/G with the resistors anywhere in their tolerance: the worse end."""
    return max(abs(g * (1 + budget.tolerance_high) - 1), abs(g * (1 - budget.tolerance_low) - 1))


def check_rows(cols: Mapping[str, list[float]], spec: Any) -> dict[str, list[float]]:
    """Margins per check and part (NaN = unknown), one part at a time."""
    req, st = spec.requirement, spec.stage
    n = len(cols["gbw_hz"])
    ng = spec.noise_gain
    swing_need = spec.minimum.swing_pos_v - req.ref
    lo, hi = spec.common_mode
    slew_need = spec.minimum.slew_v_per_s
    amps_need = spec.minimum.iout_a
    # a value the stage depends on may not be left out for a pass (picker.checks)
    rin_matters = st.zp > 0 or st.rf > 0
    ro_matters = not math.isinf(st.load) or st.rf > 0 or st.zp > 0
    span = req.span
    gain_need = spec.budget.allowed
    f = req.freq_hz
    offset_on, noise_on = req.offset_max_v is not None, req.noise_max_v is not None
    out: dict[str, list[float]] = {k: [] for k in ("swing", "common_mode", "slew", "gain_accuracy",
                                                   "stability", "output_current", "supply")}
    cin_matters = req.source_ohm > 0  # the source pole (picker.checks.gain)
    pm_need = req.phase_margin_deg
    net = st.circuit
    if offset_on:
        out["offset"] = []
        off_need = req.offset_max_v / req.margin
        off_coefs = (ng, ng * req.drift_span_c, abs(st.rf - st.zp * ng), (st.rf + st.zp * ng) / 2)
    if noise_on:
        out["noise"] = []
        noise_need = req.noise_max_v / req.margin
        four_kt = 4 * BOLTZMANN * req.temp_max_k
        r_density2 = four_kt * (st.rf + (0.0 if math.isinf(st.rg) else st.rf ** 2 / st.rg)
                                + st.zp * ng ** 2)
        i_gain2 = st.rf ** 2 + (st.zp * ng) ** 2
    out["stock"] = []
    g = st.amps_per_volt_out
    for i in range(n):
        row = {k: v[i] for k, v in cols.items()}
        sides = []
        for light, rsat in ((req.rail_pos - row["out_head_pos_v"] - req.ref,
                             row.get("out_rsat_pos_ohm", nan)),
                            (req.ref - (req.rail_neg + row["out_head_neg_v"]),
                             row.get("out_rsat_neg_ohm", nan))):
            r = 0.0 if math.isnan(rsat) else rsat
            has = light / (1 + r * g) if light * g > 0 else light
            m = _at_least(swing_need, has)
            if g > 0 and math.isnan(rsat) and not req.light_load_swing and not m < 1:
                m = nan
            sides.append(m)
        out["swing"].append(_worse(*sides))
        out["common_mode"].append(_worse(
            _at_least(hi - req.ref, req.rail_pos - row["cm_head_pos_v"] - req.ref),
            _at_least(req.ref - lo, req.ref - (req.rail_neg + row["cm_head_neg_v"]))))
        out["slew"].append(_at_least(slew_need, row["slew_v_per_s"]))
        a0, gbw = row["aol_v_per_v"], row["gbw_hz"]
        n0, n1, d0, d1 = _loop(st, row["rin_ohm"], row["rout_ohm"])
        if math.isnan(a0):
            err = nan
        else:
            g_dc = (n0 + n1 * a0) / (d0 + d1 * a0)
            err_dc = _spread_error(abs(g_dc) / st.gain, spec.budget)
            if err_dc > gain_need:
                err = err_dc
            elif math.isnan(gbw):
                err = nan
            else:
                a = a0 / (1 + 1j * f * a0 / gbw)
                m0, m1, e0, e1 = _loop(st, row["rin_ohm"], row["rout_ohm"], 2j * math.pi * f,
                                       row["cin_diff_f"], row["cin_cm_f"])
                err_f = _spread_error(abs((m0 + m1 * a) / (e0 + e1 * a)) / st.gain, spec.budget)
                err = max(err_dc, err_f)
        missing = ((rin_matters and math.isnan(row["rin_ohm"]))
                   or (ro_matters and math.isnan(row["rout_ohm"]))
                   or (cin_matters and (math.isnan(row["cin_diff_f"])
                                        or math.isnan(row["cin_cm_f"]))))
        if missing and err <= gain_need:
            err = nan
        out["gain_accuracy"].append(_at_most(gain_need, err))
        # stability: the loop of one part (picker.circuit.loopgain on a one-element model)
        one = Model.of([a0], [gbw], [row["pm_unity_deg"]], [row["rin_ohm"]], [row["rout_ohm"]],
                       [row["cin_diff_f"]], [row["cin_cm_f"]])
        pm = float(margins(net, one).pm_deg[0])
        m = _at_least(pm_need, pm)
        ng_min = row["min_noise_gain"]
        if ng < ng_min:
            m = min(m, ng / ng_min)
        unknown = (math.isnan(gbw) or math.isnan(row["pm_unity_deg"]) or math.isnan(a0)
                   or (st.cload > 0 and math.isnan(row["rout_ohm"]))
                   or (rin_matters and (math.isnan(row["rin_ohm"]) or math.isnan(row["cin_diff_f"])
                                        or math.isnan(row["cin_cm_f"]))))
        out["stability"].append(nan if unknown and not m < 1 else m)
        out["output_current"].append(math.inf if amps_need == 0
                                     else _at_least(amps_need, row["iout_a"]))
        out["supply"].append(_worse(_at_least(span, row["supply_max_v"]),
                                    _at_most(span, row["supply_min_v"])))
        if offset_on:
            unknown = False
            t2 = row.get("ib_double_c", nan)
            if math.isnan(t2):  # the input technology's default (derived from tech)
                t2 = row.get("ib_tech_double_c", nan)
            totals = []
            for t in (req.temp_min_c, req.temp_max_c):
                k = 1.0 if t == 25.0 else 2 ** ((t - 25.0) / t2)
                coefs = (ng, ng * abs(t - 25.0), off_coefs[2] * k, off_coefs[3] * k)
                total = 0.0
                for c, x in zip(coefs, (row["vos_v"], row["drift_v_per_c"], row["ib_a"],
                                        row["ios_a"]), strict=True):
                    if c == 0 or (math.isnan(c) and not x):
                        continue
                    if math.isnan(x) or math.isnan(c):
                        unknown = True
                    else:
                        total += c * abs(x)
                totals.append(total)
            total = max(totals)
            out["offset"].append(_at_most(off_need, nan if unknown and total <= off_need
                                          else total))
        if noise_on:
            beta = d1 / d0
            f_cl = gbw * beta if math.isnan(a0) else gbw / a0 * (1 + a0 * beta)
            enbw = math.pi / 2 * f_cl
            known2, unknown = 0.0, False
            for c, x in ((ng ** 2, row["en_v_per_rthz"]), (i_gain2, row["in_a_per_rthz"])):
                if c == 0:
                    continue
                if math.isnan(x):
                    unknown = True
                else:
                    known2 += c * x * x
            if math.isnan(enbw):
                unknown, total = True, 0.0
            else:
                total = math.sqrt((known2 + r_density2) * enbw)
            out["noise"].append(_at_most(noise_need, nan if unknown and total <= noise_need
                                         else total))
        qty, ch = row["qty"], row["channels"]
        lower = qty * (1.0 if math.isnan(ch) else ch)
        has = nan if math.isnan(ch) and lower < req.qty else lower
        out["stock"].append(_at_least(float(req.qty), has))
    return out


def verdicts(margins: Mapping[str, list[float]]) -> dict[str, list[str]]:
    """pass / fail / unknown per check and part, from the margins."""
    return {k: [_status(m) for m in v] for k, v in margins.items()}


__all__ = ["check_rows", "verdicts"]
