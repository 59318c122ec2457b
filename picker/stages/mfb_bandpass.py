"""The multiple-feedback band-pass section (inverting).

Circuit: the input through Rs and r1 to node a; r2 from a to the reference; c1 from a
to the inverting input n; c2 from a to the output; r3 from n to the output; the
non-inverting input at the reference. Ideal transfer function (nodal analysis; e.g.
Van Valkenburg, Analog Filter Design, 1982, ch. 6, from memory), R1 = Rs + r1:

    H(s) = -(s/(R1·c1)) / (s² + s·(c1 + c2)/(r3·c1·c2) + (1/R1 + 1/r2)/(r3·c1·c2))
    K = H(jωn) = -r3·c2/(R1·(c1 + c2))

Design: c1 = c2 = C (the series value nearest the 10 kΩ level); r3 = 2Q/(ωn·C),
R1 = Q/(|K|·ωn·C), r2 = Q/((2Q² - |K|)·ωn·C): the centre gain is at most 2Q².
DC reduction: rf = r3, rg open (c1 blocks DC), kp = 0.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np
import numpy.typing as npt

from picker.circuit.mna import Capacitor, Netlist, OpAmp, Resistor, Source
from picker.stages.base import Array
from picker.stages.filterbase import FilterType, base_capacitance, capacitor
from picker.stages.sections import Section


class MfbBandpass(FilterType):
    name = "mfb-bandpass"
    kind = "bandpass"
    inverting = True
    network_names = ("r1", "r2", "r3", "c1", "c2")
    required = ("r1", "r2", "r3", "c1", "c2")
    tuned_names = ("r1", "r2", "r3")

    def reduce(self, res: Mapping[str, float], rs: float) -> tuple[float, float, float, float, float]:
        return 0.0, 0.0, 0.0, math.inf, res["r3"]

    def netlist(self, res: Mapping[str, float], rs: float, load: float) -> Netlist:
        return Netlist((Source("s", "0", 1.0), Resistor("s", "i", rs),
                        Resistor("i", "a", res["r1"]), Resistor("a", "0", res["r2"]),
                        Capacitor("a", "n", res["c1"]), Capacitor("a", "o", res["c2"]),
                        Resistor("n", "o", res["r3"]), Resistor("p", "0", 0.0),
                        Resistor("o", "0", load), OpAmp("p", "n", "o")))

    def biquad(self, rs: float, values: Mapping[str, npt.ArrayLike]) -> tuple[Array, Array, Array]:
        r1 = rs + np.asarray(values["r1"], float)
        r2, r3, c1, c2 = (np.asarray(values[k], float) for k in ("r2", "r3", "c1", "c2"))
        w2 = (1 / r1 + 1 / r2) / (r3 * c1 * c2)
        b = (c1 + c2) / (r3 * c1 * c2)
        wn = np.sqrt(w2)
        return -r3 * c2 / (r1 * (c1 + c2)), wn, wn / b

    def solve(self, sec: Section, rs: float, cap_series: Any,
              level: float = 1.0) -> dict[str, float]:
        k, q, wn = abs(sec.gain), sec.q, 2 * math.pi * sec.f0_hz
        c = capacitor(base_capacitance(sec.f0_hz) * level, cap_series)
        return {"r1": q / (k * wn * c) - rs, "r2": q / ((2 * q * q - k) * wn * c),
                "r3": 2 * q / (wn * c), "c1": c, "c2": c}


KIND = MfbBandpass()
