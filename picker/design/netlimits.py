"""The electrical limits a resistor network must keep, as masks over candidate pairs.

- load: the network and the load together may not ask more than the part's output
  current at the peak output, with the design margin: Vo,pk·(1/RL + G_net)·m <= Iout.
  Without the part's output current, common practice: total load >= 1 kΩ. The network
  alone always loads the output with 1 kΩ or more (common practice), so a part with
  current to spare does not pull the design down to tens of ohms.
- offset: bias currents through the network (netmodel.bias_offset, with the better of
  no compensation and an ideal compensation resistor) within OFFSET_SHARE of
  --offset-max over the margin.
- noise: the network's thermal noise (4kTR, k_B from CODATA) and the part's current
  noise through it, integrated over the closed-loop noise bandwidth, within
  NOISE_SHARE of --noise-max over the margin (resistors at the hottest ambient).
- input_resistance: the extra gain error rf/(Rin·A0) within RIN_SHARE of --gain-error
  over the margin.
- zin: the input resistor at least --zin (inverting, difference).
A limit whose inputs are unknown (no part, no budget) does not apply and is listed so.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from picker.design import netmodel as nm
from picker.design.requirement import Requirement
from picker.quantities import fmt

Array = npt.NDArray[np.float64]
Mask = npt.NDArray[np.bool_]

_SLACK = 1 + 1e-12  # comparisons at a limit are inclusive of float rounding


@dataclass(frozen=True)
class Context:
    """A requirement, the part's values (maybe none) and the --zin option."""

    req: Requirement
    part: nm.PartData
    zin_ohm: float | None = None

    @property
    def offset_budget(self) -> float | None:
        r = self.req
        if r.offset_max_v is None or self.part.ib_a is None:
            return None
        return nm.OFFSET_SHARE * r.offset_max_v / r.margin

    @property
    def noise_budget(self) -> float | None:
        r = self.req
        return None if r.noise_max_v is None else nm.NOISE_SHARE * r.noise_max_v / r.margin

    @property
    def rin_budget(self) -> float | None:
        p, r = self.part, self.req
        if p.rin_ohm is None or p.aol_v_per_v is None:
            return None
        return nm.RIN_SHARE * r.gain_error / r.margin

    def out_siemens_max(self) -> tuple[float, str]:
        """Largest output current per volt of output the network may draw, and why."""
        r, p = self.req, self.part
        g_load = 0.0 if r.load_ohm is None else 1.0 / r.load_ohm
        load = "" if r.load_ohm is None else f" with the {fmt(r.load_ohm, 'resistance')} load"
        if p.iout_a is not None:
            g_max = p.iout_a / (r.margin * r.vout)
            text = (f"output current: {fmt(r.vout, 'voltage')}pk into network{load}, times "
                    f"margin {r.margin:g}, within Iout {fmt(p.iout_a, 'current')} of "
                    f"{p.label or 'the part'} (total load >= {fmt(1 / g_max, 'resistance')})")
        else:
            g_max = 1.0 / nm.MIN_LOAD_OHM
            text = (f"output load: network{load} >= {fmt(nm.MIN_LOAD_OHM, 'resistance')} in "
                    "total (common practice; the part's output current is not known)")
        g_net = 1.0 / nm.MIN_LOAD_OHM
        if g_max - g_load <= 0:
            return g_net, (text + "; the load alone exceeds it, so only the network's own "
                           f">= {fmt(nm.MIN_LOAD_OHM, 'resistance')} applies (the load is "
                           "the part's problem)")
        if g_max - g_load > g_net:
            text += (f"; the network alone >= {fmt(nm.MIN_LOAD_OHM, 'resistance')} (common "
                     "practice)")
        return min(g_max - g_load, g_net), text


