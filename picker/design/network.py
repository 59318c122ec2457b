"""Design a stage's resistor network from standard E-series values (IEC 60063).

design_network(req, part) searches every pair of standard values inside the window
(about 1 kΩ .. 1 MΩ, netmodel.WINDOW_OHM) at once (numpy broadcasting, no Python loop
over values): (rf, rg) for the inverting and non-inverting stages, (r2, r1) with matched
ratios r4 = r2, r3 = r1 for the difference stage. A pair is admissible when it keeps the
limits of picker.design.netlimits (output load, bias-current offset, noise and
input-resistance shares of their budgets, least input impedance); the choice among the
admissible pairs follows picker.design.netchoice: gain error counted down to what the
tolerance swamps, then the lowest impedance level with the values engineers keep, the
shares of the noise and offset budgets and the source's share of the gain. When no
single value meets the ratio share of the gain-error budget, two standard resistors in
series or parallel are tried for the leg. When nothing keeps the limits and the nominal
gain budget, BadRequirement names the blocking limit and the nearest relaxation that
fits (picker.design.netfix). Values given with --rf/--rg are kept exactly, never
snapped. The result carries the resistor tolerance analysis of picker.design.tolerance.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import numpy.typing as npt

from picker.circuit.opamp import closed_loop_gain
from picker.design import netchoice as nc
from picker.design import netfix
from picker.design import netmodel as nm
from picker.design import series as es
from picker.design.netlimits import Context, check_pairs, describe, limits, noise_v, offset_v
from picker.design.requirement import Requirement
from picker.design.tolerance import (
    MC_SEED,
    STANDARD_TOLERANCES,
    How,
    Slot,
    monte_carlo,
    p99_error,
    worst_case,
)
from picker.errors import BadRequirement
from picker.quantities import fmt
from picker.stages import kind, stage

Array = npt.NDArray[np.float64]

#: Two pairs whose gain errors differ by less than this are a tie.
TIE = 1e-9
#: A compensation resistor is proposed when it lowers the output offset at 25 °C
#: (Vos and bias currents) by at least this fraction (picker's own threshold).
COMP_MIN_IMPROVEMENT = 0.25


@dataclass(frozen=True)
class Network:
    """A designed (or given) network with its gain, error and tolerance spread."""

    topology: str
    series: es.SeriesName
    tolerance: float
    target_gain: float
    slots: tuple[Slot, ...]
    gain: float  # ideal-op-amp signal-gain magnitude of the nominal values
    worst_case: tuple[float, float]
    mc_p99_error: float
    network: Mapping[str, float] = field(hash=False)  # for Requirement.network
    limits: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()
    why: str = ""  # one line that explains the choice
    input_ohm: float | None = None  # what the source sees (None: the op-amp's own input)
    source_share: float | None = None  # Rs/(Rs + input leg) when the source is in the gain
    network_current_a: float = 0.0  # drawn from the output at the peak
    power_w: Mapping[str, float] = field(default_factory=dict, hash=False)  # at the peak
    given: tuple[str, ...] = ()  # positions kept exactly as given (not designed)
    coupling: Any = None  # the AC-coupling design around it (picker.design.coupling)

    @property
    def gain_error(self) -> float:
        """Signed relative error of the nominal gain against the requested gain."""
        return self.gain / self.target_gain - 1

    @property
    def worst_case_error(self) -> float:
        lo, hi = self.worst_case
        return max(abs(lo / self.target_gain - 1), abs(hi / self.target_gain - 1))

    @property
    def resistors(self) -> dict[str, float]:
        """The physical resistors by position, Ω (open legs and wires left out)."""
        return {s.name: s.ohms for s in self.slots}

    def as_json(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "series": self.series,
            "resistors": self.resistors,
            "gain": self.gain,
            "gain_error": self.gain_error,
            "worst_case": [self.worst_case[0], self.worst_case[1]],
            "mc_p99_error": self.mc_p99_error,
            "why": self.why,
            "input_ohm": self.input_ohm,
            "source_share": self.source_share,
            "network_current_a": self.network_current_a,
            "power_w": dict(self.power_w),
            "given": list(self.given),
        }
        combined = {s.name: {"how": s.how, "parts": list(s.parts)}
                    for s in self.slots if s.how != "single"}
        if combined:
            out["combined"] = combined
        if self.coupling is not None:
            out["coupling"] = self.coupling.to_json()
        return out


def design_network(req: Requirement, part: Mapping[str, Any] | nm.PartData | None = None, *,
                   series: es.SeriesName = "E24", tolerance: float | None = None,
                   zin_ohm: float | None = None, feedback_ohm: float | None = None,
                   seed: int = MC_SEED) -> Network:
    """The best standard-value network for ``req`` (around ``part``, if given).

    Parameters
    ----------
    req : Requirement
        The stage. Its ``rf_ohm`` (when pinned) and ``rg_ohm`` are kept exactly, never
        snapped to a series; with both, or with a ``network``, the network is analysed
        as it is instead of designed.
    part : mapping or PartData, optional
        A parts-table row: its output current, bias and noise currents, Rin, A0 and GBW
        become limits of the search (netlimits) and its bias current enters the score.
    series : str
        IEC 60063 series of the legs picker designs.
    tolerance : float, optional
        Resistor tolerance (default ``req.tolerance``).
    zin_ohm : float, optional
        Least input impedance, Ω (default ``req.zin_ohm``, else max(10 kΩ, 10·Rs)).
    feedback_ohm : float, optional
        The feedback resistor as built, Ω (default: ``req.rf_ohm`` when pinned).

    Returns
    -------
    Network
        BadRequirement (one line, the blocking limit and the nearest relaxation that
        fits) when no network keeps the limits and the nominal gain budget.
    """
    if tolerance is not None:
        if not 0 <= tolerance < 0.5:
            raise BadRequirement(f"--tolerance: {tolerance:g} is not a resistor tolerance; "
                                 "write e.g. 1% or 0.1%")
        req = req.with_changes(tolerance=tolerance)
    pd = part if isinstance(part, nm.PartData) else nm.PartData.from_row(part)
    if zin_ohm is not None:
        req = req.with_changes(zin_ohm=zin_ohm)
    if feedback_ohm is not None:
        req = req.with_changes(rf_ohm=feedback_ohm, rf_pinned=True)
    ctx = Context(req, pd)
    slots, net, notes, given = _choose(req, ctx, series)

    def redo(t: float) -> Network:
        r2 = req.with_changes(tolerance=t)
        c2 = Context(r2, pd)
        s2, n2, _, _ = _choose(r2, c2, series)
        return _finish(r2, c2, series, s2, n2, [], seed, given, mc=False)

    return _finish(req, ctx, series, slots, net, notes, seed, given, redo=redo)


def _choose(req: Requirement, ctx: Context, series: es.SeriesName
            ) -> tuple[list[Slot], dict[str, float], list[str], tuple[str, ...]]:
    """(slots, network, notes, names kept as given) of the chosen network."""
    t = req.topology
    given_net = req.network
    if given_net is None and req.rf_pinned and req.rg_ohm is not None:
        given_net = kind(t).pair_network(req.rf_ohm, req.rg_ohm)
    if given_net is not None:
        net = {k: float(v) for k, v in given_net.items()}
        slots = [Slot.single(k, v) for k, v in net.items() if 0 < v < math.inf]
        return (slots, net, ["The network was given; it is analysed as built, not designed."],
                tuple(s.name for s in slots))
    if t == "follower" or (t == "non-inverting" and req.gain == 1):
        slots, net, notes = _follower(req, ctx.part, series)
        kept = ("rf",) if req.rf_pinned and "rf" in net and net["rf"] > 0 else ()
        return slots, net, notes, kept
    return _design_pair(req, ctx, series)


def _pair_names(t: str) -> tuple[str, str]:
    """(feedback, leg): the names the stage type's designer pair fills."""
    names = kind(t).pair_names
    assert names is not None, f"the {t} stage has no pair to design"
    return names


