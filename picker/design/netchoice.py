"""How the designer chooses among admissible pairs, and what the choice means at the board.

The objective (picker's own rule, documented in the README):

1. Gain error counts only down to what the resistor tolerance swamps: errors below
   ``floor = min(tolerance/5, RATIO_SHARE x gain budget / margin)`` are equal (1%
   resistors move a ratio by about ±2%, so 0.005% against 0.2% buys nothing).
2. Among the pairs equal in gain error the lowest score wins, where

       score = log10(feedback / 1 Ω)             (impedance level: noise and offset)
             + NICE_STEP x (nice(a) + nice(b))    (values engineers keep in the drawer)
             + noise / noise budget share          (with --noise-max)
             + offset / offset budget share        (with --offset-max and the part's Ib;
               else bias-current offset / (Vos·NG) of the part when both are known)
             + SOURCE_WEIGHT x Rs/(Rs + rg)        (the source's share of the gain)

   ``nice`` is 0 for a decade value (1, 10, 100 ...), 1 for the rest of E3, 2 for E6,
   3 for E12, 4 for E24, 5 for E48, 6 for E96, 7 for E192: one step costs as much as
   NICE_STEP of a decade of impedance, so 100 kΩ/10 kΩ beats 91 kΩ/9.1 kΩ.

The electrical summary (input impedance, the source's share of the gain, the network's
output current and each resistor's power at the stage's peak) is computed for an ideal
op-amp from the node voltages (virtual short between the inputs).
"""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np
import numpy.typing as npt

from picker.design import netmodel as nm
from picker.design import series as es
from picker.design.netlimits import Context, Limit, offset_v
from picker.design.requirement import Requirement
from picker.quantities import fmt

Array = npt.NDArray[np.float64]

#: Errors below this fraction of the resistor tolerance count as equal.
TOL_FLOOR = 0.2
#: Score of one niceness step, in decades of impedance.
NICE_STEP = 0.05
#: Score of the source's share of the gain (per unit share).
SOURCE_WEIGHT = 5.0
_NICE_ORDER: tuple[es.SeriesName, ...] = ("E3", "E6", "E12", "E24", "E48", "E96", "E192")


def error_floor(req: Requirement) -> float:
    """Gain errors below this count as equal (see the module docstring)."""
    share = nm.RATIO_SHARE * req.gain_error / req.margin
    return min(TOL_FLOOR * req.tolerance, share)


def niceness(values: npt.ArrayLike) -> Array:
    """0 for decade values, then 1 + the index of the coarsest series holding it."""
    v = np.asarray(values, float)
    out = np.full(v.shape, float(len(_NICE_ORDER) + 1))
    for i in range(len(_NICE_ORDER) - 1, -1, -1):  # finest first: the coarsest overwrites
        out = np.where(es.members(v, _NICE_ORDER[i]), float(i + 1), out)
    pos = (v > 0) & np.isfinite(v)
    safe = np.where(pos, v, 1.0)
    mant = safe / 10.0 ** np.floor(np.log10(safe) + 1e-12)
    return np.where(pos & (np.abs(mant - 1.0) < 1e-9), 0.0, out)  # type: ignore[no-any-return]


def score(ctx: Context, m: nm.PairModel, lims: list[Limit], a: Array, b: Array) -> Array:
    """The score of every pair (lower is better; see the module docstring)."""
    req, p = ctx.req, ctx.part
    s = np.log10(a) + NICE_STEP * (niceness(a) + niceness(b))
    for lim in lims:
        if lim.name in ("noise", "offset"):
            s = s + lim.metric / lim.bound
    if ctx.offset_budget is None and p.ib_a is not None and p.vos_v:
        s = s + offset_v(ctx, m) / (p.vos_v * m.noise_gain)
    if req.topology in ("inverting", "difference") and req.source_ohm > 0:
        s = s + SOURCE_WEIGHT * req.source_ohm / (req.source_ohm + b)
    return np.broadcast_to(s, m.gain.shape)  # type: ignore[no-any-return]


