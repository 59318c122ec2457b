"""The voltage follower: input through Rs + rp, output tied back through rf (0 = a wire).

Reduced: kp = 1, zp = Rs + rp, kg = 0 (open), rg = ∞. Ideal gain 1.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np
import numpy.typing as npt

from picker.circuit.mna import Netlist, OpAmp, Resistor, Source
from picker.stages.base import Array, StageType


class Follower(StageType):
    name = "follower"
    network_names = ("rf", "rp")

    def ideal_network(self, gain: float, rs: float, rf: float) -> dict[str, float]:
        return {"rf": 0.0}

    def reduce(self, res: Mapping[str, float], rs: float) -> tuple[float, float, float, float, float]:
        return 1.0, rs + res.get("rp", 0.0), 0.0, math.inf, res.get("rf", 0.0)

    def netlist(self, res: Mapping[str, float], rs: float, load: float) -> Netlist:
        return Netlist((Source("s", "0", 1.0), Resistor("s", "a", rs),
                        Resistor("a", "p", res.get("rp", 0.0)),
                        Resistor("n", "o", res.get("rf", 0.0)), Resistor("o", "0", load),
                        OpAmp("p", "n", "o")))

    def ideal_gain(self, rs: float, res: Mapping[str, npt.ArrayLike]) -> Array:
        return np.asarray(1.0)


KIND = Follower()
