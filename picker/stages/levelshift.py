"""The level-shifting stage: an input range mapped onto an output range on one supply.

The requirement gives the input range ``vin_lo..vin_hi`` and the output levels at its
two ends (``--vin-range``, ``--vout-range``); they fix ``vout = G·vin + Voffset`` with
``G = (vout@hi - vout@lo)/(vin_hi - vin_lo)`` (sign included) and
``Voffset = vout@lo - G·vin_lo``. Every level here is absolute, from ground (0 V): the
source, the reference divider's foot and the load all return to ground.

The offset comes from a source ``Vs`` (the positive rail, or a reference voltage given
with ``--shift-source``) through the divider's upper leg ``ru?`` (source -> node) and
lower leg ``rl?`` (node -> ground), ``?`` the input it drives (p or n). Four forms, chosen by the signs of G and Voffset:

===========  ===========  ==============================================================
G            Voffset      form
===========  ===========  ==============================================================
> 0          >= 0         ``sum+``: input (Rs + rp) and ``rup`` summed into the
                          non-inverting input, ``rlp`` only where G + Voffset/Vs < 1;
                          ``rf``, ``rg`` set the noise gain N = 1 + rf/rg
> 1          < 0          ``leg``: input straight into the non-inverting input (rp = 0);
                          the divider ``run``/``rln`` is the ground leg (its Thévenin
                          resistance is rf/(G - 1), its voltage Vt = -Voffset/(G - 1))
< 0          >= 0         ``div+``: input through ri into the inverting input, the divider
                          ``rup``/``rlp`` on the non-inverting input at Voffset/(1 + |G|)
< 0          < 0          ``sum-``: input through ri and the source through ``run``
                          summed into the inverting input; the non-inverting input at
                          ground
===========  ===========  ==============================================================

With an ideal op-amp the levels follow from nodal analysis (Kirchhoff's current law at
each input node, vp = vn; any circuits text, e.g. Horowitz and Hill, The Art of
Electronics, 3rd ed., ch. 4, from memory): ``dc_levels``. For the signal the source Vs
is a ground, so the stage reduces to the base reduction (kp, zp, kg, rg, rf) like any
other (``reduce``) and every existing check sees it; the DC levels enter through
``input_levels`` (the common-mode check) and through the output current at the two
ends of the range (``LevelStage.amps_per_volt_out``: the worse end's current, so the
swing and output-current checks count the divider and the load at the real levels).
The requirement's reference level is the middle of the output range and its amplitude
half the output span, so the swing check tests both ends of the output range.

Left out: the source Vs is taken as exact and quiet (rail tolerance, ripple and
reference noise move the output by ``Voffset/Vs`` per volt of Vs); the input bias
currents' offset and the resistor tolerances are checked as for any stage (offset and
gain-accuracy checks), not as a shift of the offset itself.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Literal

import numpy as np
import numpy.typing as npt

from picker.circuit.mna import Netlist, OpAmp, Resistor, Source
from picker.errors import BadRequirement
from picker.stages.base import Array, Stage, StageType, with_cload

if TYPE_CHECKING:
    from picker.design.requirement import Requirement

#: What the level-shift model leaves out (shown with its specifications and network).
LEFT_OUT = ("left out: the divider's source is taken as exact and quiet (its tolerance, "
            "ripple and noise move the output by Voffset/Vs per volt); the levels are those "
            "of an ideal op-amp (its offset, bias currents and gain error are the checks' "
            "job); resistor tolerance moves the offset as well as the gain")

#: The node the divider's upper leg hangs from in the stage's netlist.
SOURCE_NODE = "vs"

FormName = Literal["sum+", "leg", "div+", "sum-"]


@dataclass(frozen=True)
class Form:
    """Where the input and the reference divider attach: ``p`` or ``n``."""

    name: FormName
    input_node: Literal["p", "n"]
    divider_node: Literal["p", "n"]
    text: str

    @property
    def names(self) -> tuple[str, str, str]:
        """The network's names of the input leg and the divider's upper and lower legs."""
        return (("rp" if self.input_node == "p" else "ri"),
                "ru" + self.divider_node, "rl" + self.divider_node)


FORMS: dict[FormName, Form] = {
    "sum+": Form("sum+", "p", "p", "non-inverting, offset summed into the non-inverting input"),
    "leg": Form("leg", "p", "n", "non-inverting, reference divider as the ground leg"),
    "div+": Form("div+", "n", "p", "inverting, reference divider on the non-inverting input"),
    "sum-": Form("sum-", "n", "n", "inverting, offset summed into the inverting input"),
}

#: The resistors of a level-shifting stage: rf (out -> inverting input), rg (inverting
#: input -> ground), the input leg rp (to the non-inverting input) or ri (to the
#: inverting input), the divider's upper leg ru? (source -> node) and lower leg rl?
#: (node -> ground) with ? = p or n the node it drives. inf: open; rp may be 0.
NAMES = ("rf", "rg", "rp", "ri", "rup", "rlp", "run", "rln")


def mapping(vin_range: tuple[float, float], vout_range: tuple[float, float]
            ) -> tuple[float, float]:
    """(G, Voffset): the signed gain (V/V) and offset (V) of ``vout = G·vin + Voffset``
    through the two points (vin_lo, vout@lo) and (vin_hi, vout@hi)."""
    (a, b), (c, d) = vin_range, vout_range
    g = (d - c) / (b - a)
    return g, c - g * a


def form_of(gain: float, offset: float) -> Form:
    """The form the signs of the gain and the offset call for (module docstring)."""
    if gain > 0:
        return FORMS["sum+" if offset >= 0 else "leg"]
    return FORMS["div+" if offset >= 0 else "sum-"]


def form_in(res: Mapping[str, object]) -> Form:
    """The form a network's names say (input leg rp or ri, divider legs ?p or ?n)."""
    inp = "p" if "rp" in res else "n"
    div = "p" if ("rup" in res or "rlp" in res) else "n"
    return next(f for f in FORMS.values() if (f.input_node, f.divider_node) == (inp, div))