def peak_currents(req: Requirement, net: Mapping[str, float]) -> dict[str, float]:
    """Peak current through each resistor, A, with an ideal op-amp at the peak input.

    Inverting: i = vin/(Rs + rg) through rg and rf. Non-inverting: vn = vin, i = vin/rg
    through rg and rf. Difference (±vin/2 each through Rs): vp = vin/2·r4/(Rs + r3 + r4)
    = vn; i1 = (vin/2 + vn)/(Rs + r1) through r1 and r2; i3 = vin/2/(Rs + r3 + r4)
    through r3 and r4. rp and a follower's rf carry only bias current (0 here).
    """
    t, vin, rs = req.topology, req.vin, req.source_ohm
    out = {k: 0.0 for k in net}
    if t == "inverting":
        i = vin / (rs + net["rg"])
        out.update(rf=i, rg=i)
    elif t == "non-inverting" and math.isfinite(net.get("rg", math.inf)):
        i = vin / net["rg"]
        out.update(rf=i, rg=i)
    elif t == "difference":
        i3 = vin / 2 / (rs + net["r3"] + net["r4"])
        vp = i3 * net["r4"]
        i1 = (vin / 2 + vp) / (rs + net["r1"])
        out.update(r1=i1, r2=i1, r3=i3, r4=i3)
    return out


def peak_power(req: Requirement, net: Mapping[str, float]) -> dict[str, float]:
    """Power in each resistor at the stage's peak, W: i_pk²·R (a sine averages half)."""
    cur = peak_currents(req, net)
    return {k: cur[k] ** 2 * r for k, r in net.items() if 0 < r < math.inf}


def network_current(req: Requirement, net: Mapping[str, float]) -> float:
    """Current the network draws from the output at the peak, A (load not included)."""
    cur = peak_currents(req, net)
    return cur.get("r2", 0.0) if req.topology == "difference" else cur.get("rf", 0.0)


def input_impedance(req: Requirement, net: Mapping[str, float]) -> float | None:
    """What the source sees, Ω: rg (inverting), 2·r1 differential (difference, matched
    legs, balanced drive); None where it is the op-amp's own input."""
    if req.topology == "inverting":
        return net["rg"]
    if req.topology == "difference":
        return 2 * net["r1"]
    return None


def source_share(req: Requirement, net: Mapping[str, float]) -> float | None:
    """The source's share of the gain-setting input leg, Rs/(Rs + rg), when it is inside
    the gain (inverting, difference)."""
    if req.topology not in ("inverting", "difference") or req.source_ohm <= 0:
        return None
    leg = net["rg"] if req.topology == "inverting" else net["r1"]
    return req.source_ohm / (req.source_ohm + leg)


def why_line(ctx: Context, net: Mapping[str, float], noise: float | None,
             offset: float | None) -> str:
    """One line that explains the choice: values, input, network load, budget shares."""
    req = ctx.req
    names = [n for n in ("rf", "rg", "r2", "r1", "rp") if n in net and 0 < net[n] < math.inf]
    head = ", ".join(f"{n.capitalize()} {fmt(net[n], 'resistance')}" for n in names)
    bits = []
    zin = input_impedance(req, net)
    if zin is not None:
        bits.append(f"input {fmt(zin, 'resistance')}")
    share = source_share(req, net)
    if share is not None:
        bits.append(f"source {share:.1%} of the input leg")
    bits.append(f"network load {fmt(network_current(req, net), 'current', 2)}")
    if noise is not None and ctx.noise_budget:
        bits.append(f"{noise / ctx.noise_budget:.0%} of the noise budget")
    if offset is not None and ctx.offset_budget:
        bits.append(f"{offset / ctx.offset_budget:.0%} of the offset budget")
    return f"{head or 'no resistors'}: " + ", ".join(bits)


__all__ = ["NICE_STEP", "SOURCE_WEIGHT", "TOL_FLOOR", "error_floor", "input_impedance",
           "network_current", "niceness", "peak_currents", "peak_power", "score",
           "source_share", "why_line"]
