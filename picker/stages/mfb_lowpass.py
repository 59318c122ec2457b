"""The multiple-feedback low-pass section (inverting).

Circuit: the input through Rs and r1 to node a; r2 from a to the output; r3 from a to
the inverting input n; c1 from a to the reference; c2 from n to the output; the
non-inverting input at the reference. Ideal transfer function (nodal analysis; e.g.
Van Valkenburg, Analog Filter Design, 1982, ch. 6, from memory), R1 = Rs + r1:

    H(s) = -(r2/R1) / (s²·r2·r3·c1·c2 + s·c2·(r2 + r3 + r2·r3/R1) + 1)
    K = -r2/R1,  ωn = 1/√(r2·r3·c1·c2),  Q = √(r2·r3·c1·c2) / (c2·(r2 + r3 + r2·r3/R1))

Design: real resistors need c1/c2 >= 4Q²·(1 + |K|); c2 is the series value nearest the
10 kΩ level, c1 the smallest series value at least that ratio; then with
P = r2·r3 = 1/(ωn²·c1·c2), r2²/P - r2·ωn·c1/Q + (1 + |K|) = 0 (the root nearer √P),
r3 = P/r2, R1 = r2/|K|. DC reduction (capacitors open) is a T of r3, r2, R1: its Δ
equivalent gives rf = r3 + r2 + r3·r2/R1 and rg = r3 + R1 + r3·R1/r2 (the r2-R1 branch
is driven by sources and does not load the op-amp), kp = 0.
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


class MfbLowpass(FilterType):
    name = "mfb-lowpass"
    kind = "lowpass"
    inverting = True
    network_names = ("r1", "r2", "r3", "c1", "c2")
    required = ("r1", "r2", "r3", "c1", "c2")
    tuned_names = ("r1", "r2", "r3")

    def reduce(self, res: Mapping[str, float], rs: float) -> tuple[float, float, float, float, float]:
        r1, r2, r3 = rs + res["r1"], res["r2"], res["r3"]
        return 0.0, 0.0, 1.0, r3 + r1 + r3 * r1 / r2, r3 + r2 + r3 * r2 / r1

    def netlist(self, res: Mapping[str, float], rs: float, load: float) -> Netlist:
        return Netlist((Source("s", "0", 1.0), Resistor("s", "i", rs),
                        Resistor("i", "a", res["r1"]), Resistor("a", "o", res["r2"]),
                        Resistor("a", "n", res["r3"]), Capacitor("a", "0", res["c1"]),
                        Capacitor("n", "o", res["c2"]), Resistor("p", "0", 0.0),
                        Resistor("o", "0", load), OpAmp("p", "n", "o")))

    def biquad(self, rs: float, values: Mapping[str, npt.ArrayLike]) -> tuple[Array, Array, Array]:
        r1 = rs + np.asarray(values["r1"], float)
        r2, r3, c1, c2 = (np.asarray(values[k], float) for k in ("r2", "r3", "c1", "c2"))
        prod = r2 * r3 * c1 * c2
        return -r2 / r1, 1 / np.sqrt(prod), np.sqrt(prod) / (c2 * (r2 + r3 + r2 * r3 / r1))

    def solve(self, sec: Section, rs: float, cap_series: Any,
              level: float = 1.0) -> dict[str, float]:
        k, q, wn = abs(sec.gain), sec.q, 2 * math.pi * sec.f0_hz
        n_min = 4 * q * q * (1 + k)
        c2 = capacitor(base_capacitance(sec.f0_hz, n_min) * level, cap_series)
        c1 = capacitor(n_min * c2, cap_series, at_least=True)
        p = 1 / (wn * wn * c1 * c2)
        b = wn * c1 / q
        disc = math.sqrt(max(b * b - 4 * (1 + k) / p, 0.0))
        r2 = min(((b + disc) * p / 2, (b - disc) * p / 2),
                 key=lambda x: abs(math.log(x / math.sqrt(p))) if x > 0 else math.inf)
        return {"r1": r2 / k - rs, "r2": r2, "r3": p / r2, "c1": c1, "c2": c2}


KIND = MfbLowpass()