def _design_pair(req: Requirement, ctx: Context, series: es.SeriesName
                 ) -> tuple[list[Slot], dict[str, float], list[str], tuple[str, ...]]:
    t, gain = req.topology, req.gain
    v = es.values(series, *nm.WINDOW_OHM)
    fa, fb = _pair_names(t)
    fv = np.array([req.rf_ohm]) if req.rf_pinned else v
    lv = np.array([req.rg_ohm]) if req.rg_ohm is not None else v
    kept: tuple[str, ...] = (fa,) if req.rf_pinned else (fb,) if req.rg_ohm is not None else ()
    a, b = fv[:, None], lv[None, :]
    model, lims = limits(ctx, a, b)
    ok = np.logical_and.reduce([x.mask for x in lims]) if lims else np.ones(model.gain.shape,
                                                                            bool)
    ok = np.broadcast_to(ok, model.gain.shape)
    err_all = np.abs(model.gain / gain - 1)
    allowed = req.gain_error / req.margin
    share = nm.RATIO_SHARE * allowed

    def fail() -> BadRequirement:
        def finer() -> str | None:
            for name in es.SERIES[es.SERIES.index(series) + 1:]:
                try:
                    _design_pair(req, ctx, name)
                except BadRequirement:
                    continue
                return name
            return None

        gain_ok = np.broadcast_to(err_all <= allowed * (1 + 1e-12), model.gain.shape)
        if req.rg_ohm is not None:
            ideal = np.array([np.inf])
        else:
            ideal = fv / (gain - 1) if t == "non-inverting" else fv / gain - req.source_ohm
        return BadRequirement(netfix.message(ctx, series, lims, gain_ok,
                                             finer if not kept else lambda: None, ideal))

    if not ok.any():
        raise fail()
    floor = nc.error_floor(req)
    errq = np.where(ok, np.maximum(err_all, floor), np.inf)
    cand = errq <= float(errq.min()) + TIE
    sc = np.where(cand, nc.score(ctx, model, lims, np.broadcast_to(a, model.gain.shape),
                                 np.broadcast_to(b, model.gain.shape)), np.inf)
    i, j = np.unravel_index(int(np.argmin(sc)), sc.shape)
    best = (float(fv[i]), Slot.single(fb, float(lv[j])))
    best_err = float(err_all[i, j])
    notes: list[str] = []
    if kept:
        notes.append(f"{kept[0].capitalize()} kept as given "
                     f"({fmt(float(fv[0] if req.rf_pinned else lv[0]), 'resistance', 4)}); "
                     f"only the {fb if req.rf_pinned else fa} was designed ({series}).")
    if best_err > share and req.rg_ohm is None:
        combo = _best_combo(ctx, fv, v, share)
        if combo is not None and combo[2] < best_err - TIE:
            notes.append(
                f"No single {series} pair comes within {fmt(share, 'ratio')} of the gain (the "
                f"ratio's {nm.RATIO_SHARE:.0%} share of the {fmt(req.gain_error, 'ratio')} "
                f"budget, over margin {req.margin:g}; best {fmt(best_err, 'ratio')}); the "
                f"{fb} position is two {series} resistors in {combo[1].how}, for "
                f"{fmt(combo[2], 'ratio')}.")
            best, best_err = (combo[0], combo[1]), combo[2]
    if best_err > allowed * (1 + 1e-12):
        raise fail()
    if best_err > share:
        notes.append(f"The nominal ratio error {fmt(best_err, 'ratio')} is above its "
                     f"{fmt(share, 'ratio')} share of the gain-error budget (within the "
                     "budget itself).")
    rf, leg = best
    slots = [Slot.single(fa, rf), leg]
    if t == "difference":
        slots = [Slot("r1", leg.ohms, leg.parts, leg.how), Slot.single("r2", rf),
                 Slot("r3", leg.ohms, leg.parts, leg.how), Slot.single("r4", rf)]
    net = {s.name: s.ohms for s in slots}
    rp_slot, rp_notes = _compensation(req, ctx, series, net)
    notes.extend(rp_notes)
    if rp_slot is not None:
        slots.append(rp_slot)
        net["rp"] = rp_slot.ohms
    if t == "difference" and kept:
        kept = ("r2", "r4") if kept == ("r2",) else ("r1", "r3")
    return slots, net, notes, kept


