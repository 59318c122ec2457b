"""The inverting stage: input through Rs + rg into the inverting input, rf to the output.

Reduced: kp = 0, zp = rp, kg = 1, rg = Rs + rg. Ideal gain magnitude
``G = rf/(Rs + rg)``, noise gain ``1 + G`` (any circuits text, e.g. Horowitz and Hill,
The Art of Electronics, 3rd ed., ch. 4, from memory).
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import numpy.typing as npt

from picker.circuit.mna import Netlist, OpAmp, Resistor, Source
from picker.errors import BadRequirement
from picker.stages.base import Array, StageType


def input_leg(gain: float, rs: float, rf: float) -> float:
    """The input resistor rf/gain - Rs, Ω; refused when the source alone exceeds it."""
    leg = rf / gain - rs
    if leg <= 0:
        raise BadRequirement(
            f"--source: {rs:g} Ω is not below the input resistor rf/gain = {rf / gain:g} Ω it "
            f"is part of; raise --rf above {rs * gain * 2:g} Ω")
    return leg


class Inverting(StageType):
    name = "inverting"
    network_names = ("rf", "rg", "rp")
    required = ("rf", "rg")
    pair_names = ("rf", "rg")
    gain_names = ("rf", "rg")

    def ideal_network(self, gain: float, rs: float, rf: float) -> dict[str, float]:
        return {"rf": rf, "rg": input_leg(gain, rs, rf)}

    def reduce(self, res: Mapping[str, float], rs: float) -> tuple[float, float, float, float, float]:
        return 0.0, res.get("rp", 0.0), 1.0, rs + res["rg"], res["rf"]

    def netlist(self, res: Mapping[str, float], rs: float, load: float) -> Netlist:
        return Netlist((Source("s", "0", 1.0), Resistor("s", "a", rs),
                        Resistor("a", "n", res["rg"]), Resistor("n", "o", res["rf"]),
                        Resistor("p", "0", res.get("rp", 0.0)), Resistor("o", "0", load),
                        OpAmp("p", "n", "o")))

    def ideal_gain(self, rs: float, res: Mapping[str, npt.ArrayLike]) -> Array:
        return np.asarray(res["rf"], float) / (rs + np.asarray(res["rg"], float))  # type: ignore[no-any-return]


KIND = Inverting()
