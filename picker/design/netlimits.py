"""The electrical limits a resistor network must keep, as masks over candidate pairs.

- window: every designed resistor within netmodel.WINDOW_OHM (about 1 kΩ .. 1 MΩ).
- load: at the peak output the network draws at most NET_LOAD_SHARE (10%) of the
  load's current, or NET_CURRENT_A (1 mA) when that is larger (no load or a light
  one); with the part's output current known, network and load together also stay
  within Iout over the design margin: Vo,pk·(1/RL + G_net)·m <= Iout.
- offset: bias currents through the network (netmodel.bias_offset, with the better of
  no compensation and an ideal compensation resistor) within OFFSET_SHARE of
  --offset-max over the margin.
- noise: the network's thermal noise (4kTR, k_B from CODATA) and the part's current
  noise through it, integrated over the closed-loop noise bandwidth, within
  NOISE_SHARE of --noise-max over the margin (resistors at the hottest ambient).
- input_resistance: the extra gain error rf/(Rin·A0) within RIN_SHARE of --gain-error
  over the margin.
- zin: the input resistor (inverting rg, difference r1) at least --zin, by default
  max(10 kΩ, 10 x the source resistance).
A limit whose inputs are unknown (no part, no budget) does not apply and is listed so.
Each limit keeps its metric, so an infeasible design can say how far to relax it
(picker.design.netfix).
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
    zin_ohm: float | None = None  # overrides req.zin_ohm

    @property
    def zin_floor(self) -> float | None:
        """The least input resistor, Ω (inverting and difference stages; else None)."""
        r = self.req
        if r.topology not in ("inverting", "difference"):
            return None
        given = self.zin_ohm if self.zin_ohm is not None else r.zin_ohm
        if given is not None:
            return given
        if r.rg_ohm is not None:  # the input resistor was given: it is the input impedance
            return None
        return max(nm.ZIN_MIN_OHM, nm.ZIN_SOURCE_RATIO * r.source_ohm)

    @property
    def zin_given(self) -> bool:
        return self.zin_ohm is not None or self.req.zin_ohm is not None

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
        g_share = max(nm.NET_LOAD_SHARE * g_load, nm.NET_CURRENT_A / r.vout)
        text = (f"network load: at most {nm.NET_LOAD_SHARE:.0%} of the load's current or "
                f"{fmt(nm.NET_CURRENT_A, 'current')} at the {fmt(r.vout, 'voltage')} peak, "
                f"whichever is larger (common practice): network >= "
                f"{fmt(1 / g_share, 'resistance')}")
        if p.iout_a is None:
            return g_share, text
        g_part = p.iout_a / (r.margin * r.vout) - g_load
        load = "" if r.load_ohm is None else f" with the {fmt(r.load_ohm, 'resistance')} load"
        if g_part <= 0:
            return g_share, (text + f"; the load alone asks more than Iout "
                             f"{fmt(p.iout_a, 'current')} of {p.label or 'the part'} over "
                             f"margin {r.margin:g} (the output_current check says so)")
        if g_part < g_share:
            text += (f"; output current: {fmt(r.vout, 'voltage')}pk into network{load}, times "
                     f"margin {r.margin:g}, within Iout {fmt(p.iout_a, 'current')} of "
                     f"{p.label or 'the part'} (network >= {fmt(1 / g_part, 'resistance')})")
        return min(g_share, g_part), text


@dataclass(frozen=True)
class Limit:
    """One limit over the candidate pairs: its metric, bound and sense."""

    name: str  # load, offset, noise, input_resistance, zin
    metric: Array  # per pair: S/V, V, V rms, ratio, Ω
    bound: float
    at_most: bool = True  # metric <= bound (else metric >= bound)

    @property
    def mask(self) -> Mask:
        if self.at_most:
            return self.metric <= self.bound * _SLACK  # type: ignore[no-any-return]
        return self.metric >= self.bound / _SLACK  # type: ignore[no-any-return]


def limits(ctx: Context, a: npt.ArrayLike, b: npt.ArrayLike) -> tuple[nm.PairModel, list[Limit]]:
    """The pair model and every applicable limit over the pairs (a, b)."""
    r, p = ctx.req, ctx.part
    a = np.asarray(a, float)
    b = np.asarray(b, float)
    m = nm.pair_model(r.topology, r.source_ohm, a, b)
    shape = m.gain.shape
    out: list[Limit] = [Limit("load", np.broadcast_to(m.out_siemens, shape),
                              ctx.out_siemens_max()[0])]
    budget = ctx.offset_budget
    if budget is not None:
        out.append(Limit("offset", np.broadcast_to(offset_v(ctx, m), shape), budget))
    nb = ctx.noise_budget
    if nb is not None:
        out.append(Limit("noise", np.broadcast_to(noise_v(ctx, m), shape), nb))
    rb = ctx.rin_budget
    if rb is not None:
        assert p.rin_ohm is not None and p.aol_v_per_v is not None
        out.append(Limit("input_resistance", np.broadcast_to(
            m.rin_ohm / (p.rin_ohm * p.aol_v_per_v), shape), rb))
    zf = ctx.zin_floor
    if zf is not None:
        out.append(Limit("zin", np.broadcast_to(b, shape), zf, at_most=False))
    return m, out


def offset_v(ctx: Context, m: nm.PairModel) -> Array:
    """Output offset from the part's bias currents through the network, V (the better of
    no compensation and an ideal compensation resistor); 0 without the part's Ib."""
    p = ctx.part
    if p.ib_a is None:
        return np.zeros_like(m.gain)
    ib = p.ib_a
    ios = ib if p.ios_a is None else p.ios_a
    unc = nm.bias_offset(m.noise_gain, m.r_plus, m.r_minus, ib, ios)
    comp = np.where(m.r_minus >= m.r_plus, m.noise_gain * ios * m.r_minus, unc)
    return np.minimum(unc, comp)  # type: ignore[no-any-return]


