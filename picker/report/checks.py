"""Text for people: minimum specifications, a pick, and one part's check sheet.

Only rendering: every number comes from picker.design (a Spec, a CheckTable, a
Selection); strings are built only for the rows shown.
"""

from __future__ import annotations

import math
from typing import Any

from picker.quantities import Kind, fmt

RULE = "-"


def _g(x: float, digits: int = 4) -> str:
    return f"{x:.{digits}g}"


def percent(margin: float, failing: bool) -> str:
    """A margin as a percentage; never rounds a failing part up to 100%."""
    if not math.isfinite(margin):
        return ""
    p = margin * 100
    text = f"{p:.0f}" if p >= 10 else f"{p:.2g}"
    if failing and float(text) >= 100:
        text = f"{math.floor(p * 10) / 10:.1f}"
    return f"{text}%"


def stage_line(req: Any) -> str:
    """One line naming the stage as asked."""
    gain = "" if req.topology == "follower" else (
        f" x{_g(req.gain)} ({_g(20 * math.log10(req.gain), 3)} dB)")
    load = "no load" if req.load_ohm is None else f"load {fmt(req.load_ohm, 'resistance')}"
    src = "" if req.source_ohm == 0 else f", source {fmt(req.source_ohm, 'resistance')}"
    temp = (f"{_g(req.temp_min_c)} °C" if req.temp_min_c == req.temp_max_c
            else f"{_g(req.temp_min_c)}..{_g(req.temp_max_c)} °C")
    return (f"{req.topology}{gain}, {_g(req.vout)} Vpk out at {fmt(req.freq_hz, 'frequency')}; "
            f"rails {req.rail_pos:+g}/{req.rail_neg:+g} V, ref {_g(req.ref)} V; {load}{src}; "
            f"gain error {fmt(req.gain_error, 'ratio')}; {temp}; margin {req.margin:g}")


def cautions_block(cautions: list[str]) -> list[str]:
    return [f"!! {c}" for c in cautions]


# -- picker spec ----------------------------------------------------------------------

_SPEC_ROWS: tuple[tuple[str, str], ...] = (
    ("slew_rate", "slew rate"), ("gbw", "gain-bandwidth product"),
    ("open_loop_gain", "open-loop gain"), ("input_resistance", "input resistance"),
    ("swing_pos", "output reaches (toward V+)"), ("swing_neg", "output reaches (toward V-)"),
    ("output_current", "output current"), ("supply_span", "supply span rated for"),
)
_KIND: dict[str, Kind] = {
    "slew_rate": "slew", "gbw": "frequency", "open_loop_gain": "gain",
    "input_resistance": "resistance", "swing_pos": "voltage", "swing_neg": "voltage",
    "output_current": "current", "supply_span": "voltage",
}


def _value(name: str, value: float | None, kind: Kind) -> str:
    if value is None:
        return "n/a"
    if kind == "gain":
        return f"{fmt(value, 'gain')} ({_g(value)} V/V)"
    return fmt(value, kind)


def spec_text(spec: Any, explain: bool = False) -> str:
    """``picker spec``: the minimums, the budget split, notes and cautions."""
    from tabulate import tabulate

    req = spec.requirement
    lines = [f"Stage: {stage_line(req)}", *cautions_block(spec.cautions), ""]
    lines.append(f"signal gain {_g(spec.signal_gain, 6)} V/V, noise gain "
                 f"{_g(spec.noise_gain, 6)} V/V")
    if explain:
        for e in spec.explain:
            lines += ["", f"{e.title}: {_value(e.name, e.value, e.kind)}",
                      f"    formula: {e.formula}", f"    numbers: {e.numbers}"]
    else:
        rows = [[title, _value(k, spec.minimum[k], _KIND[k])] for k, title in _SPEC_ROWS]
        lo, hi = spec.common_mode
        rows.append(["input common-mode range", f"{_g(lo)} V .. {_g(hi)} V"])
        lines.append(tabulate(rows, headers=["minimum", "value"], disable_numparse=True))
        budget = next(e for e in spec.explain if e.name == "gain_error")
        lines += ["", f"gain-error budget: {budget.numbers}"]
    lines += ["", *[f"note: {n}" for n in spec.notes]]
    return "\n".join(lines)


# -- one check as a line -------------------------------------------------------------------

def limit_line(result: Any, i: int, parts: Any | None = None) -> str:
    """``slew: needs >= 1.9 V/µs, has 0.5 V/µs (26%)`` for part i."""
    name, kind = result.name, result.kind
    status = str(result.status[i])
    need = float(result.need[i])
    has = float(result.has[i])
    sense = str(result.sense[i])
    note = "" if result.note is None else str(result.note[i])
    where = f" [{note}]" if note else ""
    if status == "unknown":
        missing = []
        if parts is not None:
            missing = [f for f in result.fields if f in parts and math.isnan(parts[f][i])]
        what = ", ".join(missing) if missing else "a parameter"
        return f"{name}: unknown, needs {sense} {fmt(need, kind)}; missing {what}"
    pct = percent(float(result.margin[i]), status == "fail")
    pct = f" ({pct})" if pct else ""
    return f"{name}: needs {sense} {fmt(need, kind)}, has {fmt(has, kind)}{pct}{where}"


