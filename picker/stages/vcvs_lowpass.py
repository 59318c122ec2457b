"""The voltage-controlled-voltage-source low-pass section (unity gain or gain-setting).

Circuit: the input through Rs and r1 to node a; r2 from a to the non-inverting input p;
c1 from a to the output (the positive feedback); c2 from p to the reference; the op-amp
with gain K = 1 + rf/rg (rf a wire and rg open for K = 1). Ideal transfer function
(nodal analysis of the circuit; e.g. Van Valkenburg, Analog Filter Design, 1982, ch. 5,
from memory), R1 = Rs + r1:

    H(s) = K / (s²·R1·r2·c1·c2 + s·((R1 + r2)·c2 + R1·c1·(1 - K)) + 1)
    ωn = 1/√(R1·r2·c1·c2),   Q = √(R1·r2·c1·c2) / ((R1 + r2)·c2 + R1·c1·(1 - K))

Design (capacitors first, then the resistors): with n = c1/c2, real resistors exist when
c2/c1 <= 1/(4Q²) + K - 1 (unity gain: c1 >= 4Q²·c2). c2 is the series value nearest the
level that puts the resistors near 10 kΩ, c1 the smallest series value with n at least
that bound; then R1·r2 = P = 1/(ωn²·c1·c2) and a·R1² - R1/(ωn·Q) + P·c2 = 0 with
a = c2 + c1·(1 - K), the root nearer √P (the most even pair) taken. DC reduction:
kp = 1, zp = Rs + r1 + r2, the gain pair rf, rg.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np
import numpy.typing as npt

from picker.circuit.mna import Capacitor, Netlist, OpAmp, Resistor, Source
from picker.stages.base import Array
from picker.stages.filterbase import (
    FilterType,
    base_capacitance,
    capacitor,
    gain_pair,
    vcvs_gain,
)
from picker.stages.sections import Section


def gain_leg(res: Mapping[str, float]) -> tuple[Resistor, Resistor]:
    """rf (output -> inverting input) and rg (inverting input -> reference)."""
    return (Resistor("n", "o", res.get("rf", 0.0)),
            Resistor("n", "0", res.get("rg", math.inf)))


class VcvsLowpass(FilterType):
    name = "vcvs-lowpass"
    kind = "lowpass"
    network_names = ("r1", "r2", "c1", "c2", "rf", "rg")
    required = ("r1", "r2", "c1", "c2")
    tuned_names = ("r1", "r2", "rf", "rg")

    def reduce(self, res: Mapping[str, float], rs: float) -> tuple[float, float, float, float, float]:
        return 1.0, rs + res["r1"] + res["r2"], 0.0, res.get("rg", math.inf), res.get("rf", 0.0)

    def netlist(self, res: Mapping[str, float], rs: float, load: float) -> Netlist:
        return Netlist((Source("s", "0", 1.0), Resistor("s", "i", rs),
                        Resistor("i", "a", res["r1"]), Resistor("a", "p", res["r2"]),
                        Capacitor("a", "o", res["c1"]), Capacitor("p", "0", res["c2"]),
                        *gain_leg(res), Resistor("o", "0", load), OpAmp("p", "n", "o")))

    def biquad(self, rs: float, values: Mapping[str, npt.ArrayLike]) -> tuple[Array, Array, Array]:
        r1 = rs + np.asarray(values["r1"], float)
        r2, c1, c2 = (np.asarray(values[k], float) for k in ("r2", "c1", "c2"))
        k = vcvs_gain(values)
        prod = r1 * r2 * c1 * c2
        return k, 1 / np.sqrt(prod), np.sqrt(prod) / ((r1 + r2) * c2 + r1 * c1 * (1 - k))

    def solve(self, sec: Section, rs: float, cap_series: Any,
              level: float = 1.0) -> dict[str, float]:
        k, q, wn = sec.gain, sec.q, 2 * math.pi * sec.f0_hz
        bound = 1 / (4 * q * q) + k - 1  # c2/c1 must not exceed it
        n_min = 1.0 if bound >= 1 else 1 / bound
        c2 = capacitor(base_capacitance(sec.f0_hz, n_min) * level, cap_series)
        c1 = capacitor(n_min * c2, cap_series, at_least=True)
        p = 1 / (wn * wn * c1 * c2)
        b = 1 / (wn * q)
        a = c2 + c1 * (1 - k)
        if a == 0:
            r1 = p * c2 / b
        else:
            disc = math.sqrt(max(b * b - 4 * a * p * c2, 0.0))
            roots = [x for x in ((b + disc) / (2 * a), (b - disc) / (2 * a)) if x > 0]
            r1 = min(roots, key=lambda x: abs(math.log(x / math.sqrt(p))))
        return {"r1": r1 - rs, "r2": p / r1, "c1": c1, "c2": c2, **gain_pair(k)}


KIND = VcvsLowpass()
