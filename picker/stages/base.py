"""A stage: its circuit for the solver, and its reduction to one circuit around the op-amp.

Every stage is, seen from the op-amp at DC, the same reduced circuit (signals measured
from the reference level, per volt of input signal):

- the non-inverting input is driven by a Thévenin source ``kp`` behind ``zp``;
- the inverting input connects to the output through ``rf`` and to a Thévenin
  source ``kg`` through ``rg`` (source resistance included; ``inf`` = open);
- the output drives the load ``load`` (``inf`` = none) to the reference, and the
  capacitive load ``cload`` (0 = none; in the netlist, not in the DC reduction).

With an ideal op-amp the output is ``vo = kp·(1 + rf/rg) - kg·rf/rg`` per volt in
(Thévenin reduction of a resistive divider; any circuits text, e.g. Horowitz and Hill,
The Art of Electronics, 3rd ed., ch. 4, from memory). The offset, noise and output
current formulas read the reduction; the exact gain and the frequency response solve
the stage's own netlist (``circuit``) with picker.circuit.

A stage type is a subclass of ``StageType`` in its own module, registered in
picker.stages (``register``): it names its resistors, makes the ideal-ratio network,
reduces a network, writes the netlist and gives the ideal gain for arrays of values.
"""

from __future__ import annotations

import math
from abc import ABC, abstractmethod
from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, ClassVar

import numpy as np
import numpy.typing as npt

from picker.circuit.mna import GROUND, Capacitor, Element, Netlist, OpAmp, Resistor, Source

if TYPE_CHECKING:
    from picker.design.requirement import Requirement

Array = npt.NDArray[np.float64]


def parallel(a: float, b: float) -> float:
    """a‖b, Ω (an infinite resistance is open)."""
    if math.isinf(a):
        return b
    if math.isinf(b):
        return a
    return a * b / (a + b) if a + b > 0 else 0.0


def reduced_netlist(kp: float, zp: float, kg: float, rg: float, rf: float,
                    load: float) -> Netlist:
    """The reduced circuit as a netlist (sources kp and kg per volt of input)."""
    e: list[Any] = [Source("sp", "0", kp), Resistor("sp", "p", zp)]
    if not math.isinf(rg):
        e += [Source("sg", "0", kg), Resistor("sg", "n", rg)]
    e.append(Resistor("n", "o", rf))
    if not math.isinf(load):
        e.append(Resistor("o", "0", load))
    e.append(OpAmp("p", "n", "o"))
    return Netlist(tuple(e), "o")


def with_cload(net: Netlist, cload: float) -> Netlist:
    """``net`` with the capacitor ``cload`` (F) from its output to the reference (0: as is)."""
    if cload <= 0:
        return net
    return Netlist((*net.elements, Capacitor(net.out, GROUND, cload)), net.out)


def isolated(net: Netlist, riso: float) -> Netlist:
    """``net`` with ``riso`` (Ω) between the op-amp's output pin and its load.

    Every resistor or capacitor from the output node to the reference (the load) moves
    to a new node ``load``, which becomes the output; the feedback stays at the pin.
    """
    out = net.out
    moved: list[Element] = []
    for e in net.elements:
        if isinstance(e, (Resistor, Capacitor)) and {e.a, e.b} == {out, GROUND}:
            e = (Resistor("load", GROUND, e.ohm) if isinstance(e, Resistor)
                 else Capacitor("load", GROUND, e.farad))
        moved.append(e)
    return Netlist((*moved, Resistor(out, "load", riso)), "load")


def with_feedback_cap(net: Netlist, cf: float) -> Netlist:
    """``net`` with ``cf`` (F) from the op-amp's output to its inverting input (across rf)."""
    amp = net.opamp
    assert amp is not None
    return Netlist((*net.elements, Capacitor(amp.n, amp.out, cf)), net.out)