def _first_best(err: Array) -> int:
    """Flat index of the smallest error; ties go to the first in row-major order, which
    (values ascending along both axes) is the smallest feedback, then the smallest leg."""
    best = float(err.min())
    return int(np.flatnonzero(err <= best + TIE)[0])


def _best_combo(ctx: Context, fv: Array, v: Array, share: float
                ) -> tuple[float, Slot, float] | None:
    """A pair with feedback from ``fv`` and the leg made of two values of ``v`` in series
    or parallel (for each feedback value the two combinations nearest the ideal leg).

    Two-resistor legs come close to almost any ratio, so their errors hardly ever tie:
    among those within ``share`` the lowest feedback resistor wins (lowest noise and
    offset); when none is within it, the smallest error."""
    req = ctx.req
    t, rs, gain = req.topology, req.source_ohm, req.gain
    ii, jj = np.triu_indices(len(v))
    vals = np.concatenate([v[ii] + v[jj], v[ii] * v[jj] / (v[ii] + v[jj])])
    kind = np.repeat([0, 1], len(ii))
    order = np.argsort(vals, kind="stable")
    vals, kind = vals[order], kind[order]
    ii, jj = np.tile(ii, 2)[order], np.tile(jj, 2)[order]
    target = fv / (gain - 1) if t == "non-inverting" else fv / gain - rs
    k = np.searchsorted(vals, target)
    cand = np.clip(np.stack([k - 1, k], axis=1), 0, len(vals) - 1)  # (n_a, 2)
    a = np.repeat(fv[:, None], 2, axis=1)
    legs = vals[cand]
    model, checks = check_pairs(ctx, a, legs)
    ok = np.logical_and.reduce([m for _, m in checks]) if checks else np.ones(a.shape, bool)
    lo, hi = nm.WINDOW_OHM
    ok = np.broadcast_to(ok, a.shape) & (target[:, None] > 0) & (legs >= lo) & (legs <= hi)
    if not ok.any():
        return None
    err = np.where(ok, np.abs(model.gain / gain - 1), np.inf)
    meets = (err <= share).any(axis=1)
    if meets.any():  # the lowest feedback resistor whose leg meets the share
        r = int(np.flatnonzero(meets)[0])
        c = int(np.argmin(err[r]))
    else:
        r, c = (int(x) for x in np.unravel_index(_first_best(err), err.shape))
    idx = cand[r, c]
    how: How = "series" if kind[idx] == 0 else "parallel"
    fb = _pair_names(t)[1]
    slot = Slot(fb, float(legs[r, c]), (float(v[ii[idx]]), float(v[jj[idx]])), how)
    return float(fv[r]), slot, float(err[r, c])