def check_pairs(ctx: Context, a: npt.ArrayLike, b: npt.ArrayLike
                ) -> tuple[nm.PairModel, list[tuple[str, Mask]]]:
    """The pair model and one boolean mask per applicable limit (True = within)."""
    r, p = ctx.req, ctx.part
    a = np.asarray(a, float)
    b = np.asarray(b, float)
    m = nm.pair_model(r.topology, r.source_ohm, a, b)
    out: list[tuple[str, Mask]] = []
    g_max, _ = ctx.out_siemens_max()
    out.append(("load", m.out_siemens <= g_max * _SLACK))
    budget = ctx.offset_budget
    if budget is not None:
        ib = p.ib_a or 0.0
        ios = ib if p.ios_a is None else p.ios_a
        unc = nm.bias_offset(m.noise_gain, m.r_plus, m.r_minus, ib, ios)
        can_comp = m.r_minus >= m.r_plus
        comp = np.where(can_comp, m.noise_gain * ios * m.r_minus, unc)
        out.append(("offset", np.minimum(unc, comp) <= budget * _SLACK))
    nb = ctx.noise_budget
    if nb is not None:
        bw = nm.noise_bandwidth_hz(m.noise_gain, p.gbw_hz, r.freq_hz, r.gain_error / r.margin)
        i_n = p.in_a_per_rthz or 0.0
        density2 = 4 * nm.K_B * r.temp_max_k * m.noise_ohm + (i_n * m.inoise_ohm) ** 2
        out.append(("noise", np.sqrt(density2 * bw) <= nb * _SLACK))
    rb = ctx.rin_budget
    if rb is not None:
        assert p.rin_ohm is not None and p.aol_v_per_v is not None
        out.append(("input_resistance", m.rin_ohm / (p.rin_ohm * p.aol_v_per_v) <= rb * _SLACK))
    if ctx.zin_ohm is not None:
        out.append(("zin", np.broadcast_to(b >= ctx.zin_ohm / _SLACK, m.gain.shape)))
    return m, out


_FIX = {
    "load": "a lighter load (--load), a part with more output current, or a smaller output",
    "offset": "a looser --offset-max or a part with lower bias current",
    "noise": "a looser --noise-max or a part with lower current noise",
    "input_resistance": "a looser --gain-error or a part with higher input resistance",
    "zin": "a lower --zin",
}


def conflict_message(ctx: Context, series: str, checks: list[tuple[str, Mask]]) -> str:
    """One line: which limits leave no admissible pair, and what would loosen them."""
    r = ctx.req
    alone = [n for n, mk in checks if not mk.any()]
    pairs = [(n1, n2) for i, (n1, m1) in enumerate(checks) for n2, m2 in checks[i + 1:]
             if not (m1 & m2).any()]
    if alone:
        names, what = alone, f"the {' and '.join(alone)} limit alone excludes"
    elif pairs:
        names = list(pairs[0])
        what = f"the {names[0]} and {names[1]} limits together exclude"
    else:
        names = [n for n, _ in checks]
        what = f"the {', '.join(names)} limits together exclude"
    fixes = "; or ".join(_FIX[n] for n in names)
    article = "an" if r.topology[0] in "aeiou" else "a"
    return (f"network: no {series} network for {article} {r.topology} gain of {r.gain:g} V/V: {what} "
            f"every pair of {fmt(nm.WINDOW_OHM[0], 'resistance')}..."
            f"{fmt(nm.WINDOW_OHM[1], 'resistance')} resistors; try {fixes}")


def describe(ctx: Context) -> list[str]:
    """The limits that applied, as sentences (and the ones that did not, and why)."""
    r, p = ctx.req, ctx.part
    out = [ctx.out_siemens_max()[1]]
    off = ctx.offset_budget
    skipped = []
    if off is not None:
        out.append(f"offset: bias currents through the network within {nm.OFFSET_SHARE:.0%} of "
                   f"--offset-max {fmt(r.offset_max_v, 'voltage')} over margin {r.margin:g} "
                   f"= {fmt(off, 'voltage')}")
    else:
        skipped.append("offset (" + ("no --offset-max" if r.offset_max_v is None
                                     else "bias current not known") + ")")
    nb = ctx.noise_budget
    if nb is not None:
        bw = "GBW/NG" if p.gbw_hz is not None else "the narrowest the gain budget allows"
        out.append(f"noise: network thermal (4kTR at {r.temp_max_c:g} °C) and current noise "
                   f"over π/2·{bw} within {nm.NOISE_SHARE:.0%} of --noise-max "
                   f"{fmt(r.noise_max_v, 'voltage')} over margin {r.margin:g} = "
                   f"{fmt(nb, 'voltage')} rms")
    else:
        skipped.append("noise (no --noise-max)")
    rb = ctx.rin_budget
    if rb is not None:
        out.append(f"input resistance: feedback/(Rin·A0) within {nm.RIN_SHARE:.0%} of the "
                   f"gain-error budget over margin = {fmt(rb, 'ratio')}")
    else:
        skipped.append("input resistance (Rin or A0 not known)")
    if ctx.zin_ohm is not None:
        out.append(f"input impedance: input resistor >= --zin {fmt(ctx.zin_ohm, 'resistance')}")
    out.append(f"window: {fmt(nm.WINDOW_OHM[0], 'resistance')}..."
               f"{fmt(nm.WINDOW_OHM[1], 'resistance')} per resistor (common practice)")
    if skipped:
        out.append("not limited: " + ", ".join(skipped))
    return out


__all__ = ["Context", "check_pairs", "conflict_message", "describe"]
