"""Design a stage's resistor network from standard E-series values (IEC 60063).

design_network(req, part) searches every pair of standard values inside the window
at once (numpy broadcasting, no Python loop over values): (rf, rg) for the inverting
and non-inverting stages, (r2, r1) with matched ratios r4 = r2, r3 = r1 for the
difference stage. A pair is admissible when it keeps the limits of
picker.design.netlimits (output load, bias-current offset, noise and input-resistance
shares of their budgets, minimum input impedance); the optimum is the admissible pair
with the smallest gain error, ties (within 1e-9) going to the lower resistances, which
keep noise and offset lowest. When no single value meets the ratio share of the
gain-error budget, two standard resistors in series or parallel are tried for the leg
(the lowest feedback resistor whose leg meets the share, else the closest).
The result carries the resistor tolerance analysis of picker.design.tolerance.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import numpy.typing as npt

from picker.circuit.opamp import closed_loop_gain
from picker.design import netmodel as nm
from picker.design import series as es
from picker.design.netlimits import Context, check_pairs, conflict_message, describe
from picker.design.requirement import Requirement
from picker.design.tolerance import (
    MC_SEED,
    How,
    Slot,
    monte_carlo,
    p99_error,
    tolerance_needed,
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
        }
        combined = {s.name: {"how": s.how, "parts": list(s.parts)}
                    for s in self.slots if s.how != "single"}
        if combined:
            out["combined"] = combined
        return out


def design_network(req: Requirement, part: Mapping[str, Any] | nm.PartData | None = None, *,
                   series: es.SeriesName = "E24", tolerance: float = 0.01,
                   zin_ohm: float | None = None, feedback_ohm: float | None = None,
                   seed: int = MC_SEED) -> Network:
    """The best standard-value network for ``req`` (around ``part``, if given).

    ``part`` is a parts-table row (mapping or pandas Series) or PartData; without it
    the limits fall back to common practice (total output load >= 1 kΩ). A network
    given in the requirement is analysed as it is instead of designed.
    ``feedback_ohm`` pins the feedback resistor (rf; r2 and r4 of the difference stage)
    to the series value nearest to it; only the leg is searched then.
    """
    if not 0 <= tolerance < 0.5:
        raise BadRequirement(f"--tolerance: {tolerance:g} is not a resistor tolerance; "
                             "write e.g. 1% or 0.1%")
    pd = part if isinstance(part, nm.PartData) else nm.PartData.from_row(part)
    ctx = Context(req, pd, zin_ohm)
    t = req.topology
    if zin_ohm is not None and t not in ("inverting", "difference"):
        raise BadRequirement(f"--zin: a {t} stage's input impedance is the op-amp's own, "
                             "not set by resistors; use --zin with inverting or difference")
    if req.network is not None:
        slots, notes = _given(req, series)
        return _finish(req, ctx, series, tolerance, slots, dict(req.network), notes, seed)
    if t == "follower" or (t == "non-inverting" and req.gain == 1):
        slots, net, notes = _follower(req, pd, series)
        return _finish(req, ctx, series, tolerance, slots, net, notes, seed)
    return _design_pair(req, ctx, series, tolerance, seed, feedback_ohm)


def _pair_names(t: str) -> tuple[str, str]:
    """(feedback, leg): the names the stage type's designer pair fills."""
    names = kind(t).pair_names
    assert names is not None, f"the {t} stage has no pair to design"
    return names


def _design_pair(req: Requirement, ctx: Context, series: es.SeriesName, tol: float,
                 seed: int, feedback_ohm: float | None) -> Network:
    t, gain = req.topology, req.gain
    v = es.values(series, *nm.WINDOW_OHM)
    fv = v if feedback_ohm is None else np.array([es.nearest(feedback_ohm, series)])
    a, b = fv[:, None], v[None, :]
    model, checks = check_pairs(ctx, a, b)
    ok = np.logical_and.reduce([m for _, m in checks]) if checks else np.ones(model.gain.shape,
                                                                              bool)
    ok = np.broadcast_to(ok, model.gain.shape)
    if not ok.any():
        raise BadRequirement(conflict_message(ctx, series, checks))
    err = np.where(ok, np.abs(model.gain / gain - 1), np.inf)
    i, j = np.unravel_index(_first_best(err), err.shape)
    fa, fb = _pair_names(t)
    best = (float(fv[i]), Slot.single(fb, float(v[j])))
    best_err = float(err[i, j])
    notes: list[str] = []
    if feedback_ohm is not None:
        notes.append(f"{fa.capitalize()} pinned at {fmt(fv[0], 'resistance', 4)} ({series} "
                     f"nearest to {fmt(feedback_ohm, 'resistance', 4)}); only the leg was "
                     "searched.")
    share = nm.RATIO_SHARE * req.gain_error / req.margin
    if best_err > share:
        combo = _best_combo(ctx, fv, v, share)
        if combo is not None and combo[2] < best_err - TIE:
            notes.append(
                f"No single {series} pair comes within {fmt(share, 'ratio')} of the gain (the "
                f"ratio's {nm.RATIO_SHARE:.0%} share of the {fmt(req.gain_error, 'ratio')} "
                f"budget, over margin {req.margin:g}; best {fmt(best_err, 'ratio')}); the "
                f"{fb} position is two {series} resistors in {combo[1].how}, for "
                f"{fmt(combo[2], 'ratio')}.")
            best, best_err = (combo[0], combo[1]), combo[2]
        elif best_err > req.gain_error and not _reachable(ctx, fv):
            where = ("--zin" if ctx.zin_ohm and _reachable(Context(req, ctx.part), fv)
                     else "--source" if req.source_ohm else "--gain")
            raise BadRequirement(
                f"{where}: no network of {fmt(nm.WINDOW_OHM[0], 'resistance')}..."
                f"{fmt(nm.WINDOW_OHM[1], 'resistance')} resistors reaches {'an' if t[0] in 'aeiou' else 'a'} {t} gain of "
                f"{gain:g} V/V" + (f" with an input resistor of at least "
                                   f"{fmt(ctx.zin_ohm, 'resistance')}" if ctx.zin_ohm else "")
                + (f" from a {fmt(req.source_ohm, 'resistance')} source" if req.source_ohm
                   else "") + f" (closest {float(model.gain.flat[_first_best(err)]):.4g} V/V); "
                "lower --zin or --source, change the gain, or buffer the input")
        else:
            notes.append(f"The nominal ratio error {fmt(best_err, 'ratio')} exceeds its "
                         f"{fmt(share, 'ratio')} share of the gain-error budget; a finer "
                         "series (--series E96) gets closer.")
    rf, leg = best
    if t in ("inverting", "difference") and req.source_ohm >= leg.ohms:
        notes.append(f"The {fmt(req.source_ohm, 'resistance')} source is most of the input leg "
                     f"(with {fb} {fmt(leg.ohms, 'resistance')}): the gain follows its accuracy, "
                     "which the tolerance figures do not include; --zin or --rf make the leg "
                     "larger.")
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
    return _finish(req, ctx, series, tol, slots, net, notes, seed)


