"""The stage as a plain SPICE deck for ngspice (``picker netlist``).

The deck is the stage as picker checks it: the designed network, the source and its
resistance, the load, all from the stage's own netlist (picker.stages), and the part's
linear macromodel with its output reach per rail. Node ``in`` is the input signal
(from the reference ``ref``), ``out`` the output; every picker source becomes a
voltage-controlled source from ``in`` (the difference stage's ±½ halves included), so
``v(out, ref)/v(in, ref)`` is the stage's gain per volt of (differential) input.

The macromodel (``macromodel``, one function so that a second pole can be added in one
place) is picker's own one-state loop written as elements (picker.design.loopstate):
Rin between the inputs; an internal node x, a 1 F capacitor fed by ωu·(vp − vn) and
discharged through 1/ωp (ωu = 2π·GBW, ωp = ωu/A0), so x/vd = A0/(1 + s/ωp); x buffered
and behind Ro at the output. The output reach is a behavioural current source (an
ngspice B element, not diodes): the output current is the linear one,
(x − vo)/Ro, held between what the saturated output stage can give toward each rail,
(V+ − head+ − vo)/Rsat+ and (V− + head− − vo)/Rsat−, so the output settles at
head + Rsat·I from the rail (picker.circuit.output); a second B element holds x where
the output stage takes over (no wind-up, as picker's waveform clamps x). In ``.op`` and
``.ac`` the limits are inactive and the model is linear. Slew rate, the output current
limit, offsets and noise are not modelled (the deck says so in its header).

SPICE reads ``M`` as milli: numbers are written in plain exponent form.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field

from picker import __version__
from picker.circuit.mna import Capacitor, Netlist, OpAmp, Resistor, Source

#: Part fields the deck's macromodel reads (Rsat fields may be replaced by the
#: light-load choice).
DECK_FIELDS: tuple[str, ...] = (
    "gbw_hz", "aol_v_per_v", "rin_ohm", "rout_ohm", "out_head_pos_v", "out_head_neg_v",
    "out_rsat_pos_ohm", "out_rsat_neg_ohm",
)
#: A saturation or output resistance of 0 (Rsat 0: the light-load reach, by the user's
#: choice) is written as this many ohms, so every current stays finite: the reach moves
#: by 1 mΩ·I, a microvolt at 1 mA.
RSAT_FLOOR_OHM = 1e-3
#: ngspice ``.ac`` points per decade and ``.tran`` steps per period (largest step).
AC_POINTS_PER_DECADE = 200
TRAN_STEPS_PER_PERIOD = 2000
#: Periods shown by ``.tran`` after the stage has settled (picker's waveform analyses 2).
SHOWN_PERIODS = 2


_ASCII = {"Ω": "Ohm", "°": "deg", "µ": "u", "±": "+-", "√": "sqrt", "·": "*", "×": "x"}


def ascii_text(text: str) -> str:
    """A comment line in plain ASCII (SPICE readers differ on other characters)."""
    for k, v in _ASCII.items():
        text = text.replace(k, v)
    return text.encode("ascii", "replace").decode("ascii")


def n(value: float) -> str:
    """A number as SPICE reads it exactly (plain exponent, never an SI letter)."""
    return f"{value:.15e}"


@dataclass(frozen=True)
class Timing:
    """The analyses' spans (Hz, s)."""

    ac_start_hz: float
    ac_stop_hz: float
    settle_periods: int
    freq_hz: float

    @property
    def period_s(self) -> float:
        return 1.0 / self.freq_hz

    @property
    def tran_start_s(self) -> float:
        return self.settle_periods * self.period_s

    @property
    def tran_stop_s(self) -> float:
        return (self.settle_periods + SHOWN_PERIODS) * self.period_s


