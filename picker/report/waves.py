"""Waveform and frequency-response results as text and JSON for people and scripts."""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

from picker.quantities import fmt

if TYPE_CHECKING:
    from picker.design.requirement import Requirement
    from picker.design.response import Response
    from picker.design.waveform import Candidates, Waves


def thd_text(thd: float) -> str:
    if not math.isfinite(thd):
        return "-"
    return "< 0.001 %" if thd < 1e-5 else f"{100 * thd:.3g} %"


def stage_line(req: Requirement, freq_hz: float) -> str:
    """One line naming the stage and its test signal."""
    if req.is_tia:
        from picker.report.checks import tia_line

        return tia_line(req)
    if req.vin_range is not None and req.vout_range is not None:  # a level-shift stage
        (a, b), (c, d) = req.vin_range, req.vout_range
        return (f"{req.topology}, {a:g}..{b:g} V in -> {c:g}..{d:g} V out, a sine over the "
                f"input range at {fmt(freq_hz, 'frequency')}, rails {req.rail_pos:+g}/"
                f"{req.rail_neg:+g} V, load "
                + ("none" if req.load_ohm is None else fmt(req.load_ohm, "resistance")
                   + " (to the output's middle level in this prediction)"))
    return (f"{req.topology}, gain {req.gain:g} V/V, {fmt(req.vin, 'voltage')} peak sine at "
            f"{fmt(freq_hz, 'frequency')}, rails {req.rail_pos:+g}/{req.rail_neg:+g} V, "
            f"reference {fmt(req.ref, 'voltage')}, load "
            + ("none" if req.load_ohm is None else fmt(req.load_ohm, "resistance")))


def network_text(req: Requirement) -> str:
    """The stage's resistors, 'rf 10 kΩ, rg 1 kΩ' (or the ideal ratio when none is set)."""
    if not req.network:
        return f"ideal ratio from rf {fmt(req.rf_ohm, 'resistance')}"
    return ", ".join(f"{k} {'open' if math.isinf(v) else fmt(v, 'resistance')}"
                     if not k.startswith("c") else f"{k} {fmt(v, 'capacitance')}"  # a filter's
                     for k, v in req.network.items())


def wave_text(waves: Waves, i: int, req: Requirement) -> str:
    """The numbers of one part's predicted output, one per line."""
    from tabulate import tabulate

    limits = waves.limits(i)
    rows = [
        ["part", waves.labels[i]],
        ["stage", stage_line(req, waves.drive.freq_hz)],
        ["network", network_text(req)],
        ["ideal output", f"{fmt(waves.ideal.min(), 'voltage')} .. {fmt(waves.ideal.max(), 'voltage')}"],
        ["peak +", fmt(waves.peak_pos[i], "voltage")],
        ["peak -", fmt(waves.peak_neg[i], "voltage")],
        ["peak-to-peak", fmt(waves.vpp[i], "voltage")],
        ["THD", thd_text(waves.thd[i])],
        ["limits", ", ".join(limits) if limits else "none"],
        ["usable swing", f"{fmt(waves.swing_lo[i], 'voltage')} .. {fmt(waves.swing_hi[i], 'voltage')}"],
    ]
    return str(tabulate(rows, tablefmt="plain", disable_numparse=True))


def candidates_text(cands: Candidates, req: Requirement) -> str:
    """A table of the candidates' predicted outputs, in pick's order."""
    from tabulate import tabulate

    w = cands.waves
    rows = [[k + 1, w.labels[k], cands.status[k], fmt(w.peak_pos[k], "voltage"),
             fmt(w.peak_neg[k], "voltage"), fmt(w.vpp[k], "voltage"), thd_text(w.thd[k]),
             ", ".join(w.limits(k)) or "none"] for k in range(len(w.labels))]
    head = ["#", "part", "status", "peak +", "peak -", "peak-to-peak", "THD", "limits"]
    table = tabulate(rows, headers=head, disable_numparse=True)
    return f"stage: {stage_line(req, w.drive.freq_hz)}\n{table}"


def bode_text(resp: Response, i: int, req: Requirement) -> str:
    """The closed-loop response's key numbers for one part."""
    from tabulate import tabulate

    f3 = resp.f3db[i]
    unit = "dBΩ" if req.is_tia else "dB"  # a transimpedance: dB re 1 Ω (api.response)
    dc = (["DC transimpedance", f"{resp.dc_gain_db[i]:.3f} dBΩ = "
           f"{fmt(10 ** (resp.dc_gain_db[i] / 20), 'resistance', 5)}"] if req.is_tia
          else ["DC gain", f"{resp.dc_gain_db[i]:.3f} dB"])
    rows = [
        ["part", resp.labels[i]],
        ["stage", stage_line(req, resp.freq_hz)],
        ["network", network_text(req)],
        dc,
        ["-3 dB frequency", fmt(f3, "frequency") if math.isfinite(f3) else "none"],
        [f"gain at {fmt(resp.freq_hz, 'frequency')}", f"{resp.gain_at_f[i]:.3f} {unit}"],
        [f"phase at {fmt(resp.freq_hz, 'frequency')}",
         f"{resp.phase_at_f[i]:.2f}° (from the ideal stage; an inversion's 180° taken out)"],
        ["plotted span", f"{fmt(float(resp.freqs[0]), 'frequency')} .. "
                         f"{fmt(float(resp.freqs[-1]), 'frequency')} (two decades around the "
                         "top frequency and the -3 dB point)"],
        ["phase margin", stability_text(resp, i)],
        ["closed-loop peaking", "-" if math.isnan(resp.peaking[i])
         else f"{resp.peaking[i]:.2f} dB"],
    ]
    return str(tabulate(rows, tablefmt="plain", disable_numparse=True))


def stability_text(resp: Response, i: int) -> str:
    """``52.3° at 1.2 MHz crossover`` (or why there is none) for part i."""
    pm, fc = float(resp.phase_margin[i]), float(resp.crossover[i])
    if math.isnan(pm):
        return "unknown (no phase margin as a follower recorded; single-pole model)"
    if math.isinf(pm):
        return "no crossover (the loop gain stays below 1)"
    return f"{pm:.1f}° at crossover {fmt(fc, 'frequency')}"


def candidates_json(cands: Candidates) -> list[dict[str, Any]]:
    """The wave JSON record of every candidate, in pick's order."""
    return [cands.waves.summary(k) for k in range(len(cands.waves.labels))]


__all__ = ["bode_text", "stability_text", "candidates_json", "candidates_text", "network_text", "stage_line",
           "thd_text", "wave_text"]