# -- picker pick ----------------------------------------------------------------------------

def _limiting(table: Any, i: int) -> str:
    from picker.design.checks import NOT_RANKED

    best, name = math.inf, "-"
    for n, r in table.results.items():
        m = float(r.margin[i])
        if n not in NOT_RANKED and m < best:
            best, name = m, n
    return name


def pick_text(sel: Any, max_listed: int | None = None) -> str:
    """``picker pick``: accepted (ranked), unverified, rejected with reasons, nearest misses.

    ``max_listed`` caps how many accepted (best first), unverified and rejected parts
    (closest first) are written out; the rest are counted, so a catalogue-sized
    stockroom stays readable.
    """
    from tabulate import tabulate

    t, parts = sel.table, sel.parts
    lines = [f"Stage: {stage_line(sel.requirement)}", *cautions_block(sel.cautions), ""]
    order = {"margin": "smallest margin, largest first", "price": "price, cheapest first",
             "stock": "channels on hand, most first"}[sel.by]
    if sel.accepted:
        rows = []
        listed = list(sel.accepted)[:max_listed]
        for k, e in enumerate(listed, 1):
            price = parts["price"][e.row]
            rows.append([k, e.part, f"{e.margin:.3g}" if math.isfinite(e.margin) else "-",
                         _limiting(t, e.row), "-" if math.isnan(price) else f"{price:.2f}",
                         _count(parts["qty"][e.row]), _count(parts["channels"][e.row])])
        shown = (f"{len(listed)}" if len(listed) == sel.accepted_total
                 else f"best {len(listed)} of {sel.accepted_total}")
        lines.append(f"Accepted ({shown}), by {order}:")
        lines.append(tabulate(rows, headers=["#", "part", "margin", "limited by", "price",
                                             "qty", "ch"], disable_numparse=True))
    elif len(t) == 0:
        lines.append("Accepted: none; the stockroom has no parts (`picker parts import` adds some)")
    else:
        lines.append("Accepted: none")
    if sel.unverified:
        lines += ["", f"Unverified ({len(sel.unverified)}): nothing fails, but some checks "
                  "could not be made (--strict rejects these):"]
        for e in sel.unverified[:max_listed]:
            lines.append(f"  {e.part}")
            lines += [f"    {limit_line(t.results[n], e.row, parts)}" for n in e.unknown]
        lines += _more(len(sel.unverified), max_listed, "unverified")
    if sel.rejected:
        closest = "" if max_listed is None or max_listed >= len(sel.rejected) else ", closest first"
        lines += ["", f"Rejected ({len(sel.rejected)}{closest}):"]
        for e in sel.rejected[:max_listed]:
            lines.append(f"  {e.part}")
            lines += [f"    {limit_line(t.results[n], e.row, parts)}" for n in e.fails]
        lines += _more(len(sel.rejected), max_listed, "rejected")
    if sel.nearest:
        lines += ["", "Nearest misses: the requirement would have to move (one change at a "
                  "time) for each to pass:"]
        for n in sel.nearest:
            lines.append(f"  {n.part} (fails {', '.join(n.fails)}): "
                         + "; ".join(_move(m) for m in n.moves))
    lines += ["", *[f"note: {n}" for n in sel.spec.notes]]
    return "\n".join(lines)


def _more(total: int, shown: int | None, what: str) -> list[str]:
    if shown is None or total <= shown:
        return []
    return [f"  ... and {total - shown} more {what}; `--list all` writes them out, "
            "`picker why PART` explains one"]


def _count(x: float) -> str:
    return "-" if math.isnan(x) else str(int(x))


def _move(m: Any) -> str:
    label = {"freq": "freq", "amplitude": "output amplitude", "gain": "gain",
             "load": "load"}[m.axis]
    if m.value is None:
        return f"{label}: no single change helps"
    sense = ">=" if m.axis == "load" else "<="
    value = (f"{_g(m.value)} V/V" if m.kind == "gain" else
             f"{_g(m.value)} Vpk" if m.axis == "amplitude" else fmt(m.value, m.kind))
    return f"{label} {sense} {value} ({m.change:+.1%})"


# -- picker why -----------------------------------------------------------------------------