def timing(freq_hz: float, gbw_hz: float, noise_gain: float) -> Timing:
    """Spans for the analyses: the sweep from 1/1000 of the lower of the top frequency and
    the closed-loop bandwidth (≈ GBW/noise gain) to 10× the higher of GBW and the top
    frequency; the transient settles for at least 10 periods and 20 closed-loop time
    constants (1/(2π·GBW/noise gain)) before the shown periods."""
    f_cl = gbw_hz / max(noise_gain, 1.0)
    lo = 10 ** math.floor(math.log10(min(freq_hz, f_cl)) - 3)
    hi = 10 ** math.ceil(math.log10(max(gbw_hz, freq_hz)) + 1)
    tau = 1.0 / (2 * math.pi * f_cl)
    settle = min(max(10, math.ceil(20 * tau * freq_hz)), 1000)
    return Timing(lo, hi, settle, freq_hz)


def macromodel(name: str, part: Mapping[str, float]) -> list[str]:
    """The ``.subckt`` of the part's linear macromodel with its output reach.

    Parameters
    ----------
    name : str
        The subcircuit's name.
    part : mapping
        The fields of DECK_FIELDS in SI units (Rsat 0: the light-load reach).

    Returns
    -------
    list of str
        Deck lines. Pins: ``inp inn out vpos vneg mid`` (``mid``: the level the
        internal node idles at, the stage's reference as in picker's model).

    The single pole A(s) = A0/(1 + s/ωp), ωp = 2π·GBW/A0 (the dominant-pole model,
    e.g. Franco, Design with Operational Amplifiers and Analog Integrated Circuits,
    4th ed., ch. 6, from memory) is the capacitor's node equation
    C·dx/dt = ωu·vd − x/Rp with C = 1 F, Rp = 1/ωp.
    """
    wu = 2 * math.pi * part["gbw_hz"]
    wp = wu / part["aol_v_per_v"]
    ro = max(part["rout_ohm"], RSAT_FLOOR_OHM)
    rsp = max(part["out_rsat_pos_ohm"], RSAT_FLOOR_OHM)
    rsn = max(part["out_rsat_neg_ohm"], RSAT_FLOOR_OHM)
    hi = f"(v(vpos)-{n(part['out_head_pos_v'])})"
    lo = f"(v(vneg)+{n(part['out_head_neg_v'])})"
    lin = f"(v(xb)-v(out))/{n(ro)}"
    src, snk = f"({hi}-v(out))/{n(rsp)}", f"({lo}-v(out))/{n(rsn)}"
    return [
        f".subckt {name} inp inn out vpos vneg mid",
        "* linear macromodel: Rin; single pole from GBW and A0; Ro; output reach per rail",
        f"Rin inp inn {n(part['rin_ohm'])}",
        f"Gint mid x inp inn {n(wu)}",
        "Cint x mid 1",
        f"Rpole x mid {n(1.0 / wp)}",
        "Ebuf xb mid x mid 1",
        "* output current: the linear (x - vo)/Ro, held within what the saturated output",
        "* stage gives toward each rail, (reach level - vo)/Rsat (behavioural source)",
        f"Bout 0 out I=min(max({lin}, {snk}), {src})",
        "* hold x where the output stage takes over (no wind-up)",
        f"Bhold x 0 I=1e12*(uramp(v(xb)-v(out)-{n(ro)}*{src}) "
        f"- uramp({n(ro)}*{snk}-v(xb)+v(out)))",
        f".ends {name}",
    ]


def _node(name: str) -> str:
    return {"0": "ref", "o": "out"}.get(name, name)