def _offset_parts(ctx: Context, net: Mapping[str, float]) -> tuple[float, float, float, float]:
    """(noise gain, R+ without rp, R-, ideal rp) of a chosen inverting/non-inverting net."""
    req = ctx.req
    rs = req.source_ohm
    m = nm.pair_model(req.topology, rs, net["rf"], net["rg"])
    ng, rplus, rminus = float(m.noise_gain), float(m.r_plus), float(m.r_minus)
    return ng, rplus, rminus, rminus - rplus


def _compensation(req: Requirement, ctx: Context, series: es.SeriesName,
                  net: Mapping[str, float]) -> tuple[Slot | None, list[str]]:
    """A bias-current compensation resistor rp, when it buys a real offset improvement."""
    p = ctx.part
    if req.topology not in ("inverting", "non-inverting") or p.ib_a is None:
        return None, []
    if p.ios_a is None:
        return None, ["No compensation resistor proposed: the part's offset current is "
                      "unknown, so its benefit cannot be shown."]
    ng, rplus, rminus, rp_ideal = _offset_parts(ctx, net)
    if rp_ideal < nm.WINDOW_OHM[0]:
        return None, []
    rp = _nearest_in_window(rp_ideal, series)
    unc = float(nm.bias_offset(ng, rplus, rminus, p.ib_a, p.ios_a))
    comp = float(nm.bias_offset(ng, rplus + rp, rminus, p.ib_a, p.ios_a))
    vos = ng * (p.vos_v or 0.0)
    needed = ctx.offset_budget is not None and unc > ctx.offset_budget
    if not needed and (unc - comp) < COMP_MIN_IMPROVEMENT * (vos + unc):
        return None, []
    why = ("needed to keep the bias-current offset inside its share" if needed
           else "worth it for this part")
    note = (f"Rp {fmt(rp, 'resistance')} ({series}) from the non-inverting input to the "
            f"reference (or in series with it) matches the {fmt(rminus, 'resistance')} the "
            f"inverting input sees: output offset from bias currents falls from "
            f"{fmt(unc, 'voltage')} to {fmt(comp, 'voltage')} ({why}; Vos·NG = "
            f"{fmt(vos, 'voltage')}). Bypass it with a capacitor to keep its noise out.")
    return Slot.single("rp", rp), [note]


