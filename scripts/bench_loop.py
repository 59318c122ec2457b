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


def _cmrr_terms(spec: Any) -> tuple[list[tuple[float, float, float]], float | None]:
    """(Ad, Acm, kcm·NG) at each tolerance corner, and the need in dB (None: none)."""
    req, res = spec.requirement, spec.stage.resistors
    rs, t = req.source_ohm, req.tolerance
    terms = []
    for s1 in (-1, 1):
        for s2 in (-1, 1):
            for s3 in (-1, 1):
                for s4 in (-1, 1):
                    r1, r2 = res["r1"] * (1 + s1 * t), res["r2"] * (1 + s2 * t)
                    r3, r4 = res["r3"] * (1 + s3 * t), res["r4"] * (1 + s4 * t)
                    kcm, ng = r4 / (rs + r3 + r4), 1 + r2 / (rs + r1)
                    acm = kcm * ng - r2 / (rs + r1)
                    terms.append((kcm * ng / 2 + r2 / (rs + r1) / 2, acm, kcm * ng))
    needs = [] if req.cmrr_min_db is None else [req.cmrr_min_db]
    if req.vcm is not None:
        dv = max(abs(req.vcm[0] - req.ref), abs(req.vcm[1] - req.ref))
        budget = (req.offset_max_v / req.margin if req.offset_max_v is not None
                  else 0.5 * req.gain_error / req.margin * req.vout)
        if dv > 0:
            needs.append(20 * math.log10(max(a for a, _, _ in terms) * dv / budget))
    return terms, (max(needs) if needs else None)


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
                                                   "stability", "output_current", "supply",
                                                   "dissipation", "input_protection")}
    # dissipation: class-B-like output stage (picker.checks.thermal)
    vp, ta = req.vout, req.temp_max_c
    p_out = max(0.0, st.amps_per_volt_out * (span * vp / math.pi - vp * vp / 2))
    # input protection: a 2·Vp,in step with the output held (picker.checks.protection)
    to_n = 0.0 if math.isinf(st.rg) or st.rg + st.rf == 0 else st.kg * st.rf / (st.rg + st.rf)
    step_need = 2 * req.vin * abs(st.kp - to_n)
    step_path = st.zp + (st.rf if math.isinf(st.rg) else
                         (st.rg * st.rf / (st.rg + st.rf) if st.rg + st.rf > 0 else 0.0))
    ripple = None if req.ripple is None else req.ripple[0] * ng
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
    cmrr_on = req.topology == "difference"
    if cmrr_on:  # picker.checks.rejection, written out (worst case over the 16 corners)
        out = {k: v for k, v in [*list(out.items())[:2], ("common_mode_rejection", []),
                                 *list(out.items())[2:]]}
        cmrr_corners, cmrr_need = _cmrr_terms(spec)
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
        mid = (lo + hi) / 2  # distances from the middle of the inputs' excursion
        out["common_mode"].append(_worse(
            _at_least(hi - mid, req.rail_pos - row["cm_head_pos_v"] - mid),
            _at_least(mid - lo, mid - (req.rail_neg + row["cm_head_neg_v"]))))
        if cmrr_on:
            op = row["cmrr_db"]
            x = 0.0 if math.isnan(op) else 10 ** (-op / 20)
            worst = max((abs(acm) + p * x) / ad for ad, acm, p in cmrr_corners)
            has = math.inf if worst == 0 else -20 * math.log10(worst)
            if cmrr_need is None:
                m = math.inf
            else:
                m = 10 ** ((has - cmrr_need) / 20)
                if math.isnan(op) and m >= 1:
                    m = nan
            out["common_mode_rejection"].append(m)
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
                g_f = abs((n0 + n1 * a) / (d0 + d1 * a))
                if not (math.isnan(row["cin_diff_f"]) and math.isnan(row["cin_cm_f"])):
                    m0, m1, e0, e1 = _loop(st, row["rin_ohm"], row["rout_ohm"],
                                           2j * math.pi * f, row["cin_diff_f"], row["cin_cm_f"])
                    g_c = abs((m0 + m1 * a) / (e0 + e1 * a))
                    ideal = abs(st.ideal_gain)  # the worse of with and without (gain.py)
                    g_f = g_c if abs(g_c - ideal) > abs(g_f - ideal) else g_f
                err_f = _spread_error(g_f / st.gain, spec.budget)
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
        if ng < ng_min:  # a known failure wins over an unknown phase margin
            m = ng / ng_min if math.isnan(m) else min(m, ng / ng_min)
        unknown = (math.isnan(gbw) or math.isnan(row["pm_unity_deg"]) or math.isnan(a0)
                   or (st.cload > 0 and math.isnan(row["rout_ohm"]))
                   or (rin_matters and (math.isnan(row["rin_ohm"]) or math.isnan(row["cin_diff_f"])
                                        or math.isnan(row["cin_cm_f"]))))
        out["stability"].append(nan if unknown and not m < 1 else m)
        out["output_current"].append(math.inf if amps_need == 0
                                     else _at_least(amps_need, row["iout_a"]))
        out["supply"].append(_worse(_at_least(span, row["supply_max_v"]),
                                    _at_most(span, row["supply_min_v"])))
        ch, iq = row["channels"], row["iq_a"]
        theta, tjmax = row["theta_ja_c_per_w"], row["tj_max_c"]
        chn = 1.0 if math.isnan(ch) else ch
        power = (0.0 if math.isnan(iq) else iq) * span * chn + min(chn, req.qty) * p_out
        rise = (0.0 if math.isnan(theta) else theta) * power
        allowed = tjmax - ta
        if math.isnan(allowed):
            m = nan
        elif rise > 0:
            m = allowed / rise
        else:
            m = math.inf if allowed >= 0 else -math.inf
        if any(math.isnan(x) for x in (ch, iq, theta)) and not m < 1:
            m = nan
        out["dissipation"].append(m)
        vmax = row["vdiff_max_v"]  # clamped inputs: the path limits the current
        out["input_protection"].append(_at_least(step_need, vmax + 10e-3 * step_path
                                                 if vmax <= 2.0 else vmax))
        psrr = row.get("psrr_db", nan)
        rip = 0.0 if ripple is None or math.isnan(psrr) else ripple * 10 ** (-psrr / 20)
        rip_unknown = ripple is not None and math.isnan(psrr)
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
            total = max(totals) + rip
            unknown = unknown or rip_unknown
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
            total = math.sqrt(total * total + rip * rip / 2)
            unknown = unknown or rip_unknown
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