def source_of(req: Requirement) -> float:
    """The voltage the reference divider hangs from, V: --shift-source or V+."""
    return req.rail_pos if req.shift_source_v is None else req.shift_source_v


def ideal_levels(gain: float, offset: float, vs: float, rs: float, rf: float,
                 rg: float | None = None) -> dict[str, float]:
    """Resistors of exact value for ``vout = gain·vin + offset`` from ``vs`` (V), Ω.

    ``rf`` sets the scale; the node the divider drives sees the Thévenin resistance of
    the other input (bias currents balanced) where the form leaves that free. In the
    ``sum+`` form a given ``rg`` sets the noise gain N = 1 + rf/rg (at least
    G + Voffset/Vs) and ``rlp`` takes up the rest. Raises BadRequirement naming the fix
    where no form on a positive source makes the offset.
    """
    form = form_of(gain, offset)
    g = abs(gain)
    inf = math.inf
    if form.name == "sum+":
        least = max(1.0, g + offset / vs)
        if rg is None:
            rg = inf if least == 1.0 else rf / (least - 1.0)
        n = 1.0 + rf / rg
        if n < least * (1 - 1e-12):
            raise BadRequirement(f"--rg: {rg:g} Ω makes a noise gain {n:.6g}, below the "
                                 f"{least:.6g} the ranges need; lower it")
        a1, a2 = g / n, offset / (vs * n)  # input and source fractions at p
        zp = max(rf if math.isinf(rg) else rf * rg / (rf + rg), rs * a1 * 1.01)
        rest = 1.0 - a1 - a2
        return {"rf": rf, "rg": rg, "rp": zp / a1 - rs, "rup": inf if a2 == 0 else zp / a2,
                "rlp": inf if rest <= 1e-12 else zp / rest}
    if form.name == "leg":
        if g <= 1.0:
            raise BadRequirement(
                f"--vout-range: a gain of {g:.4g} V/V with a negative offset "
                f"({offset:.4g} V) needs a negative reference; widen the output range so the "
                "gain exceeds 1, or invert it")
        rth, vt = rf / (g - 1.0), -offset / (g - 1.0)
        if vt > vs:
            raise BadRequirement(
                f"--vout-range: the offset {offset:.4g} V needs {vt:.4g} V on the ground leg, "
                f"above the {vs:g} V source; give a higher --shift-source or a smaller shift")
        return {"rf": rf, "rp": 0.0, "run": rth * vs / vt,
                "rln": inf if vt == vs else rth * vs / (vs - vt)}
    ri = rf / g - rs
    if ri <= 0:
        raise BadRequirement(f"--source: {rs:g} Ω is not below the input resistor rf/|G| = "
                             f"{rf / g:g} Ω; raise --rf above {rs * g * 2:g} Ω")
    if form.name == "div+":
        vp = offset / (1.0 + g)
        if vp > vs:
            raise BadRequirement(
                f"--vout-range: the offset {offset:.4g} V needs {vp:.4g} V on the "
                f"non-inverting input, above the {vs:g} V source; give a higher "
                "--shift-source or a smaller shift")
        zp = rf * (rs + ri) / (rf + rs + ri)
        return {"rf": rf, "ri": ri, "rup": inf if vp == 0 else zp * vs / vp,
                "rlp": inf if vp == vs else zp * vs / (vs - vp)}
    return {"rf": rf, "ri": ri, "run": rf * vs / -offset}