def why_text(spec: Any, table: Any, parts: Any, i: int = 0) -> str:
    """``picker why``: every check of one part with its formula and its numbers."""
    label = str(table.labels[i])
    lines = [f"Part: {label}", f"Stage: {stage_line(spec.requirement)}",
             *cautions_block(spec.cautions), ""]
    for name, r in table.results.items():
        status = str(r.status[i]).upper()
        lines.append(f"[{status}] {limit_line(r, i, parts)}")
        formula, numbers = _sheet(name, spec, r, parts, i)
        lines.append(f"    formula: {formula}")
        if numbers:
            lines.append(f"    numbers: {numbers}")
    verdict = ("fails " + ", ".join(n for n, r in table.results.items() if r.status[i] == "fail")
               if any(r.status[i] == "fail" for r in table.results.values()) else
               "unverified (some checks unknown)"
               if any(r.status[i] == "unknown" for r in table.results.values()) else "passes")
    lines += ["", f"Verdict: {label} {verdict}."]
    return "\n".join(lines)


def _v(x: float, kind: Kind) -> str:
    return fmt(x, kind)


def _sheet(name: str, spec: Any, r: Any, p: Any, i: int) -> tuple[str, str]:
    """Formula and numbers of one check for part i (display only)."""
    req, st, m = spec.requirement, spec.stage, spec.requirement.margin
    d = {k: float(v[i]) for k, v in r.detail.items()}
    if name == "swing":
        return ("(V+ - headroom+) - ref and ref - (V- + headroom-), each >= m·Vp,out",
                f"headroom {_v(p['out_head_pos_v'][i], 'voltage')} / "
                f"{_v(p['out_head_neg_v'][i], 'voltage')}; ref {_g(req.ref)} V; "
                f"m·Vp,out = {m:g} × {_g(req.vout)} V")
    if name == "common_mode":
        return ("inputs reach ref ± m·|kp|·Vp,in inside (V- + head-) .. (V+ - head+)",
                f"head {_v(p['cm_head_pos_v'][i], 'voltage')} / "
                f"{_v(p['cm_head_neg_v'][i], 'voltage')}; inputs reach "
                f"{_g(spec.common_mode[0])} V .. {_g(spec.common_mode[1])} V")
    if name == "slew":
        return ("SR >= 2π·f·Vp,out·m",
                f"2π × {_v(req.freq_hz, 'frequency')} × {_g(req.vout)} V × {m:g}")
    if name == "gain_accuracy":
        return ("exact |G| from the nodal solution (A(s) = A0/(1 + s·A0/(2π·GBW)), Rin, Ro, "
                "source, load, network) at DC and at f; error | |G|/G - 1 | <= gain error/m",
                f"DC {_g(d['gain_dc'], 7)} V/V ({d['error_dc']:.4%}); at "
                f"{_v(req.freq_hz, 'frequency')} {_g(d['gain_f'], 7)} V/V ({d['error_f']:.4%}), "
                f"phase {d['phase_f_deg']:+.3g}°; closed-loop pole "
                f"{_v(d['f_closed_loop'], 'frequency')}; G {_g(req.gain)} V/V; budget "
                f"{fmt(req.gain_error, 'ratio')}/{m:g}")
    if name == "output_current":
        return ("Iout >= m·Vp,out·(1/RL + (1 - vn/vo)/rf)",
                f"{m:g} × {_g(req.vout)} V × {st.amps_per_volt_out:.4g} S")
    if name == "supply":
        return ("Vs,min <= V+ - V- <= Vs,max",
                f"{_v(p['supply_min_v'][i], 'voltage')} <= {_g(req.span)} V <= "
                f"{_v(p['supply_max_v'][i], 'voltage')}")
    if name == "offset":
        return ("NG·(|Vos| + |drift|·ΔT) + |Ib|·|rf - zp·NG| + Ios/2·(rf + zp·NG) "
                "<= offset max/m",
                f"NG {_g(spec.noise_gain)}, rf {_v(st.rf, 'resistance')}, zp "
                f"{_v(st.zp, 'resistance')}, ΔT {_g(req.drift_span_c)} °C: Vos "
                f"{_v(d['vos_out'], 'voltage')} + drift {_v(d['drift_out'], 'voltage')} + Ib "
                f"{_v(d['ib_out'], 'voltage')} + Ios {_v(d['ios_out'], 'voltage')}")
    if name == "noise":
        return ("√((en·NG)² + in²·(rf² + (zp·NG)²) + 4kT·(rf + rf²/rg + zp·NG²)) × "
                "√(π/2·f_cl) <= noise max/m",
                f"en·NG {_v(d['en_out'], 'vnoise')}, in {_v(d['in_out'], 'vnoise')}, "
                f"resistors {_v(d['r_out'], 'vnoise')} at {_g(req.temp_max_c)} °C; "
                f"f_cl {_v(d['f_closed_loop'], 'frequency')}, noise bandwidth "
                f"{_v(d['enbw'], 'frequency')}")
    if name == "stock":
        return ("packages × channels >= channels needed",
                f"{_count(p['qty'][i])} × {_count(p['channels'][i])} vs {req.qty}")
    return ("", "")


__all__ = ["limit_line", "percent", "pick_text", "spec_text", "stage_line", "why_text"]