@dataclass(frozen=True)
class Stage:
    """One stage: its network, its reduced circuit (scalars, SI units) and its netlist."""

    topology: str
    resistors: dict[str, float]  # the network as built, names per the stage type
    kp: float
    zp: float
    kg: float
    rg: float
    rf: float
    load: float
    gain: float  # the requested signal-gain magnitude: the reference for gain errors
    ideal_network: bool
    netlist: Netlist | None = None  # the stage's own circuit; None: the reduced one
    cload: float = 0.0  # capacitive load at the output, F (in the netlist)
    # At DC, when coupling capacitors make it differ from the circuit above (the signal
    # band): the resistance behind the non-inverting input and the gain leg (inf: a
    # capacitor blocks it); None: as in the band. The offset reads these.
    dc_zp: float | None = None
    dc_rg: float | None = None
    # noise power the coupling network adds below its corners, referred to the
    # non-inverting input, V² (counted times NG², an upper bound: the gain there is
    # at most NG); 0: none
    lf_noise_v2: float = 0.0
    # the AC-coupling design (picker.design.coupling.Coupling); None: DC-coupled
    coupling: Any = None

    def allows(self, check: str) -> bool:
        """Whether the check named ``check`` holds for this stage (a filter stage narrows
        it; see picker.stages.filterbase)."""
        return True

    def replaced_by(self, check: str) -> str | None:
        """The check of this stage type that takes the place of ``check`` (None: none)."""
        return None

    @property
    def circuit(self) -> Netlist:
        """The netlist the solver works on (input 1 V, output node ``o``)."""
        if self.netlist is not None:
            return self.netlist
        return with_cload(reduced_netlist(self.kp, self.zp, self.kg, self.rg, self.rf,
                                          self.load), self.cload)

    @property
    def reactive(self) -> bool:
        """True when the stage has frequency-dependent elements besides the op-amp."""
        return self.circuit.reactive

    @property
    def noise_gain(self) -> float:
        """DC noise gain 1 + rf/rg: the gain from the op-amp's input to its output."""
        return 1.0 if math.isinf(self.rg) else 1.0 + self.rf / self.rg

    @property
    def offset_zp(self) -> float:
        """The resistance behind the non-inverting input at DC, Ω (the bias current's)."""
        return self.zp if self.dc_zp is None else self.dc_zp

    @property
    def dc_noise_gain(self) -> float:
        """The noise gain at DC, 1 + rf/rg with rg as at DC (what Vos is multiplied by)."""
        rg = self.rg if self.dc_rg is None else self.dc_rg
        return 1.0 if math.isinf(rg) else 1.0 + self.rf / rg

    @property
    def ideal_gain(self) -> float:
        """Signed gain with an ideal op-amp (infinite gain and input resistance, Ro = 0)."""
        return self.kp * self.noise_gain - (0.0 if math.isinf(self.rg) else self.kg * self.rf / self.rg)

    @property
    def network_error(self) -> float:
        """Relative gain error of the network alone, |G_ideal|/gain - 1."""
        return abs(self.ideal_gain) / self.gain - 1.0

    @property
    def cm_per_volt(self) -> float:
        """Common-mode excursion at the op-amp's inputs per volt of input signal."""
        return abs(self.kp)

    @property
    def amps_per_volt_out(self) -> float:
        """Output current per volt of output: into the load and into the feedback network.

        i = vo/RL + (vo - vn)/rf with vn = vp = kp·vin (ideal op-amp), vo = G·vin.
        """
        i = 0.0 if math.isinf(self.load) else 1.0 / self.load
        if self.rf > 0:
            i += (1.0 - self.kp / self.ideal_gain) / self.rf
        return i


class StageType(ABC):
    """One kind of stage. Subclass, fill the class attributes and methods, register."""

    #: the topology name a requirement uses
    name: ClassVar[str]
    #: resistors a user may give for this stage (--network names)
    network_names: ClassVar[tuple[str, ...]]
    #: resistors a given network must contain
    required: ClassVar[tuple[str, ...]] = ()
    #: (feedback, leg) a network designer's pair fills; None: no pair to design
    pair_names: ClassVar[tuple[str, str] | None] = None
    #: the resistors that set the gain (tolerance analysis varies these)
    gain_names: ClassVar[tuple[str, ...]] = ()

    def build(self, req: Requirement) -> Stage:
        """The stage of ``req``: its network (given, or the ideal ratio from ``rf``)."""
        ideal = req.network is None
        res = (self.ideal_network(req.gain, req.source_ohm, req.rf_ohm) if ideal
               else dict(req.network or {}))
        load = math.inf if req.load_ohm is None else req.load_ohm
        if req.coupling == "ac":
            # here, not at the top: picker.design imports picker.stages (an import cycle)
            from picker.design.coupling import coupled_stage

            return coupled_stage(self, req, res, ideal, load)
        kp, zp, kg, rg, rf = self.reduce(res, req.source_ohm)
        return Stage(self.name, res, kp, zp, kg, rg, rf, load, req.gain, ideal,
                     with_cload(self.netlist(res, req.source_ohm, load), req.cload_f),
                     req.cload_f)

    def designed(self, req: Requirement, series: str) -> Requirement | None:
        """``req`` with the network this stage type designs itself from ``series``
        (picker.api.built); None: the gain-pair designer of picker.design.network."""
        return None

    def design(self, req: Requirement, series: str) -> Any:
        """This stage type's own network design, as ``picker net`` shows it
        (picker.api.design_network); None: the gain-pair designer."""
        return None

    @abstractmethod
    def ideal_network(self, gain: float, rs: float, rf: float) -> dict[str, float]:
        """Resistors of exact ratio from ``rf`` (Ω), the source resistance ``rs`` counted."""

    @abstractmethod
    def reduce(self, res: Mapping[str, float], rs: float) -> tuple[float, float, float, float, float]:
        """(kp, zp, kg, rg, rf) of the reduced circuit (module docstring)."""

    @abstractmethod
    def netlist(self, res: Mapping[str, float], rs: float, load: float) -> Netlist:
        """The stage's circuit: input 1 V from the reference, output node ``o``."""

    @abstractmethod
    def ideal_gain(self, rs: float, res: Mapping[str, npt.ArrayLike]) -> Array:
        """Signal-gain magnitude with an ideal op-amp, for arrays of resistor values."""

    def pair_network(self, a: npt.ArrayLike, b: npt.ArrayLike) -> dict[str, Any]:
        """The named network of a designer's pair (a, b) = (feedback, leg)."""
        if self.pair_names is None:
            raise ValueError(f"the {self.name} stage has no resistor pair to design")
        fa, fb = self.pair_names
        return {fa: a, fb: b}

    def notes(self, req: Requirement, st: Stage) -> list[str]:
        """Notes the stage type adds to its minimum specifications (what it is, what its
        model leaves out); none by default."""
        return []

    def input_levels(self, req: Requirement, st: Stage) -> tuple[float, float]:
        """Lowest and highest level the op-amp's inputs reach, V: the non-inverting
        input follows ``ref ± |kp|·Vp,in`` (a stage type with its own common-mode input
        overrides this)."""
        swing = st.cm_per_volt * req.vin
        return req.ref - swing, req.ref + swing


__all__ = ["Array", "Stage", "StageType", "isolated", "parallel", "reduced_netlist",
           "with_cload", "with_feedback_cap"]