def _y(r: npt.ArrayLike) -> Array:
    """Conductance 1/r, S (inf: 0; 0: inf)."""
    with np.errstate(divide="ignore"):
        return 1.0 / np.asarray(r, float)  # type: ignore[no-any-return]


def achieved(res: Mapping[str, npt.ArrayLike], rs: float, vs: float) -> tuple[Array, Array]:
    """(G, Voffset) the network makes with an ideal op-amp, for arrays of values.

    With Yx = 1/Rx, Yin = 1/(Rs + rin-leg) (nodal analysis, module docstring):

    - sum+: N = 1 + rf/rg, G = N·Yin/(Yin + Yu + Yl), Voffset = N·Vs·Yu/(Yin + Yu + Yl)
    - leg:  G = 1 + rf·(Yu + Yl), Voffset = -rf·Vs·Yu
    - div+: G = -rf·Yin, Voffset = (1 + rf·Yin)·Vs·Yu/(Yu + Yl)
    - sum-: G = -rf·Yin, Voffset = -rf·Vs·Yu
    """
    form = form_in(res)
    inp, up, low = form.names
    rf = np.asarray(res["rf"], float)
    yin = _y(rs + np.asarray(res[inp], float))
    yu, yl = _y(res.get(up, math.inf)), _y(res.get(low, math.inf))
    if form.name == "sum+":
        n = 1.0 + rf * _y(res.get("rg", math.inf))
        total = yin + yu + yl
        return n * yin / total, n * vs * yu / total
    if form.name == "leg":
        return 1.0 + rf * (yu + yl), -rf * vs * yu
    g = -rf * yin
    if form.name == "div+":
        return g, (1.0 + rf * yin) * vs * yu / (yu + yl)
    return g, -rf * vs * yu


@dataclass(frozen=True)
class Levels:
    """The DC levels at one input level, ideal op-amp: V and A (out of the pin)."""

    vin: float
    vp: float
    vout: float
    i_out: float
    i_ref: float  # drawn from the source Vs through the divider's upper leg


