"""The difference stage: r1/r2 at the inverting input, r3/r4 at the non-inverting one.

Driven by a balanced source (+v/2 into r3 and -v/2 into r1, each through Rs); the gain
is per volt of the difference. Reduced: ``kp = r4/(2(Rs + r3 + r4))``,
``zp = (Rs + r3)‖r4``, ``kg = -1/2``, ``rg = Rs + r1``, ``rf = r2``. Ideal gain

    G = kp·(1 + r2/(Rs + r1)) + r2/(2(Rs + r1)),

with matched ratios (r3 = r1, r4 = r2) ``G = r2/(Rs + r1)`` (Thévenin reduction of the
dividers; any circuits text, e.g. Horowitz and Hill, The Art of Electronics, 3rd ed.,
ch. 4, from memory). A designer's pair (r2, r1) sets r4 = r2 and r3 = r1.

Common mode (both inputs at Vc from the reference, ideal op-amp; the same Thévenin
reduction): the non-inverting input sits at ``kcm·Vc``, ``kcm = r4/(Rs + r3 + r4)``, and

    Acm = kcm·NG - r2/(Rs + r1) = (r4·(Rs + r1) - r2·(Rs + r3)) / ((Rs + r1)·(Rs + r3 + r4)),

NG = 1 + r2/(Rs + r1), zero for matched ratios (``transfers``). The inputs of the op-amp
follow ``vp = ref + kcm·(V+ - ref)``, V+ the positive input's level (``input_levels``).
Input impedances with an ideal op-amp (vn = vp; ``input_impedances``): the positive input
sees r3 + r4 in any mode; the negative input r1/(1 + k) under a balanced differential
drive and r1/(1 - k) under common mode, k = r4/(r3 + r4); a floating source between
the inputs sees r1 + r3.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

import numpy as np
import numpy.typing as npt

from picker.circuit.mna import Netlist, OpAmp, Resistor, Source
from picker.stages.base import Array, Stage, StageType, parallel
from picker.stages.inverting import input_leg

if TYPE_CHECKING:
    from picker.design.requirement import Requirement

NAMES = ("r1", "r2", "r3", "r4")


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

    def input_levels(self, req: Requirement, st: Stage) -> tuple[float, float]:
        """Lowest and highest level of the op-amp's inputs, V (``input_levels``)."""
        vcm = req.vcm if req.vcm is not None else (req.ref, req.ref)
        return input_levels(req.source_ohm, st.resistors, req.tolerance, req.ref, vcm,
                            req.vin)


def transfers(rs: float, res: Mapping[str, npt.ArrayLike]) -> tuple[Array, Array, Array, Array]:
    """The network's transfers with an ideal op-amp, for arrays of resistor values.

    Parameters
    ----------
    rs : float
        Source resistance in each leg, Ω.
    res : mapping
        r1..r4, Ω (arrays of one shape, e.g. one element per tolerance corner).

    Returns
    -------
    ad, acm, kcm, ng : arrays
        Differential gain (V/V per volt of difference), common-mode gain (signed, V/V;
        the module docstring's closed form, written as one difference of products),
        the non-inverting input's level per volt of common mode, and the noise gain.
    """
    r1, r2, r3, r4 = (np.asarray(res[k], float) for k in NAMES)
    a1, a3 = rs + r1, rs + r3
    kcm = r4 / (a3 + r4)
    ng = 1 + r2 / a1
    acm = (r4 * a1 - r2 * a3) / (a1 * (a3 + r4))
    ad = 0.5 * kcm * ng + 0.5 * r2 / a1
    return ad, acm, kcm, ng


def corners(res: Mapping[str, float], t: float) -> dict[str, Array]:
    """The 16 tolerance corners R·(1 ± t) of r1..r4, as arrays (one element per corner)."""
    signs = np.array(list(itertools.product((-1.0, 1.0), repeat=4)))
    return {k: res[k] * (1 + t * signs[:, j]) for j, k in enumerate(NAMES)}


def input_levels(rs: float, res: Mapping[str, float], t: float, ref: float,
                 vcm: tuple[float, float], vin: float) -> tuple[float, float]:
    """Lowest and highest level the op-amp's inputs reach, V.

    vp = ref + k·(V+ - ref) with V+ = Vcm ± Vp,in/2 (the positive input carries half
    the difference), k = r4/(Rs + r3 + r4) at either end of the resistors' tolerance
    (k is monotonic in each resistor, so its extremes lie at r3·(1 ∓ t), r4·(1 ± t)),
    at both ends of the common-mode range; vn = vp (ideal op-amp).
    """
    r3, r4 = res["r3"], res["r4"]
    ks = (r4 * (1 - t) / (rs + r3 * (1 + t) + r4 * (1 - t)),
          r4 * (1 + t) / (rs + r3 * (1 - t) + r4 * (1 + t)))
    top, bottom = vcm[1] - ref + vin / 2, vcm[0] - ref - vin / 2
    return ref + min(k * bottom for k in ks), ref + max(k * top for k in ks)


def input_impedances(res: Mapping[str, float]) -> dict[str, float]:
    """Input impedance of each input with an ideal op-amp, Ω (module docstring):
    ``plus`` (either mode), ``minus_diff`` (balanced drive), ``minus_cm``, ``floating``."""
    r1, r3, r4 = res["r1"], res["r3"], res["r4"]
    k = r4 / (r3 + r4) if r3 + r4 > 0 else 1.0
    return {"plus": r3 + r4, "minus_diff": r1 / (1 + k),
            "minus_cm": r1 / (1 - k) if k < 1 else math.inf, "floating": r1 + r3}


KIND = Difference()
