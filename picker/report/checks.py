"""Text for people: minimum specifications, a pick, and one part's check sheet.

Only rendering: every number comes from picker.design (a Spec, a CheckTable, a
Selection); strings are built only for the rows shown.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

from picker.quantities import Kind, fmt
from picker.report.coupling import coupling_lines

if TYPE_CHECKING:
    from collections.abc import Sequence

    from picker.api import PartReport
    from picker.checks import CheckResult, CheckTable, Parts
    from picker.design.misses import Move
    from picker.design.netparts import PartNetworks
    from picker.design.rank import Selection
    from picker.design.requirement import Requirement
    from picker.design.spec import Spec

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


def stage_line(req: Requirement) -> str:
    """One line naming the stage as asked."""
    if req.is_filter:
        return filter_line(req)
    if req.is_tia:
        return tia_line(req)
    gain = "" if req.topology == "follower" else (
        f" x{_g(req.gain)} ({_g(20 * math.log10(req.gain), 3)} dB)")
    load = "no load" if req.load_ohm is None else f"load {fmt(req.load_ohm, 'resistance')}"
    src = "" if req.source_ohm == 0 else f", source {fmt(req.source_ohm, 'resistance')}"
    temp = (f"{_g(req.temp_min_c)} °C" if req.temp_min_c == req.temp_max_c
            else f"{_g(req.temp_min_c)}..{_g(req.temp_max_c)} °C")
    levels = (f"{_g(req.vout)} Vpk out", f"ref {_g(req.ref)} V")
    if req.vin_range is not None and req.vout_range is not None:  # a level-shift stage
        (a, b), (c, d) = req.vin_range, req.vout_range
        levels = (f"{_g(a)}..{_g(b)} V in -> {_g(c)}..{_g(d)} V out",
                  "levels from ground (0 V)")
    return (f"{req.topology}{gain}, {levels[0]} at {fmt(req.freq_hz, 'frequency')}; "
            f"rails {req.rail_pos:+g}/{req.rail_neg:+g} V, {levels[1]}; {load}{src}; "
            f"gain error {fmt(req.gain_error, 'ratio')} with {fmt(req.tolerance, 'ratio')} resistors "
            f"({req.tolerance_rule}); {temp}; margin {req.margin:g}")


def tia_line(req: Requirement) -> str:
    """One line naming a transimpedance stage as asked."""
    assert req.iin_a is not None
    lo, hi = req.iin_a
    cur = (f"{fmt(hi, 'current')} peak" if lo == -hi else
           f"{fmt(lo, 'current')}..{fmt(hi, 'current')}")
    load = "no load" if req.load_ohm is None else f"load {fmt(req.load_ohm, 'resistance')}"
    shunt = ("open" if req.rshunt_ohm is None else fmt(req.rshunt_ohm, 'resistance'))
    return (f"transimpedance {fmt(req.zt_ohm or 0.0, 'resistance')}, {cur} from "
            f"{fmt(req.cdet_f, 'capacitance')} (shunt {shunt}), -3 dB at "
            f"{fmt(req.band_hz or 0.0, 'frequency')} ({req.tia_response}); rails "
            f"{req.rail_pos:+g}/{req.rail_neg:+g} V, ref {_g(req.ref)} V; {load}; "
            f"margin {req.margin:g}")


def filter_line(req: Requirement) -> str:
    """One line naming a filter stage as asked."""
    shape = (f"bandwidth {fmt(req.bandwidth_hz or 0.0, 'frequency')}"
             if req.bandwidth_hz is not None else str(req.response)
             + (f" {_g(req.passband_ripple_db)} dB ripple" if req.passband_ripple_db else ""))
    load = "no load" if req.load_ohm is None else f"load {fmt(req.load_ohm, 'resistance')}"
    src = "" if req.source_ohm == 0 else f", source {fmt(req.source_ohm, 'resistance')}"
    return (f"{req.topology} f0 {fmt(req.f0_hz or 0.0, 'frequency')}, {shape}, gain "
            f"{_g(req.gain)}; {_g(req.vin)} Vpk in, signals up to "
            f"{fmt(req.freq_hz, 'frequency')}; rails {req.rail_pos:+g}/{req.rail_neg:+g} V, "
            f"ref {_g(req.ref)} V; {load}{src}; response error "
            f"{fmt(req.response_error, 'ratio')}, {fmt(req.tolerance, 'ratio')} resistors, "
            f"{fmt(req.cap_tolerance, 'ratio')} capacitors; margin {req.margin:g}")


def cautions_block(cautions: list[str]) -> list[str]:
    return [f"!! {c}" for c in cautions]


# -- picker spec ----------------------------------------------------------------------

# the minimums of `picker spec` (short form), as (Minimums field, title, kind)
_SPEC_ROWS: tuple[tuple[str, str, Kind], ...] = (
    ("slew_v_per_s", "slew rate", "slew"), ("gbw_hz", "gain-bandwidth product", "frequency"),
    ("aol_v_per_v", "open-loop gain", "gain"), ("rin_ohm", "input resistance", "resistance"),
    ("swing_pos_v", "output reaches (toward V+)", "voltage"),
    ("swing_neg_v", "output reaches (toward V-)", "voltage"),
    ("iout_a", "output current", "current"), ("supply_span_v", "supply span rated for", "voltage"),
)


def _value(value: float | None, kind: Kind) -> str:
    if value is None:
        return "n/a"
    if kind == "gain":
        return f"{fmt(value, 'gain')} ({_g(value)} V/V)"
    return fmt(value, kind)


def spec_text(spec: Spec, explain: bool = False) -> str:
    """``picker spec``: the minimums, the budget split, notes and cautions."""
    from tabulate import tabulate

    req = spec.requirement
    lines = [f"Stage: {stage_line(req)}", *cautions_block(spec.cautions), ""]
    if spec.requirement.is_tia:
        lines.append(f"transimpedance {fmt(spec.stage.rf, 'resistance', 6)}, DC noise gain "
                     f"{_g(spec.noise_gain, 6)} V/V")
    else:
        lines.append(f"signal gain {_g(spec.signal_gain, 6)} V/V, noise gain "
                     f"{_g(spec.noise_gain, 6)} V/V")
    if spec.stage.coupling is not None:
        lines += [*coupling_lines(spec.stage.coupling), ""]
    if explain:
        for e in spec.explain:
            lines += ["", f"{e.title} [{e.name}]: {_value(e.value, e.kind)}",
                      f"    formula: {e.formula}", f"    numbers: {e.numbers}"]
    else:
        mn = spec.minimum
        rows = [[title, _value(getattr(mn, k), kind)] for k, title, kind in _SPEC_ROWS]
        rows.append(["input common-mode range", f"{_g(mn.cm_low_v)} V .. {_g(mn.cm_high_v)} V"])
        lines.append(tabulate(rows, headers=["minimum", "value"], disable_numparse=True))
        budget = next((e for e in spec.explain if e.name in ("gain_budget", "response_budget")),
                      None)
        if budget is not None:
            lines += ["", f"{'gain-error' if budget.name == 'gain_budget' else 'response'} "
                          f"budget: {budget.numbers}"]
        for e in spec.explain:  # a transimpedance stage's own lines
            if e.name in ("transimpedance", "feedback_pole", "tia_loop"):
                lines += ["", f"{e.title}: {e.numbers}"]
    lines += ["", *[f"note: {n}" for n in spec.notes]]
    return "\n".join(lines)


# -- one check as a line -------------------------------------------------------------------

def limit_line(result: CheckResult, i: int, parts: Parts | None = None,
               needed: tuple[str, ...] = ()) -> str:
    """``slew: needs >= 1.9 V/µs, has 0.5 V/µs (26%)`` for part i."""
    name, kind = result.name, result.kind
    status = result.status(i)
    need = float(result.need[i])
    has = float(result.has[i])
    sense = result.sense[i]
    note = result.note[i]
    where = f" [{note}]" if note else ""
    if status == "unknown":
        missing = [f for f in needed if parts is not None and math.isnan(parts[f][i])]
        what = ", ".join(missing) if missing else "a parameter"
        return f"{name}: unknown, needs {sense} {fmt(need, kind)}; missing {what}"
    pct = percent(float(result.margin[i]), status == "fail")
    pct = f" ({pct})" if pct else ""
    return f"{name}: needs {sense} {fmt(need, kind)}, has {fmt(has, kind)}{pct}{where}"


def _needed(spec: Spec) -> dict[str, tuple[str, ...]]:
    from picker.checks import applicable

    return {c.name: c.needed(spec) for c in applicable(spec)}


# -- picker pick ----------------------------------------------------------------------------

def pick_text(sel: Selection, max_listed: int | None = None) -> str:
    """``picker pick``: accepted (ranked), unverified, rejected with reasons, nearest misses.

    ``max_listed`` caps how many accepted (best first), unverified and rejected parts
    (closest first) are written out; the rest are counted, so a catalogue-sized
    stockroom stays readable.
    """
    from tabulate import tabulate

    t, parts = sel.table, sel.parts
    needed = _needed(sel.spec)
    lines = [f"Stage: {stage_line(sel.requirement)}", *cautions_block(sel.cautions), ""]
    order = {"margin": "smallest margin, largest first", "price": "price, cheapest first",
             "stock": "channels on hand, most first"}[sel.by]
    nets = sel.networks

    def own(row: int) -> str:  # the part's network, marked when it is the shared one
        assert nets is not None
        return nets.describe(row) + ("" if nets.own[row] else " (shared)")

    if sel.accepted:
        rows = []
        listed = list(sel.accepted)[:max_listed]
        phases = sel.phases([e.row for e in listed])
        cmrr = sel.cmrr([e.row for e in listed]) if sel.shows_cmrr else None
        for k, (e, ph) in enumerate(zip(listed, phases, strict=True), 1):
            price = parts["price"][e.row]
            rows.append([k, e.part, f"{e.margin:.3g}" if math.isfinite(e.margin) else "-",
                         t.limiting(e.row), fmt(ph, "angle"),
                         *([] if cmrr is None else [fmt(cmrr[k - 1], "decibel", 3)]),
                         "-" if math.isnan(price) else f"{price:.2f}",
                         _count(parts["qty"][e.row]), _count(parts["channels"][e.row]),
                         *([] if nets is None else [own(e.row)])])
        shown = (f"{len(listed)}" if len(listed) == sel.accepted_total
                 else f"best {len(listed)} of {sel.accepted_total}")
        lines.append(f"Accepted ({shown}), by {order}:")
        marks = [(e.part, sel.assumed_for(e.row)) for e in listed] if sel.assumed else []
        marks = [(p, a) for p, a in marks if a]
        lines.append(tabulate(rows, headers=["#", "part", "margin", "limited by", "phase at f",
                                             *(["CMRR"] if cmrr is not None else []),
                                             "price",
                                             "qty", "ch",
                                             *([] if nets is None else ["network"])],
                                    disable_numparse=True))
        for part, a in marks:
            lines.append(f"  {part}: assumed " + ", ".join(
                f"{k} = {_field_value(k, v)}" for k, v in a.items()) + " (blank in the stockroom)")
    elif len(t) == 0:
        lines.append("Accepted: none; the stockroom has no parts (`picker parts import` adds some)")
    else:
        lines.append("Accepted: none")
    if sel.unverified:
        lines += ["", f"Unverified ({len(sel.unverified)}): nothing fails, but some checks "
                  "could not be made (--strict rejects these):"]
        for e in sel.unverified[:max_listed]:
            lines.append(f"  {e.part}" + ("" if nets is None else f"  [network {own(e.row)}]"))
            lines += [f"    {limit_line(t.results[n], e.row, parts, needed[n])}" for n in e.unknown]
        lines += _more(len(sel.unverified), max_listed, "unverified")
    if sel.rejected:
        closest = "" if max_listed is None or max_listed >= len(sel.rejected) else ", closest first"
        lines += ["", f"Rejected ({len(sel.rejected)}{closest}):"]
        shown_rejected = list(sel.rejected[:max_listed])
        unstable = [e.row for e in shown_rejected if "stability" in e.fails]
        fix = dict(zip(unstable, sel.stability_fixes(unstable), strict=True))
        for e in shown_rejected:
            lines.append(f"  {e.part}" + ("" if nets is None else f"  [network {own(e.row)}]"))
            for n in e.fails:
                lines.append(f"    {limit_line(t.results[n], e.row, parts, needed[n])}")
                if n == "stability" and fix.get(e.row):
                    lines.append(f"      {fix[e.row]}")
        lines += _more(len(sel.rejected), max_listed, "rejected")
    if sel.nearest:
        lines += ["", "Nearest misses: the requirement would have to move (one change at a "
                  "time) for each to pass:"]
        for n in sel.nearest:
            lines.append(f"  {n.part} (fails {', '.join(n.fails)}): "
                         + "; ".join(_move(m) for m in n.moves))
    lines += ["", *[f"note: {n}" for n in sel.spec.notes]]
    if nets is not None:
        lines.append(_per_part_note(nets))
    return "\n".join(lines)


def _per_part_note(nets: PartNetworks) -> str:
    """The closing note of ``pick --network-per-part``."""
    if not nets.designed:
        return ("note: --network-per-part: the stage's network is given (or it has none to "
                "design); every part is checked with it")
    shared = ", ".join(f"{k.capitalize()} {fmt(v, 'resistance', 4)}"
                       for k, v in nets.networks[0].items() if 0 < v < math.inf)
    kept = int((~nets.own).sum())
    return (f"note: --network-per-part: each part is checked with the network designed for "
            f"it ({len(nets.networks)} distinct); the shared network is {shared}"
            + (f"; {kept} part(s) marked (shared) keep it: no standard pair keeps their limits"
               if kept else ""))


def _more(total: int, shown: int | None, what: str) -> list[str]:
    if shown is None or total <= shown:
        return []
    return [f"  ... and {total - shown} more {what}; `--list all` writes them out, "
            "`picker why PART` explains one"]


def _count(x: float) -> str:
    return "-" if math.isnan(x) else str(int(x))


def _move(m: Move) -> str:
    label = {"freq": "freq", "amplitude": "output amplitude", "gain": "gain",
             "load": "load"}[m.axis]
    if m.value is None:
        return f"{label}: no single change helps"
    sense = ">=" if m.axis == "load" else "<="
    value = (f"{_g(m.value)} V/V" if m.kind == "gain" else
             f"{_g(m.value)} Vpk" if m.axis == "amplitude" else fmt(m.value, m.kind))
    return f"{label} {sense} {value} ({m.change:+.1%})"


# -- picker why -----------------------------------------------------------------------------

def _field_value(name: str, value: float) -> str:
    from picker.fields import BY_NAME

    kind = BY_NAME[name].kind
    return fmt(value, kind) if kind != "text" else str(value)


def why_text(spec: Spec, table: CheckTable, parts: Parts, i: int = 0,
             assumed: dict[str, float] | None = None) -> str:
    """``picker why``: every check of one part with its formula and its numbers."""
    from picker.checks import applicable

    label = str(table.labels[i])
    lines = [f"Part: {label}", f"Stage: {stage_line(spec.requirement)}",
             *cautions_block(spec.cautions), ""]
    if spec.stage.coupling is not None:
        lines += [*coupling_lines(spec.stage.coupling), ""]
    for check in applicable(spec):
        r = table.results[check.name]
        need = check.explain(spec)[0]
        lines.append(f"[{r.status(i).upper()}] {limit_line(r, i, parts, check.needed(spec))}")
        lines.append(f"    formula: {check.formula}")
        lines.append(f"    need: {need.numbers}")
        lines.append(f"    part: {check.detail(spec, parts, i)}")
    if assumed:
        lines.append("assumed (blank in the stockroom, taken from --assume): "
                     + ", ".join(f"{k} = {_field_value(k, v)}" for k, v in assumed.items()))
    lines += ["", f"Verdict: {label} {_verdict_words(table, i)}."]
    return "\n".join(lines)


def _verdict_words(table: CheckTable, i: int) -> str:
    verdict = table.verdict(i)
    return ("fails " + ", ".join(n for n, r in table.results.items() if r.status(i) == "fail")
            if verdict == "fail" else "unverified (some checks unknown)"
            if verdict == "unknown" else "passes")


def side_by_side_text(reports: Sequence[PartReport]) -> str:
    """``picker why A B [C]``: the check sheets of two or three parts in columns.

    One row per applicable check: its name and need, then for each part what it has,
    its margin and status; each part's limiting check (the ranked check with its
    smallest margin, as ``pick`` ranks) is marked ``*``.
    """
    from tabulate import tabulate

    from picker.checks import applicable

    spec = reports[0].spec
    limiting = [r.table.limiting(0) for r in reports]
    headers = ["check", "need"]
    for r in reports:
        headers += [f"{r.part}\nhas", "\nmargin", "\nstatus"]
    rows = []
    for check in applicable(spec):
        results = [r.table.results[check.name] for r in reports]
        needs = list(dict.fromkeys(f"{res.sense[0]} {fmt(float(res.need[0]), res.kind)}"
                                   for res in results))
        row = [check.name, " | ".join(needs)]
        for res, r, lim in zip(results, reports, limiting, strict=True):
            status = res.status(0)
            pct = percent(float(res.margin[0]), status == "fail")
            has = fmt(float(res.has[0]), res.kind)
            missing = [f for f in check.needed(spec) if math.isnan(r.parts[f][0])]
            if status == "unknown" and missing:
                has = "missing " + ", ".join(missing)
            row += [has, pct or "-", status + (" *" if check.name == lim else "")]
        rows.append(row)
    lines = [f"Stage: {stage_line(spec.requirement)}", *cautions_block(spec.cautions), "",
             tabulate(rows, headers=headers, disable_numparse=True), "",
             "* the part's limiting check: its smallest margin among the ranked checks"]
    for r in reports:
        if r.assumed:
            lines.append(f"{r.part}: assumed " + ", ".join(
                f"{k} = {_field_value(k, v)}" for k, v in r.assumed.items())
                + " (blank in the stockroom, taken from --assume)")
    lines.append("")
    lines += [f"Verdict: {r.part} {_verdict_words(r.table, 0)}." for r in reports]
    return "\n".join(lines)


__all__ = ["limit_line", "percent", "pick_text", "side_by_side_text", "spec_text", "stage_line",
           "why_text"]
