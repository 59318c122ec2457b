"""Text of the filter stages: the designed network (``picker net``) and the response with
a part (``picker bode``). No physics: the numbers come from picker.design."""

from __future__ import annotations

import math
from typing import Any

from picker.design.filterspec import network_text
from picker.quantities import fmt


def _pct(x: float) -> str:
    return f"{x:+.2%}"


def _span(v: tuple[float, float]) -> str:
    return f"{v[0]:+.2%} .. {v[1]:+.2%}"


def net_text(n: Any, cautions: list[str]) -> str:
    """``picker net`` for a filter (a picker.design.filternet.FilterNetwork)."""
    from tabulate import tabulate

    t, a = n.target, n.achieved
    rows = [[k, network_text({k: v}).split(" ", 1)[1],
             network_text({k: n.exact[k]}).split(" ", 1)[1] if k in n.exact else "-"]
            for k, v in n.network.items()]
    lines = [*(f"!! {c}" for c in cautions),
             f"{n.topology}: resistors {n.series} ({fmt(n.tolerance, 'ratio')}), capacitors "
             f"{n.cap_series} ({fmt(n.cap_tolerance, 'ratio')})", "",
             tabulate(rows, headers=["part", "value", "exact"], disable_numparse=True), ""]
    figs = [["f0", fmt(t.f0_hz, "frequency", 5), fmt(a.f0_hz, "frequency", 5),
             _pct(n.error("f0")), _span(n.worst_case["f0"]), _span(n.monte_carlo["f0"])],
            ["Q", f"{t.q:.5g}", f"{a.q:.5g}", _pct(n.error("q")), _span(n.worst_case["q"]),
             _span(n.monte_carlo["q"])],
            ["gain", f"{t.gain:+.5g} V/V", f"{a.gain:+.5g} V/V", _pct(n.error("gain")),
             _span(n.worst_case["gain"]), _span(n.monte_carlo["gain"])]]
    lines.append(tabulate(figs, headers=["", "asked", "built", "error", "worst case",
                                         "Monte Carlo 99%"], disable_numparse=True))
    lines += ["", *(f"note: {x}" for x in n.notes)]
    return "\n".join(lines)


def bode_text(r: Any, i: int, req: Any) -> str:
    """``picker bode`` for a filter (a picker.design.filterresp.FilterResponse)."""
    from tabulate import tabulate

    from picker.report.checks import filter_line

    def f(v: float) -> str:
        return fmt(v, "frequency", 5) if math.isfinite(v) else "none"

    resp = r.response
    rows = [["part", r.labels[i]], ["stage", filter_line(req)],
            ["network", network_text(dict(req.network or {}))],
            ["f0 with the part", f(r.f0_hz[i])], ["Q with the part", f"{r.q[i]:.5g}"],
            ["pass-band gain", f"{r.gain[i]:+.5g} V/V"],
            ["-3 dB edges", f"{f(r.f_low[i])} .. {f(r.f_high[i])}"],
            [f"gain at {fmt(resp.freq_hz, 'frequency')}", f"{resp.gain_at_f[i]:.3f} dB"],
            [f"phase at {fmt(resp.freq_hz, 'frequency')}", f"{resp.phase_at_f[i]:.2f}°"]]
    return str(tabulate(rows, tablefmt="plain", disable_numparse=True))


def step_text(res: Any, req: Any) -> str:
    """``picker wave PART --step`` (a picker.design.filterwave.Step)."""
    from tabulate import tabulate

    from picker.report.checks import stage_line

    w, f = res.waves, res.figures

    def t(v: float | None) -> str:
        return "-" if v is None else f"{v * 1e6:.4g} µs"

    limits = w.limits(0)
    rows = [["part", w.labels[0]], ["stage", stage_line(req)],
            ["network", network_text(dict(req.network or {}))],
            ["step", res.what or f"{fmt(req.vin, 'voltage')} at t = 0, from rest"],
            ["final change from rest", "-" if f["final"] is None else fmt(f["final"], "voltage", 4)],
            ["peak +", fmt(float(w.peak_pos[0]), "voltage", 4)],
            ["peak -", fmt(float(w.peak_neg[0]), "voltage", 4)],
            ["overshoot", "-" if f["overshoot"] is None else f"{f['overshoot']:.2%}"],
            ["rise time 10-90%", t(f["rise_time"])], ["settling to 1%", t(f["settling_time"])],
            ["limits (linear prediction, flagged)", ", ".join(limits) if limits else "none"]]
    if res.left_out:
        rows.append(["left out", res.left_out])
    return str(tabulate(rows, tablefmt="plain", disable_numparse=True))


__all__ = ["bode_text", "net_text", "step_text"]
