"""The difference stage: r1/r2 at the inverting input, r3/r4 at the non-inverting one.

Driven by a balanced source (+v/2 into r3 and -v/2 into r1, each through Rs); the gain
is per volt of the difference. Reduced: ``kp = r4/(2(Rs + r3 + r4))``,
``zp = (Rs + r3)‖r4``, ``kg = -1/2``, ``rg = Rs + r1``, ``rf = r2``. Ideal gain

    G = kp·(1 + r2/(Rs + r1)) + r2/(2(Rs + r1)),

with matched ratios (r3 = r1, r4 = r2) ``G = r2/(Rs + r1)`` (Thévenin reduction of the
dividers; any circuits text, e.g. Horowitz and Hill, The Art of Electronics, 3rd ed.,
ch. 4, from memory). A designer's pair (r2, r1) sets r4 = r2 and r3 = r1.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np
import numpy.typing as npt

from picker.circuit.mna import Netlist, OpAmp, Resistor, Source
from picker.stages.base import Array, StageType, parallel
from picker.stages.inverting import input_leg


class Difference(StageType):
    name = "difference"
    network_names = ("r1", "r2", "r3", "r4")
    required = ("r1", "r2", "r3", "r4")
    pair_names = ("r2", "r1")
    gain_names = ("r1", "r2", "r3", "r4")

    def ideal_network(self, gain: float, rs: float, rf: float) -> dict[str, float]:
        leg = input_leg(gain, rs, rf)
        return {"r1": leg, "r2": rf, "r3": leg, "r4": rf}

    def reduce(self, res: Mapping[str, float], rs: float) -> tuple[float, float, float, float, float]:
        r1, r2, r3, r4 = res["r1"], res["r2"], res["r3"], res["r4"]
        kp = 0.5 * r4 / (rs + r3 + r4)
        return kp, parallel(rs + r3, r4), -0.5, rs + r1, r2

    def netlist(self, res: Mapping[str, float], rs: float, load: float) -> Netlist:
        return Netlist((Source("s1", "0", 0.5), Source("s2", "0", -0.5),
                        Resistor("s1", "a1", rs), Resistor("a1", "p", res["r3"]),
                        Resistor("p", "0", res["r4"]), Resistor("s2", "a2", rs),
                        Resistor("a2", "n", res["r1"]), Resistor("n", "o", res["r2"]),
                        Resistor("o", "0", load), OpAmp("p", "n", "o")))

    def ideal_gain(self, rs: float, res: Mapping[str, npt.ArrayLike]) -> Array:
        r1, r2, r3, r4 = (np.asarray(res[k], float) for k in ("r1", "r2", "r3", "r4"))
        kp = 0.5 * r4 / (rs + r3 + r4)
        return kp * (1 + r2 / (rs + r1)) + 0.5 * r2 / (rs + r1)  # type: ignore[no-any-return]

    def pair_network(self, a: npt.ArrayLike, b: npt.ArrayLike) -> dict[str, Any]:
        return {"r2": a, "r1": b, "r3": b, "r4": a}


KIND = Difference()