def noise_v(ctx: Context, m: nm.PairModel) -> Array:
    """The network's output noise, V rms: thermal noise of the resistors (at the hottest
    ambient) and the part's current noise through them, over the noise bandwidth."""
    r, p = ctx.req, ctx.part
    bw = nm.noise_bandwidth_hz(m.noise_gain, p.gbw_hz, r.freq_hz, r.gain_error / r.margin)
    i_n = p.in_a_per_rthz or 0.0
    density2 = 4 * nm.K_B * r.temp_max_k * m.noise_ohm + (i_n * m.inoise_ohm) ** 2
    return np.sqrt(density2 * bw)  # type: ignore[no-any-return]


def check_pairs(ctx: Context, a: npt.ArrayLike, b: npt.ArrayLike
                ) -> tuple[nm.PairModel, list[tuple[str, Mask]]]:
    """The pair model and one boolean mask per applicable limit (True = within)."""
    m, lims = limits(ctx, a, b)
    return m, [(x.name, x.mask) for x in lims]


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
    zf = ctx.zin_floor
    if zf is not None:
        how = ("--zin" if ctx.zin_given else f"default max({fmt(nm.ZIN_MIN_OHM, 'resistance')}, "
               f"{nm.ZIN_SOURCE_RATIO:g} x source)")
        out.append(f"input impedance: input resistor >= {fmt(zf, 'resistance')} ({how})")
    out.append(f"window: {fmt(nm.WINDOW_OHM[0], 'resistance')}..."
               f"{fmt(nm.WINDOW_OHM[1], 'resistance')} per resistor (common practice)")
    if skipped:
        out.append("not limited: " + ", ".join(skipped))
    return out


__all__ = ["Context", "Limit", "check_pairs", "describe", "limits", "noise_v",
           "offset_v"]
