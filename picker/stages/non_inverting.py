"""The non-inverting stage: input through Rs + rp into the non-inverting input.

Reduced: kp = 1, zp = Rs + rp, kg = 0, rg = rg. Ideal gain ``G = 1 + rf/rg`` (any
circuits text, e.g. Horowitz and Hill, The Art of Electronics, 3rd ed., ch. 4, from
memory); gain 1 leaves rg open.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np
import numpy.typing as npt

from picker.circuit.mna import Netlist, OpAmp, Resistor, Source
from picker.stages.base import Array, StageType


class NonInverting(StageType):
    name = "non-inverting"
    network_names = ("rf", "rg", "rp")
    required = ("rf", "rg")
    pair_names = ("rf", "rg")
    gain_names = ("rf", "rg")

    def ideal_network(self, gain: float, rs: float, rf: float) -> dict[str, float]:
        return {"rf": rf, "rg": math.inf if gain == 1 else rf / (gain - 1)}

    def reduce(self, res: Mapping[str, float], rs: float) -> tuple[float, float, float, float, float]:
        return 1.0, rs + res.get("rp", 0.0), 0.0, res["rg"], res["rf"]

    def netlist(self, res: Mapping[str, float], rs: float, load: float) -> Netlist:
        return Netlist((Source("s", "0", 1.0), Resistor("s", "a", rs),
                        Resistor("a", "p", res.get("rp", 0.0)), Resistor("n", "0", res["rg"]),
                        Resistor("n", "o", res["rf"]), Resistor("o", "0", load),
                        OpAmp("p", "n", "o")))

    def ideal_gain(self, rs: float, res: Mapping[str, npt.ArrayLike]) -> Array:
        rg = np.asarray(res["rg"], float)
        with np.errstate(divide="ignore"):
            return 1.0 + np.asarray(res["rf"], float) / rg  # type: ignore[no-any-return]


KIND = NonInverting()
