"""The voltage-controlled-voltage-source high-pass section (unity gain or gain-setting).

Circuit: the input through Rs and c1 to node a; c2 from a to the non-inverting input p;
r1 from a to the output (the positive feedback); r2 from p to the reference; gain
K = 1 + rf/rg. Ideal transfer function with Rs = 0 (nodal analysis; e.g. Van
Valkenburg, Analog Filter Design, 1982, ch. 5, from memory):

    H(s) = K·s² / (s² + s·(1/(r2·c1) + 1/(r2·c2) + (1 - K)/(r1·c1)) + 1/(r1·r2·c1·c2))

A source resistance adds a third pole (Rs in series with c1); the design ignores it and
the response check, which solves the whole circuit, sees it.

Design: c1 = c2 = C, the series value nearest the 10 kΩ level; then
r1 = (1/Q + √(1/Q² + 8(K - 1)))/(4·ωn·C) and r2 = 1/(ωn²·C²·r1) (unity gain:
r1 = 1/(2Q·ωn·C), r2 = 2Q/(ωn·C)). DC reduction: kp = 0 (c1 open), zp = r2.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np
import numpy.typing as npt

from picker.circuit.mna import Capacitor, Netlist, OpAmp, Resistor, Source
from picker.stages.base import Array
from picker.stages.filterbase import FilterType, base_capacitance, capacitor, gain_pair, vcvs_gain
from picker.stages.sections import Section
from picker.stages.vcvs_lowpass import gain_leg


class VcvsHighpass(FilterType):
    name = "vcvs-highpass"
    kind = "highpass"
    network_names = ("r1", "r2", "c1", "c2", "rf", "rg")
    required = ("r1", "r2", "c1", "c2")
    tuned_names = ("r1", "r2", "rf", "rg")

    def reduce(self, res: Mapping[str, float], rs: float) -> tuple[float, float, float, float, float]:
        return 0.0, res["r2"], 0.0, res.get("rg", math.inf), res.get("rf", 0.0)

    def netlist(self, res: Mapping[str, float], rs: float, load: float) -> Netlist:
        return Netlist((Source("s", "0", 1.0), Resistor("s", "i", rs),
                        Capacitor("i", "a", res["c1"]), Capacitor("a", "p", res["c2"]),
                        Resistor("a", "o", res["r1"]), Resistor("p", "0", res["r2"]),
                        *gain_leg(res), Resistor("o", "0", load), OpAmp("p", "n", "o")))

    def biquad(self, rs: float, values: Mapping[str, npt.ArrayLike]) -> tuple[Array, Array, Array]:
        r1, r2, c1, c2 = (np.asarray(values[k], float) for k in ("r1", "r2", "c1", "c2"))
        k = vcvs_gain(values)
        w2 = 1 / (r1 * r2 * c1 * c2)
        b = 1 / (r2 * c1) + 1 / (r2 * c2) + (1 - k) / (r1 * c1)
        wn = np.sqrt(w2)
        return k, wn, wn / b

    def solve(self, sec: Section, rs: float, cap_series: Any,
              level: float = 1.0) -> dict[str, float]:
        k, q, wn = sec.gain, sec.q, 2 * math.pi * sec.f0_hz
        c = capacitor(base_capacitance(sec.f0_hz) * level, cap_series)
        r1 = (1 / q + math.sqrt(1 / q**2 + 8 * (k - 1))) / (4 * wn * c)
        return {"r1": r1, "r2": 1 / (wn * wn * c * c * r1), "c1": c, "c2": c, **gain_pair(k)}


KIND = VcvsHighpass()
