"""AC coupling: the input coupling capacitor and the bias network of a stage (``--coupling ac``).

An AC-coupled stage takes its signal through a capacitor ``cin`` and sets the DC level of
its non-inverting input itself:

- on a split supply whose reference is ground (``--ref 0`` between the rails), the bias is
  the reference: the non-inverting stage's bias resistor ``rb`` goes to it, the
  inverting stage's non-inverting input is tied to it;
- otherwise (a single supply, or a reference between the rails that is not ground) a
  divider ``r_top`` (from V+) and ``r_bottom`` (to V-) makes the level, decoupled by
  ``cd`` to the negative rail; the non-inverting stage takes it through ``rb``.

Choices (common practice, no source; each said where it is made):

- the divider is always decoupled: undecoupled, the inverting stage would pass the rail's
  ripple and noise at its non-inverting input times the noise gain, and the non-inverting
  stage would pass them straight to its input; its corner 1/(2π·Rdiv·cd) lies at the
  allowed low corner (inverting) or a tenth of it (non-inverting, where it also lies in
  the signal's path);
- the divider's Thévenin resistance Rdiv = r_top‖r_bottom is made about rf (at least
  10 kΩ): at DC the inverting input sees rf (the coupling capacitor leaves rg open), so
  the bias currents of an inverting stage balance; the ratio is the E24 pair nearest to
  the reference level (exact, equal resistors, at mid-rail);
- the non-inverting stage's ``rb`` is the smallest E24 value of at least the input
  impedance asked (``--zin``, default max(10 kΩ, 10 × Rs)) and 10·Rs/gain-error, so that
  the source's loss Rs/(Rs + rb) takes at most a tenth of the gain-error budget;
- its ground leg gets ``cg`` in series with rg, so the DC gain is 1 (the output sits at
  the bias level whatever the gain, and Vos is not multiplied by the noise gain);
- capacitors are E6 values (coupling capacitors, electrolytic or film, are stocked in E6;
  each corner is a bound, not a target, so a coarser series costs only a larger value):
  each starts at the smallest E6 value for its share of the allowed corner and the one
  with the highest corner steps up until the overall -3 dB point, solved exactly with an
  ideal op-amp (picker.circuit.nullor), lies at or below the allowed corner
  (``--low-corner``, default fmin/10).

In the signal band the capacitors are shorts and the bias node an AC ground: the
non-inverting stage's input sees rb to the reference, kp = rb/(Rs + rb), zp = Rs‖rb; the
inverting stage is as DC-coupled. At DC they are open: zp = rb + Rdiv (non-inverting) or
Rdiv (inverting), rg open, the noise gain 1 (``Stage.dc_zp``, ``Stage.dc_rg``).

Noise below the corners (``Stage.lf_noise_v2``): the thermal noise of a resistance R
shunted by a capacitance C integrates to kT/C whatever R (e.g. Johns and Martin, Analog
Integrated Circuit Design, 1st ed., sec. 4.3, from memory). The bias resistor's noise
reaches the input as e·(Rs/R + (rb/R)/(1 + jf/fc)), R = Rs + rb, fc = 1/(2π·R·cin): above
the in-band term Rs‖rb it adds kT/cin·rb²(rb + 2Rs)/R³; the decoupled bias node adds at
most kT/cd.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Literal

import numpy as np

from picker.circuit.mna import GROUND, Capacitor, Netlist, OpAmp, Resistor, Source
from picker.circuit.nullor import node_voltages
from picker.design.netmodel import K_B, ZIN_MIN_OHM, ZIN_SOURCE_RATIO
from picker.design.series import SeriesName, nearest, values
from picker.errors import BadRequirement
from picker.quantities import fmt
from picker.stages.base import Stage, StageType, parallel, with_cload

if TYPE_CHECKING:
    from collections.abc import Mapping

    from picker.design.requirement import Requirement

#: The stages that can be AC-coupled here.
COUPLED_TOPOLOGIES = ("inverting", "non-inverting", "follower")
#: The series of the coupling and decoupling capacitors, and of the bias resistors.
CAP_SERIES: SeriesName = "E6"
RES_SERIES: SeriesName = "E24"
#: The capacitor values made (1 pF .. 10 mF), F.
CAP_RANGE = (1e-12, 10e-3)
#: The least Thévenin resistance of the divider, Ω.
RDIV_MIN_OHM = 10e3
#: Share of the gain-error budget the source's loss into rb may take.
RB_LOSS_SHARE = 0.1
#: The -3 dB point of two equal first-order high-passes over their corner: 1/√(√2 - 1).
TWO_POLE_SPREAD = 1.0 / math.sqrt(math.sqrt(2.0) - 1.0)


@dataclass(frozen=True)
class Coupling:
    """The designed coupling network of one stage (SI units)."""

    mode: Literal["divider", "reference"]
    cin_f: float
    cg_f: float | None  # the non-inverting stage's ground-leg capacitor (None: none)
    r_top: float | None  # divider, from V+ (None: the reference is the bias)
    r_bottom: float | None  # divider, to V-
    cd_f: float | None  # the divider's decoupling capacitor, to V-
    rb: float | None  # the non-inverting stage's bias resistor (None: inverting)
    bias_v: float  # DC level of the non-inverting input and the output, V (no bias current)
    divider_a: float  # current through the divider, A (0: none)
    corners_hz: dict[str, float]  # each network's own corner: input, ground_leg, bias_node
    low_3db_hz: float  # the stage's overall low-frequency -3 dB point (ideal op-amp)
    allowed_hz: float  # the highest -3 dB point allowed
    fmin_hz: float
    zin_ohm: float  # input impedance in the band (resistors; the op-amp's Rin in parallel)
    zin_fmin_ohm: float  # |input impedance| at fmin
    netlist: Netlist  # the stage with its capacitors, input 1 V, rails as AC ground

    @property
    def rdiv(self) -> float:
        """Thévenin resistance of the divider, Ω (0: none)."""
        if self.r_top is None or self.r_bottom is None:
            return 0.0
        return parallel(self.r_top, self.r_bottom)

    def rows(self) -> list[tuple[str, str]]:
        """The design as (what, value) lines for the text reports."""
        out = [("coupling", "AC: input capacitor, bias "
                + ("divider from the rails, decoupled" if self.mode == "divider"
                   else "to the reference (ground)")),
               ("cin (input coupling, E6)", fmt(self.cin_f, "capacitance", 3))]
        if self.rb is not None:
            out.append(("rb (bias resistor, E24)", fmt(self.rb, "resistance", 3)))
        if self.cg_f is not None:
            out.append(("cg (ground leg, DC gain 1, E6)", fmt(self.cg_f, "capacitance", 3)))
        if self.mode == "divider":
            assert self.r_top is not None and self.r_bottom is not None and self.cd_f is not None
            out += [("divider r_top / r_bottom (E24)", f"{fmt(self.r_top, 'resistance', 3)} / "
                                                        f"{fmt(self.r_bottom, 'resistance', 3)}"),
                    ("cd (bias decoupling, E6)", fmt(self.cd_f, "capacitance", 3)),
                    ("divider current", fmt(self.divider_a, "current", 4))]
        out.append(("bias level (input and output, DC)", fmt(self.bias_v, "voltage", 5)))
        names = {"input": "input network corner", "ground_leg": "ground-leg corner",
                 "bias_node": "bias-node corner"}
        out += [(names[k], fmt(v, "frequency", 4)) for k, v in self.corners_hz.items()]
        out += [("low-frequency -3 dB point", f"{fmt(self.low_3db_hz, 'frequency', 4)} "
                                              f"(allowed {fmt(self.allowed_hz, 'frequency', 4)})"),
                ("input impedance", f"{fmt(self.zin_ohm, 'resistance', 4)} in the band, "
                                    f"{fmt(self.zin_fmin_ohm, 'resistance', 4)} at "
                                    f"{fmt(self.fmin_hz, 'frequency', 4)}")]
        return out

    def to_json(self) -> dict[str, Any]:
        """The design in SI units (``coupling`` of spec, why and net JSON)."""
        return {"mode": self.mode, "cin_f": self.cin_f, "cg_f": self.cg_f,
                "r_top_ohm": self.r_top, "r_bottom_ohm": self.r_bottom, "cd_f": self.cd_f,
                "rb_ohm": self.rb, "bias_v": self.bias_v, "divider_a": self.divider_a,
                "corners_hz": dict(self.corners_hz), "low_3db_hz": self.low_3db_hz,
                "allowed_hz": self.allowed_hz, "fmin_hz": self.fmin_hz,
                "zin_ohm": self.zin_ohm, "zin_fmin_ohm": self.zin_fmin_ohm}


def cap_at_least(c: float, what: str) -> float:
    """The smallest E6 value of at least ``c`` (F); BadRequirement beyond 1 pF .. 10 mF."""
    lo, hi = CAP_RANGE
    if not c <= hi:
        raise BadRequirement(f"--fmin: the {what} would need {fmt(c, 'capacitance', 3)}, "
                             f"beyond {fmt(hi, 'capacitance')}; raise --fmin (or --low-corner) "
                             "or the stage's resistances (--rf, --zin)")
    c = max(c, lo)
    return float(values(CAP_SERIES, c * (1 - 1e-12), c * 10)[0])


def _next_cap(c: float) -> float:
    return cap_at_least(c * 1.01, "coupling capacitor")


def _divider(req: Requirement, rth: float) -> tuple[float, float]:
    """(r_top, r_bottom) from the E24 series: the ratio nearest the reference level,
    Thévenin resistance near ``rth``; equal resistors at mid-rail."""
    k = (req.ref - req.rail_neg) / req.span
    if math.isclose(k, 0.5, rel_tol=1e-12):
        r = nearest(2 * rth, RES_SERIES)
        return r, r
    best: tuple[float, float, float] | None = None
    for top in values(RES_SERIES, rth, rth / min(k, 1 - k) * 10):
        bottom = nearest(top * k / (1 - k), RES_SERIES)
        err = abs(bottom / (top + bottom) - k) + 1e-3 * abs(math.log(parallel(top, bottom) / rth))
        if best is None or err < best[0]:
            best = (err, float(top), bottom)
    assert best is not None
    return best[1], best[2]


def _low_3db(net: Netlist, mid: float, lo: float, hi: float) -> float:
    """The highest frequency in [lo, hi] where |H| = mid/√2 (H rising through it), Hz."""
    target = mid / math.sqrt(2.0)
    grid = np.geomspace(lo, hi, 241)
    mag = np.abs(node_voltages(net, grid)[net.out])
    below = np.nonzero(mag < target)[0]
    if len(below) == 0:
        return lo
    i = int(below[-1])
    if i == len(grid) - 1:
        return hi
    a, b = math.log(grid[i]), math.log(grid[i + 1])
    for _ in range(80):  # bisection in log f to double precision
        m = (a + b) / 2
        if abs(node_voltages(net, [math.exp(m)])[net.out][0]) < target:
            a = m
        else:
            b = m
    return math.exp((a + b) / 2)


def full_netlist(topology: str, rs: float, res: Mapping[str, float], load: float,
                 rb: float | None, r_top: float | None, r_bottom: float | None,
                 cin: float, cg: float | None, cd: float | None) -> Netlist:
    """The stage with its coupling network: input 1 V, rails as AC ground (node 0).

    Nodes: s source, a after Rs, p and n the op-amp's inputs, o output, b after cin
    (inverting), g between rg and cg, d the bias node.
    """
    e: list[Any] = [Source("s", GROUND, 1.0), Resistor("s", "a", rs)]
    bias = GROUND
    if r_top is not None and r_bottom is not None and cd is not None:
        bias = "d"
        e += [Resistor("d", GROUND, r_top), Resistor("d", GROUND, r_bottom),
              Capacitor("d", GROUND, cd)]
    if topology == "inverting":
        e += [Capacitor("a", "b", cin), Resistor("b", "n", res["rg"]),
              Resistor("p", bias, 0.0)]
    else:
        assert rb is not None
        e += [Capacitor("a", "p", cin), Resistor("p", bias, rb)]
        rg = res.get("rg", math.inf)
        if cg is not None and math.isfinite(rg):
            e += [Resistor("n", "g", rg), Capacitor("g", GROUND, cg)]
    e += [Resistor("n", "o", res.get("rf", 0.0)), Resistor("o", GROUND, load),
          OpAmp("p", "n", "o")]
    return Netlist(tuple(e), "o")


def design(req: Requirement, res: Mapping[str, float], load: float) -> Coupling:
    """The coupling network of ``req`` around its resistors ``res`` (module docstring)."""
    assert req.fmin_hz is not None
    t, rs = req.topology, req.source_ohm
    rf, rg = res.get("rf", 0.0), res.get("rg", math.inf)
    allowed = req.low_corner_hz if req.low_corner_hz is not None else req.fmin_hz / 10
    split = req.ref == 0.0 and req.rail_neg < 0.0 < req.rail_pos
    r_top = r_bottom = None
    if not split:
        r_top, r_bottom = _divider(req, max(rf, RDIV_MIN_OHM))
    rdiv = 0.0 if r_top is None or r_bottom is None else parallel(r_top, r_bottom)
    rb = None
    if t != "inverting":
        zin = req.zin_ohm if req.zin_ohm is not None else max(ZIN_MIN_OHM,
                                                              ZIN_SOURCE_RATIO * rs)
        least = max(zin, rs / (RB_LOSS_SHARE * req.gain_error))
        rb = float(values(RES_SERIES, least * (1 - 1e-12), least * 10)[0])
    r_in = rs + (rg if t == "inverting" else (rb or 0.0))
    with_cg = t != "inverting" and math.isfinite(rg)
    share = allowed / TWO_POLE_SPREAD if with_cg else allowed
    cin = cap_at_least(1 / (2 * math.pi * r_in * share), "input coupling capacitor")
    cg = cap_at_least(1 / (2 * math.pi * rg * share), "ground-leg capacitor") if with_cg else None
    cd = None
    if rdiv > 0:
        fd = allowed if t == "inverting" else allowed / 10
        cd = cap_at_least(1 / (2 * math.pi * rdiv * fd), "bias decoupling capacitor")

    def corners() -> dict[str, float]:
        out = {"input": 1 / (2 * math.pi * r_in * cin)}
        if cg is not None:
            out["ground_leg"] = 1 / (2 * math.pi * rg * cg)
        if cd is not None:
            out["bias_node"] = 1 / (2 * math.pi * rdiv * cd)
        return out

    def net() -> Netlist:
        return full_netlist(t, rs, res, load, rb, r_top, r_bottom, cin, cg, cd)

    mid = abs(complex(node_voltages(net(), [req.freq_hz * 1e6])["o"][0]))
    low = _low_3db(net(), mid, allowed * 1e-4, req.fmin_hz)
    for _ in range(200):  # the capacitor with the highest corner steps up until it fits
        if low <= allowed * (1 + 1e-12):
            break
        c = corners()
        if cg is not None and c["ground_leg"] > c["input"]:
            cg = _next_cap(cg)
        else:
            cin = _next_cap(cin)
        low = _low_3db(net(), mid, allowed * 1e-4, req.fmin_hz)
    bias_v = req.ref if r_top is None or r_bottom is None else (
        req.rail_neg + req.span * r_bottom / (r_top + r_bottom))
    divider_a = 0.0 if r_top is None or r_bottom is None else req.span / (r_top + r_bottom)
    w = 2 * math.pi * req.fmin_hz
    zd = 0.0 if cd is None else 1 / (1 / rdiv + 1j * w * cd)
    if t == "inverting":
        zin, zin_f = rg, abs(rg + 1 / (1j * w * cin))
    else:
        assert rb is not None
        zin, zin_f = rb, abs(rb + zd + 1 / (1j * w * cin))
    return Coupling("reference" if split else "divider", cin, cg, r_top, r_bottom, cd, rb,
                    bias_v, divider_a, corners(), low, allowed, req.fmin_hz, zin, zin_f, net())


def lf_noise_v2(c: Coupling, rs: float, temp_k: float) -> float:
    """Noise power the coupling network adds below its corners at the non-inverting
    input, V²: kT/cin·rb²(rb + 2Rs)/(Rs + rb)³ and kT/cd (module docstring)."""
    kt = K_B * temp_k
    out = 0.0 if c.cd_f is None else kt / c.cd_f
    if c.rb is not None:
        r = rs + c.rb
        out += kt / c.cin_f * c.rb**2 * (c.rb + 2 * rs) / r**3
    return out


def coupled_stage(kind: StageType, req: Requirement, res: Mapping[str, float], ideal: bool,
                  load: float) -> Stage:
    """The AC-coupled stage of ``req``: the circuit in the signal band (capacitors short,
    the bias node an AC ground), the DC reduction and the coupling design."""
    c = design(req, res, load)
    rs = req.source_ohm
    rf, rg = res.get("rf", 0.0), res.get("rg", math.inf)
    if req.topology == "inverting":
        kp, zp, kg, rg_r = 0.0, 0.0, 1.0, rs + rg
        net = kind.netlist({**res, "rp": 0.0}, rs, load)
        dc_zp = c.rdiv
    else:
        assert c.rb is not None
        kp, zp, kg, rg_r = c.rb / (rs + c.rb), parallel(rs, c.rb), 0.0, rg
        e: list[Any] = [Source("s", GROUND, 1.0), Resistor("s", "p", rs),
                        Resistor("p", GROUND, c.rb)]
        if math.isfinite(rg):
            e.append(Resistor("n", GROUND, rg))
        e += [Resistor("n", "o", rf), Resistor("o", GROUND, load), OpAmp("p", "n", "o")]
        net = Netlist(tuple(e), "o")
        dc_zp = c.rb + c.rdiv
    return Stage(kind.name, dict(res), kp, zp, kg, rg_r, rf, load, req.gain, ideal,
                 with_cload(net, req.cload_f), req.cload_f, dc_zp=dc_zp, dc_rg=math.inf,
                 lf_noise_v2=lf_noise_v2(c, rs, req.temp_max_k), coupling=c)


__all__ = ["CAP_SERIES", "COUPLED_TOPOLOGIES", "Coupling", "RES_SERIES", "cap_at_least",
           "coupled_stage", "design", "full_netlist", "lf_noise_v2"]