def _reachable(ctx: Context, fv: Array) -> bool:
    """Whether some feedback value's ideal leg (exact ratio) lies inside the window and
    above --zin: if not, no series, however fine, gets close."""
    req = ctx.req
    g, rs = req.gain, req.source_ohm
    leg = fv / (g - 1) if req.topology == "non-inverting" else fv / g - rs
    lo = max(nm.WINDOW_OHM[0], ctx.zin_ohm or 0.0)
    return bool(((leg >= lo) & (leg <= nm.WINDOW_OHM[1])).any())


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
    rp = es.nearest(rp_ideal, series)
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


def _follower(req: Requirement, p: nm.PartData, series: es.SeriesName
              ) -> tuple[list[Slot], dict[str, float], list[str]]:
    """No network; a feedback resistor equal to the source resistance when it pays."""
    open_leg = {"rg": math.inf} if req.topology == "non-inverting" else {}
    rs = req.source_ohm
    if p.ib_a is not None and p.ios_a is not None and rs >= nm.WINDOW_OHM[0]:
        rf = es.nearest(rs, series)
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


def _given(req: Requirement, series: es.SeriesName) -> tuple[list[Slot], list[str]]:
    """Slots of a network given in the requirement, analysed as it is."""
    assert req.network is not None
    slots = [Slot.single(k, v) for k, v in req.network.items() if 0 < v < math.inf]
    off = [s.name for s in slots if not es.is_member(s.ohms, series)]
    notes = ["The network was given in the requirement; it is analysed, not designed."]
    if off:
        notes.append(f"Not {series} values: {', '.join(off)}.")
    return slots, notes


def _finish(req: Requirement, ctx: Context, series: es.SeriesName, tol: float,
            slots: list[Slot], net: dict[str, float], notes: list[str], seed: int) -> Network:
    t, rs = req.topology, req.source_ohm
    gain = float(kind(t).ideal_gain(rs, net))
    wc = worst_case(t, rs, net, tol)
    p99 = p99_error(monte_carlo(t, rs, slots, tol, seed=seed), req.gain) if slots else abs(
        gain / req.gain - 1)
    n = Network(t, series, tol, req.gain, tuple(slots), gain, wc, p99, net,
                tuple(describe(ctx)), ())
    return Network(**{**n.__dict__, "notes": tuple(notes + _tolerance_notes(req, n))})


def _tolerance_notes(req: Requirement, n: Network) -> list[str]:
    """Say when the gain-error budget is tighter than the resistor tolerance allows."""
    budget = req.gain_error
    if abs(n.gain_error) > budget:
        return [f"The nominal gain {n.gain:.5g} V/V misses {n.target_gain:.5g} V/V by "
                f"{fmt(abs(n.gain_error), 'ratio')}, beyond the {fmt(budget, 'ratio')} "
                "gain-error budget before any tolerance."]
    if not n.slots or n.tolerance == 0 or n.worst_case_error <= budget:
        return []
    need = tolerance_needed(n.gain_error, n.worst_case_error, n.tolerance, budget)
    fix = (f"use {fmt(need, 'ratio')} resistors or better, or trim" if need is not None
           else "no standard tolerance is enough: trim the gain")
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
                          *, series: es.SeriesName = "E24",
                          feedback_ohm: float | None = None) -> Requirement:
    """``req`` with its network designed from standard values (as ``picker net`` shows
    it), or ``req`` itself when it names its own network. This is the network the
    checks, the rankings and the waveform prediction use instead of an ideal ratio."""
    if req.network is not None:
        return req
    net = design_network(req, part, series=series, feedback_ohm=feedback_ohm)
    return req.with_changes(network=dict(net.network))


__all__ = ["COMP_MIN_IMPROVEMENT", "Network", "TIE", "design_network", "exact_gain",
           "with_designed_network"]