def _nearest_in_window(value: float, series: es.SeriesName) -> float:
    """The series member inside the window nearest to ``value`` on a log scale."""
    v = es.values(series, *nm.WINDOW_OHM)
    return float(v[np.argmin(np.abs(np.log(v / value)))])


def _follower(req: Requirement, p: nm.PartData, series: es.SeriesName
              ) -> tuple[list[Slot], dict[str, float], list[str]]:
    """No network; a feedback resistor that balances the source resistance when it pays
    (inside the window), or the one given with --rf, kept exactly."""
    open_leg = {"rg": math.inf} if req.topology == "non-inverting" else {}
    rs = req.source_ohm
    if req.rf_pinned:
        return ([Slot.single("rf", req.rf_ohm)], {"rf": req.rf_ohm, **open_leg},
                [f"Rf {fmt(req.rf_ohm, 'resistance', 4)} kept as given; it does not change "
                 "the gain."])
    if p.ib_a is not None and p.ios_a is not None and rs >= nm.WINDOW_OHM[0]:
        rf = _nearest_in_window(rs, series)
        unc = float(nm.bias_offset(1.0, rs, 0.0, p.ib_a, p.ios_a))
        comp = float(nm.bias_offset(1.0, rs, rf, p.ib_a, p.ios_a))
        if unc - comp >= COMP_MIN_IMPROVEMENT * ((p.vos_v or 0.0) + unc):
            note = (f"Rf {fmt(rf, 'resistance')} ({series}) from the output to the inverting "
                    f"input balances the bias-current drop across the "
                    f"{fmt(rs, 'resistance')} source: output offset from bias currents falls "
                    f"from {fmt(unc, 'voltage')} to {fmt(comp, 'voltage')}. It does not "
                    "change the gain.")
            return [Slot.single("rf", rf)], {"rf": rf, **open_leg}, [note]
    note = ("No resistors: the output connects straight to the inverting input (gain 1). "
            "A feedback resistor equal to the source resistance would only balance bias "
            "currents, which does not pay here.")
    return [], {"rf": 0.0, **open_leg}, [note]


def _finish(req: Requirement, ctx: Context, series: es.SeriesName, slots: list[Slot],
            net: dict[str, float], notes: list[str], seed: int, given: tuple[str, ...],
            *, mc: bool = True, redo: Callable[[float], Network] | None = None) -> Network:
    t, rs, tol = req.topology, req.source_ohm, req.tolerance
    gain = float(kind(t).ideal_gain(rs, net))
    wc = worst_case(t, rs, net, tol)
    p99 = (p99_error(monte_carlo(t, rs, slots, tol, seed=seed), req.gain) if slots and mc
           else abs(gain / req.gain - 1))
    m = None
    names = kind(t).pair_names
    if names is not None and all(k in net for k in names) and math.isfinite(net[names[1]]):
        m = nm.pair_model(t, rs, net[names[0]], net[names[1]])
    noise = float(noise_v(ctx, m)) if m is not None and ctx.noise_budget is not None else None
    offset = (float(offset_v(ctx, m)) if m is not None and ctx.offset_budget is not None
              else None)
    n = Network(t, series, tol, req.gain, tuple(slots), gain, wc, p99, net,
                tuple(describe(ctx)), (), why=nc.why_line(ctx, net, noise, offset),
                input_ohm=nc.input_impedance(req, net), source_share=nc.source_share(req, net),
                network_current_a=nc.network_current(req, net),
                power_w=nc.peak_power(req, net), given=given)
    extra = _tolerance_notes(req, n, redo) if redo is not None else []
    return replace(n, notes=tuple(notes + extra))



