"""What a resistor network does around an ideal op-amp, and the limits it must keep.

Names follow picker.design.requirement (``rf``/``rg``/``rp``; ``r1``..``r4`` for the
difference stage). Signals are taken from the reference level; ``rs`` is the source
resistance in series with the input leg (each half of a balanced source for the
difference stage). Every function takes arrays and broadcasts: the search in
picker.design.network evaluates all pairs at once.

The ideal-op-amp gain of a network, the names a designer's pair fills and the
resistors that set the gain belong to each stage type (picker.stages: ``ideal_gain``,
``pair_names``, ``gain_names``). A pair is (``a``, ``b``) = (feedback, leg): (rf, rg)
for the inverting and non-inverting stages, (r2, r1) for the difference stage (then
r4 = r2 and r3 = r1).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

from picker.design.requirement import Topology
from picker.stages import kind

Array = npt.NDArray[np.float64]

#: Boltzmann constant, J/K (CODATA; exact since the 2019 SI).
K_B = 1.380649e-23
#: Window for every resistor picker designs, Ω (common practice, no source: below
#: about 1 kΩ a network loads the output and the source; above about 1 MΩ leakage,
#: stray capacitance, bias currents and thermal noise take over).
WINDOW_OHM = (1e3, 1e6)
#: The network's share of the output current (common practice, no source): at the
#: peak it draws at most NET_LOAD_SHARE of the load's current, or NET_CURRENT_A when
#: that is larger (no load, or a light one).
NET_LOAD_SHARE = 0.1
NET_CURRENT_A = 1e-3
#: Default least input impedance of an inverting or difference stage (common practice,
#: no source): max(ZIN_MIN_OHM, ZIN_SOURCE_RATIO x the source resistance).
ZIN_MIN_OHM = 10e3
ZIN_SOURCE_RATIO = 10.0
#: Shares of the budgets the network may use (the rest is left to the op-amp itself).
OFFSET_SHARE = 0.5  # of --offset-max: bias currents through the network
NOISE_SHARE = 0.5  # of --noise-max: resistor thermal noise and current noise
RIN_SHARE = 0.1  # of --gain-error: the part's input resistance loading the network
RATIO_SHARE = 0.25  # of --gain-error: the nominal ratio error of standard values

def pair_resistors(topology: Topology, a: npt.ArrayLike, b: npt.ArrayLike) -> dict[str, Any]:
    """The named network of a pair (the stage type's ``pair_network``; difference:
    matched, r3 = r1 and r4 = r2)."""
    return kind(topology).pair_network(a, b)


@dataclass(frozen=True)
class PairModel:
    """Per-pair quantities around an ideal op-amp (arrays broadcast over a and b).

    gain, noise_gain: signal and noise gain. out_siemens: output current per volt of
    output drawn by the network. r_minus, r_plus: resistance each input sees to the
    reference (bias currents flow through them). noise_ohm: the network's thermal
    noise at the output as an equivalent resistance (density² = 4kT·noise_ohm).
    inoise_ohm: output noise per A/√Hz of input current noise (quadrature sum over
    both inputs). rin_ohm: the resistance that, over the part's Rin·A0, is the extra
    gain error from the input resistance (rf/(Rin·A0): the noise gain rises from
    1 + rf/rg to 1 + rf/(rg‖Rin)).
    """

    gain: Array
    noise_gain: Array
    out_siemens: Array
    r_minus: Array
    r_plus: Array
    noise_ohm: Array
    inoise_ohm: Array
    rin_ohm: Array


def _par(x: Array, y: Array) -> Array:
    return x * y / (x + y)  # type: ignore[no-any-return]


def pair_model(topology: Topology, rs: float, a: npt.ArrayLike, b: npt.ArrayLike) -> PairModel:
    """The quantities of every pair (a, b); see PairModel. Ideal op-amp, rp = 0.

    Output current: i = vo/RL + (vo - vn)/rf with vn = vp = kp·vin (superposition at the
    inverting node); non-inverting: vo/(rf + rg); inverting: vo/rf.
    Thermal noise of each resistor times its gain to the output, in quadrature
    (4kTR per resistor, Johnson-Nyquist).
    """
    a = np.asarray(a, float)
    b = np.asarray(b, float)
    if topology == "inverting":
        g = a / (rs + b)
        ng = 1 + g
        return PairModel(g, ng, 1 / a + 0 * b, _par(a, rs + b), 0 * g, a + b * g**2,
                         a + 0 * b, a + 0 * b)
    if topology == "non-inverting":
        g = 1 + a / b
        return PairModel(g, g, 1 / (a + b), _par(a, b), rs + 0 * g, a * g, a + 0 * b,
                         a + 0 * b)
    g = a / (rs + b)
    ng = 1 + g
    top = rs + b + a
    n_plus = (b * (a / top) ** 2 + a * ((rs + b) / top) ** 2) * ng**2
    rm = _par(a, rs + b)
    return PairModel(g, ng, (1 - 0.5 / ng) / a, rm, rm, a + b * g**2 + n_plus,
                     math.sqrt(2) * a + 0 * b, a + 0 * b)


def bias_offset(ng: npt.ArrayLike, r_plus: npt.ArrayLike, r_minus: npt.ArrayLike,
                ib: float, ios: float) -> Array:
    """Worst-case output offset from the input bias currents, V.

    Each input draws Ib ± Ios/2: vo = NG·(Ib+·R+ - Ib-·R-), so at worst
    |vo| = NG·(Ib·|R+ - R-| + Ios/2·(R+ + R-)). Equal resistances leave NG·Ios·R
    (the reason for a bias-current compensation resistor).
    """
    ng, rp, rm = (np.asarray(x, float) for x in (ng, r_plus, r_minus))
    return ng * (ib * np.abs(rp - rm) + 0.5 * ios * (rp + rm))  # type: ignore[no-any-return]


def noise_bandwidth_hz(ng: npt.ArrayLike, gbw_hz: float | None, freq_hz: float,
                       gain_error: float) -> Array:
    """Equivalent noise bandwidth of the closed loop, Hz: π/2 · fc (single pole).

    fc = GBW/NG with the part; without it the lowest corner the gain-error budget
    allows at the top frequency, fc = f/√((1 - ε)^-2 - 1) (|1/(1 + jf/fc)| >= 1 - ε).
    """
    ng = np.asarray(ng, float)
    if gbw_hz is not None:
        return np.pi / 2 * gbw_hz / ng  # type: ignore[no-any-return]
    fc = freq_hz / math.sqrt((1 - gain_error) ** -2 - 1)
    return np.pi / 2 * fc + 0 * ng  # type: ignore[no-any-return]


@dataclass(frozen=True)
class PartData:
    """The part's values the network limits need (None = unknown or no part)."""

    label: str | None = None
    iout_a: float | None = None
    ib_a: float | None = None
    ios_a: float | None = None
    vos_v: float | None = None
    in_a_per_rthz: float | None = None
    rin_ohm: float | None = None
    aol_v_per_v: float | None = None
    gbw_hz: float | None = None
    rout_ohm: float | None = None

    @classmethod
    def from_row(cls, row: Mapping[str, Any] | None) -> PartData:
        """From a parts-table row (a mapping or pandas Series; NaN/None = unknown)."""
        if row is None:
            return cls()

        def num(name: str) -> float | None:
            v = row.get(name)
            if v is None:
                return None
            try:
                f = float(v)
            except (TypeError, ValueError):
                return None
            return f if math.isfinite(f) else None

        label = row.get("label")
        return cls(str(label) if label is not None else None,
                   num("iout_a"), num("ib_a"), num("ios_a"), num("vos_v"),
                   num("in_a_per_rthz"), num("rin_ohm"), num("aol_v_per_v"), num("gbw_hz"),
                   num("rout_ohm"))


__all__ = ["K_B", "NET_CURRENT_A", "NET_LOAD_SHARE", "ZIN_MIN_OHM",
           "ZIN_SOURCE_RATIO", "NOISE_SHARE", "OFFSET_SHARE", "PairModel", "PartData",
           "RATIO_SHARE", "RIN_SHARE", "WINDOW_OHM", "bias_offset", "noise_bandwidth_hz",
           "pair_model", "pair_resistors"]