def dc_levels(res: Mapping[str, float], rs: float, vs: float, vin: float,
              load: float) -> Levels:
    """Node levels with an ideal op-amp (vp = vn, no input current), by Kirchhoff's
    current law at the inverting input (module docstring). The load returns to ground."""
    form = form_in(res)
    inp, up, low = form.names
    g, off = achieved(res, rs, vs)
    vout = float(g) * vin + float(off)
    rin = rs + res[inp]
    yu, yl = float(_y(res.get(up, math.inf))), float(_y(res.get(low, math.inf)))
    if form.input_node == "p" and form.divider_node == "p" and rin > 0:
        yin = float(_y(rin))
        vp = (vin * yin + vs * yu) / (yin + yu + yl)
    elif form.input_node == "p":
        vp = vin
    elif form.divider_node == "p":
        vp = vs * yu / (yu + yl)
    else:
        vp = 0.0
    # out of the pin: into the load (to ground) and through rf to the inverting input,
    # which sits at vp; the divider's node sits at vp too (vn = vp)
    i_out = vout * float(_y(load)) + (vout - vp) / res["rf"]
    return Levels(vin, vp, vout, i_out, (vs - vp) * yu)


def thevenin(res: Mapping[str, float], vs: float) -> tuple[float, float]:
    """(Vth, Rth) of the reference divider alone, V and Ω (inf: no divider)."""
    _, up, low = form_in(res).names
    yu, yl = float(_y(res.get(up, math.inf))), float(_y(res.get(low, math.inf)))
    if yu + yl == 0:
        return 0.0, math.inf
    return vs * yu / (yu + yl), 1.0 / (yu + yl)


@dataclass(frozen=True)
class LevelStage(Stage):
    """A stage whose output current is taken at the ends of its output range."""

    end_current_a: float = 0.0  # the larger |output current| at the two ends, A
    half_span_v: float = 1.0  # half the output span, V

    @property
    def amps_per_volt_out(self) -> float:
        """The worse end's output current per volt of the half span (load and network
        at the real levels; see the module docstring)."""
        return self.end_current_a / self.half_span_v