def _tolerance_notes(req: Requirement, n: Network, redo: Callable[[float], Network]
                     ) -> list[str]:
    """Say when the gain-error budget is tighter than the resistor tolerance allows, and
    which standard class fits: each finer class is tried by designing again with it (the
    design may change with the tolerance), so the advice holds when rerun."""
    budget = req.gain_error
    if abs(n.gain_error) > budget:
        return [f"The nominal gain {n.gain:.5g} V/V misses {n.target_gain:.5g} V/V by "
                f"{fmt(abs(n.gain_error), 'ratio')}, beyond the {fmt(budget, 'ratio')} "
                "gain-error budget before any tolerance."]
    if not n.slots or n.tolerance == 0 or n.worst_case_error <= budget:
        return []
    need = None
    for t in STANDARD_TOLERANCES:
        if t >= n.tolerance:
            continue
        try:
            if redo(t).worst_case_error <= budget:
                need = t
                break
        except BadRequirement:
            continue
    fix = (f"use {fmt(need, 'ratio')} resistors or better (--tolerance {fmt(need, 'ratio')})"
           if need is not None else "no standard tolerance is enough: trim the gain")
    tol = fmt(n.tolerance, "ratio")
    spread = (f"with ±{tol} resistors the gain can move to {n.worst_case[0]:.4g}.."
              f"{n.worst_case[1]:.4g} V/V (worst case ±{fmt(n.worst_case_error, 'ratio')}); "
              f"99% of builds land within ±{fmt(n.mc_p99_error, 'ratio')}")
    if n.mc_p99_error > budget:
        return [f"Tolerance: the {fmt(budget, 'ratio')} gain-error budget is tighter than "
                f"±{tol} resistors allow: {spread}; {fix}."]
    return [f"Tolerance: {spread}, but the worst case exceeds the {fmt(budget, 'ratio')} "
            f"budget; to guarantee it, {fix}."]


def exact_gain(req: Requirement, network: Mapping[str, float],
               part: Mapping[str, Any] | nm.PartData) -> tuple[complex, complex] | None:
    """The stage's exact closed-loop gain (at DC, at the top frequency) with this network
    around the part's macromodel (picker.circuit.opamp; unknown Rin = infinite, unknown
    Ro = 0). None when the part's A0 or GBW is unknown."""
    p = part if isinstance(part, nm.PartData) else nm.PartData.from_row(part)
    if p.aol_v_per_v is None or p.gbw_hz is None:
        return None
    st = stage(req.with_changes(network=dict(network)))
    a0, gbw, rin, ro = (np.array([np.nan if x is None else x])
                        for x in (p.aol_v_per_v, p.gbw_hz, p.rin_ohm, p.rout_ohm))
    dc, top = (complex(closed_loop_gain(st, a0, gbw, rin, ro, f)[0]) for f in (0.0, req.freq_hz))
    return dc, top


def with_designed_network(req: Requirement, part: Mapping[str, Any] | nm.PartData | None = None,
                          *, series: es.SeriesName = "E24") -> Requirement:
    """``req`` with its network designed from standard values (as ``picker net`` shows
    it), or ``req`` itself when it names its own network. Values given with --rf/--rg
    are kept exactly. This is the network the checks, the rankings and the waveform
    prediction use instead of an ideal ratio."""
    if req.network is not None:
        return req
    pd = part if isinstance(part, nm.PartData) else nm.PartData.from_row(part)
    # the values design_network chooses, without its tolerance analysis (Monte Carlo)
    _, net, _, _ = _choose(req, Context(req, pd), series)
    return req.with_changes(network=dict(net), network_designed=True)


__all__ = ["COMP_MIN_IMPROVEMENT", "Network", "TIE", "design_network", "exact_gain",
           "with_designed_network"]