def stage_lines(circuit: Netlist, subckt: str, fixed: Mapping[str, float] | None = None
                ) -> list[str]:
    """The stage's elements: picker's sources as controlled sources from ``in``, its
    resistors (0 Ω: a 0 V source; ∞: left out), capacitors and the op-amp instance.
    ``fixed``: nodes that picker's signal circuit ties to the reference through a source
    and the deck holds at a DC level instead (V from 0 V: a level-shift's divider source)."""
    fixed = fixed or {}
    out: list[str] = []
    counts: dict[str, int] = {}

    def name(prefix: str) -> str:
        counts[prefix] = counts.get(prefix, 0) + 1
        return f"{prefix}{counts[prefix]}"

    for e in circuit.elements:
        if isinstance(e, Source) and e.plus in fixed:
            out.append(f"{name('Vfix')} {_node(e.plus)} 0 DC {n(fixed[e.plus])}")
        elif isinstance(e, Source):
            out.append(f"{name('E')} {_node(e.plus)} {_node(e.minus)} in ref {n(e.volt)}")
        elif isinstance(e, Resistor):
            if math.isinf(e.ohm):
                continue
            if e.ohm == 0:
                out.append(f"{name('Vshort')} {_node(e.a)} {_node(e.b)} DC 0")
            else:
                out.append(f"{name('R')} {_node(e.a)} {_node(e.b)} {n(e.ohm)}")
        elif isinstance(e, Capacitor):
            out.append(f"{name('C')} {_node(e.a)} {_node(e.b)} {n(e.farad)}")
        elif isinstance(e, OpAmp):
            out.append(f"XU1 {_node(e.p)} {_node(e.n)} {_node(e.out)} vpos vneg ref {subckt}")
    return out


@dataclass(frozen=True)
class DeckInput:
    """What a deck is written from (SI units; voltages absolute)."""

    title: str  # the stage in one line
    part: str  # the team's label of the parameter set
    values: Mapping[str, float]  # DECK_FIELDS
    circuit: Netlist
    noise_gain: float
    ref_v: float
    rail_pos: float
    rail_neg: float
    vin_pk: float
    freq_hz: float
    notes: tuple[str, ...] = ()  # assumptions to state in the header
    vin_dc_v: float = 0.0  # the DC level the input signal rides on, from ref
    fixed: Mapping[str, float] = field(default_factory=dict)  # stage_lines' ``fixed``


def deck(d: DeckInput) -> str:
    """The whole deck: header, supplies, signal, stage, macromodel, analyses."""
    t = timing(d.freq_hz, d.values["gbw_hz"], d.noise_gain)
    subckt = "opamp_model"
    step = t.period_s / TRAN_STEPS_PER_PERIOD
    lines = [
        ascii_text(f"* picker {__version__}: {d.title}"),
        ascii_text(f"* part: {d.part} (the team's parameter set, linear macromodel below)"),
        "* run: ngspice -b -r stage.raw stage.cir (every analysis into stage.raw),",
        "*      or interactively: ngspice stage.cir, then run, setplot, plot v(out)",
        "* nodes: in = input signal from ref, ref = reference level, out = output",
        "* output reach: behavioural current source (B element), head + Rsat*I from each rail",
        "* not modelled: slew rate, output current limit, offsets, noise, a second pole",
        *[ascii_text(f"* assumed: {note}") for note in d.notes],
        f"Vref ref 0 DC {n(d.ref_v)}",
        f"Vpos vpos 0 DC {n(d.rail_pos)}",
        f"Vneg vneg 0 DC {n(d.rail_neg)}",
        f"Vin in ref DC {n(d.vin_dc_v) if d.vin_dc_v else 0} AC 1 "
        f"SIN({n(d.vin_dc_v) if d.vin_dc_v else 0} {n(d.vin_pk)} {n(d.freq_hz)})",
        *stage_lines(d.circuit, subckt, d.fixed),
        *macromodel(subckt, d.values),
        ".options reltol=1e-6 abstol=1e-12 vntol=1e-9",
        ".op",
        ".tf v(out,ref) Vin",
        f".ac dec {AC_POINTS_PER_DECADE} {n(t.ac_start_hz)} {n(t.ac_stop_hz)}",
        f".tran {n(step)} {n(t.tran_stop_s)} {n(t.tran_start_s)} {n(step)}",
        ".end",
    ]
    return "\n".join(lines) + "\n"


__all__ = ["DECK_FIELDS", "DeckInput", "Timing", "ascii_text", "deck", "macromodel", "n", "stage_lines",
           "timing"]
