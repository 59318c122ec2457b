"""The four stage topologies reduced to one circuit around the op-amp.

Every supported stage is, seen from the op-amp, the same circuit (signals measured
from the reference level, per volt of input signal):

- the non-inverting input is driven by a Thévenin source ``kp`` behind ``zp``;
- the inverting input connects to the output through ``rf`` and to a Thévenin
  source ``kg`` through ``rg`` (source resistance included; ``inf`` = open);
- the output drives the load ``load`` (``inf`` = none) to the reference.

============== ======================= ======= ============== =============================
topology       kp                      zp      kg             rg
============== ======================= ======= ============== =============================
inverting      0                       rp      1              Rs + rg
non-inverting  1                       Rs + rp 0              rg
follower       1                       Rs + rp (open)         inf
difference     R4 / (2 (Rs+R3+R4))     (Rs+R3)‖R4  -1/2      Rs + R1
============== ======================= ======= ============== =============================

The difference stage is driven by a balanced source (+v/2 and -v/2, each through Rs);
its gain is taken per volt of the difference. With an ideal op-amp the output is
``vo = kp·(1 + rf/rg) - kg·rf/rg`` per volt in (Thévenin reduction of a resistive
divider; any circuits text, e.g. Horowitz and Hill, The Art of Electronics, 3rd ed.,
ch. 4, from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from picker.design.requirement import Requirement, Topology
from picker.errors import BadRequirement


def parallel(a: float, b: float) -> float:
    if math.isinf(a):
        return b
    if math.isinf(b):
        return a
    return a * b / (a + b) if a + b > 0 else 0.0


@dataclass(frozen=True)
class Stage:
    """The reduced circuit of one stage (scalars, SI units)."""

    topology: Topology
    resistors: dict[str, float]  # the network as built, names per picker.design.requirement
    kp: float
    zp: float
    kg: float
    rg: float
    rf: float
    load: float
    gain: float  # the requested signal-gain magnitude: the reference for gain errors
    ideal_network: bool

    @property
    def noise_gain(self) -> float:
        """DC noise gain 1 + rf/rg: the gain from the op-amp's input to its output."""
        return 1.0 if math.isinf(self.rg) else 1.0 + self.rf / self.rg

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


def stage(req: Requirement) -> Stage:
    """The stage's network (given, or the ideal ratio from ``rf``) reduced as above."""
    t, g, rs = req.topology, req.gain, req.source_ohm
    ideal = req.network is None
    if ideal:
        res = _ideal_network(t, g, rs, req.rf_ohm)
    else:
        assert req.network is not None
        res = dict(req.network)
    load = math.inf if req.load_ohm is None else req.load_ohm
    rp = res.get("rp", 0.0)
    if t == "inverting":
        return Stage(t, res, 0.0, rp, 1.0, rs + res["rg"], res["rf"], load, g, ideal)
    if t == "non-inverting":
        return Stage(t, res, 1.0, rs + rp, 0.0, res["rg"], res["rf"], load, g, ideal)
    if t == "follower":
        return Stage(t, res, 1.0, rs + rp, 0.0, math.inf, res.get("rf", 0.0), load, g, ideal)
    r1, r2, r3, r4 = res["r1"], res["r2"], res["r3"], res["r4"]
    kp = 0.5 * r4 / (rs + r3 + r4)
    return Stage(t, res, kp, parallel(rs + r3, r4), -0.5, rs + r1, r2, load, g, ideal)


def _ideal_network(t: Topology, g: float, rs: float, rf: float) -> dict[str, float]:
    """Resistors of exact ratio from rf, the source resistance counted in the input leg."""
    if t == "follower":
        return {"rf": 0.0}
    if t == "non-inverting":
        return {"rf": rf, "rg": math.inf if g == 1 else rf / (g - 1)}
    leg = rf / g - rs
    if leg <= 0:
        raise BadRequirement(
            f"--source: {rs:g} Ω is not below the input resistor rf/gain = {rf / g:g} Ω it "
            f"is part of; raise --rf above {rs * g * 2:g} Ω")
    if t == "inverting":
        return {"rf": rf, "rg": leg}
    return {"r1": leg, "r2": rf, "r3": leg, "r4": rf}


__all__ = ["Stage", "parallel", "stage"]