class LevelShift(StageType):
    name = "level-shift"
    network_names = NAMES
    required = ("rf",)
    pair_names = None
    gain_names = NAMES

    @staticmethod
    def mapping(req: Requirement) -> tuple[float, float]:
        if req.vin_range is None or req.vout_range is None:
            raise BadRequirement("--vin-range/--vout-range: a level-shift stage needs both "
                                 "ranges, e.g. --vin-range 0..80mV --vout-range 0.25..4.75V")
        return mapping(req.vin_range, req.vout_range)

    def designed(self, req: Requirement, series: str) -> Requirement | None:
        """The divider and gain network the ranges set (picker.design.levelnet)."""
        from picker.design.levelnet import with_level_network  # it imports this module

        return with_level_network(req, series)  # type: ignore[arg-type]

    def design(self, req: Requirement, series: str) -> Any:
        """picker.design.levelnet.LevelNetwork."""
        from picker.design.levelnet import design_levels  # it imports this module

        return design_levels(req, series)  # type: ignore[arg-type]

    def build(self, req: Requirement) -> Stage:
        g, off = self.mapping(req)
        vs = source_of(req)
        ideal = req.network is None
        res = (ideal_levels(g, off, vs, req.source_ohm, req.rf_ohm) if ideal
               else dict(req.network or {}))
        load = math.inf if req.load_ohm is None else req.load_ohm
        kp, zp, kg, rg, rf = self.reduce(res, req.source_ohm)
        assert req.vin_range is not None
        ends = [dc_levels(res, req.source_ohm, vs, v, load) for v in req.vin_range]
        return LevelStage(self.name, res, kp, zp, kg, rg, rf, load, req.gain, ideal,
                          with_cload(self.netlist(res, req.source_ohm, load), req.cload_f),
                          req.cload_f, max(abs(e.i_out) for e in ends), req.vout)

    def ideal_network(self, gain: float, rs: float, rf: float) -> dict[str, float]:
        raise BadRequirement("--vin-range/--vout-range: a level-shift stage's network "
                             "follows from its ranges; give both")

    def reduce(self, res: Mapping[str, float], rs: float) -> tuple[float, float, float, float, float]:
        """(kp, zp, kg, rg, rf) for the signal: the source Vs is a ground."""
        form = form_in(res)
        inp, up, low = form.names
        rin = rs + res[inp]
        yin = math.inf if rin == 0 else 1.0 / rin
        yd = float(_y(res.get(up, math.inf)) + _y(res.get(low, math.inf)))
        if form.input_node == "p":
            yp = yin + (yd if form.divider_node == "p" else 0.0)
            kp, zp = (1.0, rin) if math.isinf(yin) or yp == yin else (yin / yp, 1.0 / yp)
        elif form.divider_node == "p" and yd > 0:
            kp, zp = 0.0, 1.0 / yd
        else:
            kp, zp = 0.0, 0.0  # tied to ground
        yn = float(_y(res.get("rg", math.inf))) + (yin if form.input_node == "n" else 0.0) + (
            yd if form.divider_node == "n" else 0.0)
        kg = yin / yn if form.input_node == "n" else 0.0
        return kp, zp, kg, (math.inf if yn == 0 else 1.0 / yn), res["rf"]

    def netlist(self, res: Mapping[str, float], rs: float, load: float) -> Netlist:
        """The signal circuit: input 1 V, output node ``o``; the divider's source is the
        node ``vs``, held at the reference by a 0 V source (a deck holds it at Vs)."""
        form = form_in(res)
        inp, up, low = form.names
        d = form.divider_node
        inf = math.inf
        e: list[Resistor | Source | OpAmp] = [
            Source("s", "0", 1.0), Resistor("s", "a", rs),
            Resistor("a", form.input_node, res[inp]),
            Source(SOURCE_NODE, "0", 0.0), Resistor(d, SOURCE_NODE, res.get(up, inf)),
            Resistor(d, "0", res.get(low, inf)),
            Resistor("n", "0", res.get("rg", inf)), Resistor("n", "o", res["rf"]),
            Resistor("o", "0", load)]
        if form.name == "sum-":
            e.append(Resistor("p", "0", 0.0))
        e.append(OpAmp("p", "n", "o"))
        return Netlist(tuple(e), "o")

    def ideal_gain(self, rs: float, res: Mapping[str, npt.ArrayLike]) -> Array:
        """|G| for arrays of values (``achieved``)."""
        return np.abs(achieved(res, rs, 1.0)[0])  # type: ignore[no-any-return]

    def notes(self, req: Requirement, st: Stage) -> list[str]:
        """The form, the levels the checks use, and what the model leaves out."""
        g, off = self.mapping(req)
        assert req.vin_range is not None and req.vout_range is not None
        vs = source_of(req)
        ends = [dc_levels(st.resistors, req.source_ohm, vs, v, st.load) for v in req.vin_range]
        made = ", ".join(f"{e.vin:.4g} V -> {e.vout:.5g} V (inputs at {e.vp:.4g} V, output "
                         f"current {e.i_out * 1e3:.4g} mA)" for e in ends)
        return [f"level shift: {form_in(st.resistors).text}; vout = {g:+.6g}·vin "
                f"{off:+.5g} V from a {vs:g} V source; with this network {made}",
                f"level shift {LEFT_OUT}"]

    def input_levels(self, req: Requirement, st: Stage) -> tuple[float, float]:
        """The non-inverting input's real levels at the two ends of the input range."""
        assert req.vin_range is not None
        vps = [dc_levels(st.resistors, req.source_ohm, source_of(req), v, st.load).vp
               for v in req.vin_range]
        return min(vps), max(vps)


KIND = LevelShift()

__all__ = ["FORMS", "KIND", "LEFT_OUT", "NAMES", "Form", "LevelShift", "LevelStage", "Levels", "achieved",
           "dc_levels", "form_in", "form_of", "ideal_levels", "mapping", "source_of",
           "thevenin"]
