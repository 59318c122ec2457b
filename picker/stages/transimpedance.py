"""The transimpedance stage: a sensor current (a photodiode) into the inverting input.

Circuit: the sensor is a current source I in parallel with its shunt resistance Rsh and
its capacitance Cd, from the inverting input n to the reference; the feedback resistor
rf and capacitor cf from the output to n; the non-inverting input at the reference. The
op-amp's own input capacitances (differential and common mode, from the parts table)
add to Cd at n: Ct = Cd + Cin,diff + Cin,cm.

For the solver (which has voltage sources only) the sensor is written as its exact
Norton equivalent: a source of 1 V behind ``rn`` = Rsh drives the current 1/Rsh into n
with Rsh in parallel (Norton's theorem; any circuits text). With an open shunt
(``--rshunt`` not given) the netlist uses rn = OPEN_FACTOR·Zt (Zt the transimpedance
asked for), which changes the DC noise gain 1 + rf/rn by about 1 ppm (said in the
spec's notes). Per volt of that source the
stage is an inverting stage with rg = rn (reduced: kp = 0, zp = 0, kg = 1, rg = rn), so
the offset (Vos·NG + Ib·rf) and output-current formulas read it unchanged; the
transimpedance is vo/I = rn·vo/vs = -Zf·(loop's share).

With an ideal op-amp vo/I = -Zf = -rf/(1 + s·rf·cf). With a single-pole op-amp
A = ωa/s (ωa = 2π·GBW) and Rsh open, nodal analysis of the circuit gives

    vo/I = -rf·ωa / (s²·rf·(cf + Ct) + s·(1 + ωa·rf·cf) + ωa)
    ωn² = ωa / (rf·(cf + Ct)),   Q = √(ωa·rf·(cf + Ct)) / (1 + ωa·rf·cf)

(the usual second-order form of the photodiode amplifier; J. G. Graeme, Photodiode
Amplifiers: Op Amp Solutions, 1996, ch. 3, and Horowitz and Hill, The Art of
Electronics, 3rd ed., §4.x on transimpedance amplifiers, both from memory). Without cf
the -3 dB bandwidth of a Butterworth (Q = 1/√2) loop is fn = √(GBW/(2π·rf·Ct)); the cf
of a Butterworth response is √(2k - 1)/(ωa·rf) with k = ωa·rf·Ct (≈ √(Ct/(π·rf·GBW)),
√2 times the 45° value √(Ct/(2π·rf·GBW)) of the same texts).

Design (picker.design.tianet): rf is the series value nearest the transimpedance (or
``--rf`` exactly); cf is the largest E12 value not above 1/(2π·rf·B·FP_HEADROOM), B
the wanted bandwidth, so that the feedback pole alone lies above B. A part then needs
the GBW that keeps Q at or below the response's Q (``gbw_for_q``) and reaches B
(``gbw_for_band``): beyond it more GBW only damps the loop further, its bandwidth
settling toward the feedback pole (>= B). Where cf << Ct, Q decides and the need is
about 2·2π·rf·Ct·fp², twice the textbook 2π·rf·Ct·B² of a cf chosen for the part
itself: the price of one cf for every part.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, ClassVar

import numpy as np
import numpy.typing as npt

from picker.circuit.mna import Capacitor, Netlist, OpAmp, Resistor, Source
from picker.errors import BadRequirement
from picker.stages.base import Array, Stage, StageType, with_cload

if TYPE_CHECKING:
    from picker.design.requirement import Requirement

#: The feedback pole lies at least this factor above the bandwidth asked for, so that a
#: finite GBW reaches it (design choice; common practice, no source).
FP_HEADROOM = 1.2
#: An open shunt is written as this many times rf in the netlist (module docstring).
OPEN_FACTOR = 1e6
#: The closed-loop Q of each response the feedback capacitor is designed for (trade
#: terms: a Butterworth pair has Q = 1/√2, a Bessel pair 1/√3, critical damping 1/2).
RESPONSE_Q: dict[str, float] = {"butterworth": 1 / math.sqrt(2), "bessel": 1 / math.sqrt(3),
                                "critical": 0.5}
#: Checks that apply to a transimpedance stage (picker.checks names).
TIA_CHECKS: frozenset[str] = frozenset({
    "swing", "common_mode", "supply", "output_current", "dissipation", "offset",
    "stability", "stock", "tia_gbw", "tia_bandwidth", "tia_bias", "tia_slew", "tia_noise",
})
#: Resistive-stage checks and the transimpedance checks that take their place.
REPLACED: dict[str, str] = {"slew": "tia_slew", "noise": "tia_noise",
                            "phase": "tia_bandwidth", "gain_accuracy": "tia_bandwidth"}


def norton_ohm(rf: float, rsh: float | None) -> float:
    """The Norton resistance of the netlist, Ω: Rsh, or OPEN_FACTOR·rf for an open shunt."""
    return OPEN_FACTOR * rf if rsh is None or math.isinf(rsh) else rsh


def q_of(gbw_hz: npt.ArrayLike, rf: float, cf: float, ct: npt.ArrayLike) -> Array:
    """Closed-loop Q of the single-pole loop (module docstring), arrays broadcast."""
    wa = 2 * np.pi * np.asarray(gbw_hz, float)
    ct_a = np.asarray(ct, float)
    return np.sqrt(wa * rf * (cf + ct_a)) / (1 + wa * rf * cf)  # type: ignore[no-any-return]


def fn_of(gbw_hz: npt.ArrayLike, rf: float, cf: float, ct: npt.ArrayLike) -> Array:
    """Natural frequency fn = √(GBW/(2π·rf·(cf + Ct))), Hz (module docstring)."""
    return np.sqrt(np.asarray(gbw_hz, float) / (2 * np.pi * rf * (cf + np.asarray(ct, float))))  # type: ignore[no-any-return]


def f3db_of(gbw_hz: npt.ArrayLike, rf: float, cf: float, ct: npt.ArrayLike) -> Array:
    """-3 dB frequency of the single-pole loop's second-order low-pass, Hz:
    f3 = fn·√(1 - 1/(2Q²) + √((1 - 1/(2Q²))² + 1)) (any second-order low-pass)."""
    q = q_of(gbw_hz, rf, cf, ct)
    a = 1 - 1 / (2 * q * q)
    return fn_of(gbw_hz, rf, cf, ct) * np.sqrt(a + np.sqrt(a * a + 1))  # type: ignore[no-any-return]


def gbw_for_q(q: float, rf: float, cf: float, ct: npt.ArrayLike) -> Array:
    """The least GBW that keeps the loop's Q at or below ``q``, Hz.

    Q² = a·(cf + Ct)/(1 + a·cf)² with a = ωa·rf, i.e. q²·cf²·a² + (2q²·cf - cf - Ct)·a +
    q² = 0; Q falls through q at the larger root (Q rises, peaks, then falls with GBW).
    A zero cf has no such root (Q grows without bound): inf.
    """
    ct_a = np.asarray(ct, float)
    if cf <= 0:
        return np.full(ct_a.shape, np.inf)
    a2 = q * q * cf * cf
    b = 2 * q * q * cf - cf - ct_a
    disc = np.maximum(b * b - 4 * a2 * q * q, 0.0)
    a = (-b + np.sqrt(disc)) / (2 * a2)
    return a / (2 * np.pi * rf)  # type: ignore[no-any-return]


def gbw_for_band(band_hz: float, rf: float, cf: float, ct: npt.ArrayLike,
                 low: npt.ArrayLike) -> Array:
    """The least GBW at or above ``low`` whose loop reaches the -3 dB bandwidth
    ``band_hz`` (``f3db_of`` rises with GBW toward the feedback pole 1/(2π·rf·cf) once Q
    falls), Hz; inf where even 10⁶·low does not. Bisection in log GBW (60 halvings)."""
    ct_a = np.asarray(ct, float)
    start = np.broadcast_to(np.asarray(low, float), ct_a.shape).astype(float)
    lo = np.log(start)
    hi = lo + math.log(1e6)
    ok_hi = f3db_of(np.exp(hi), rf, cf, ct_a) >= band_hz
    ok_lo = f3db_of(np.exp(lo), rf, cf, ct_a) >= band_hz
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        up = f3db_of(np.exp(mid), rf, cf, ct_a) >= band_hz
        lo, hi = np.where(up, lo, mid), np.where(up, mid, hi)
    out = np.where(ok_lo, start, np.exp(hi))
    return np.where(ok_hi | ok_lo, out, np.inf)  # type: ignore[no-any-return]


def gbw_needed(q: float, band_hz: float, rf: float, cf: float, ct: npt.ArrayLike) -> Array:
    """The least GBW that keeps Q <= ``q`` and reaches the bandwidth, Hz (the larger of
    ``gbw_for_q`` and ``gbw_for_band`` above it)."""
    gq = gbw_for_q(q, rf, cf, ct)
    return gbw_for_band(band_hz, rf, cf, ct, np.where(np.isfinite(gq), gq, 1.0))


@dataclass(frozen=True)
class TiaStage(Stage):
    """A transimpedance stage: the base Stage (its DC reduction per volt of the Norton
    source) plus what the transimpedance checks read (SI units)."""

    rn: float = 0.0  # the Norton resistance in the netlist, Ω
    rsh: float = math.inf  # the sensor's shunt resistance as given (inf: open)
    cd: float = 0.0  # the sensor's capacitance, F
    cf: float = 0.0  # the feedback capacitor, F
    zt: float = 0.0  # the transimpedance asked for, Ω
    band_hz: float = 0.0  # the -3 dB bandwidth asked for, Hz
    response_q: float = RESPONSE_Q["butterworth"]

    def allows(self, check: str) -> bool:
        """Whether the check ``check`` holds for this stage (TIA_CHECKS)."""
        return check in TIA_CHECKS

    def replaced_by(self, check: str) -> str | None:
        """The transimpedance check that stands in for a resistive-stage check."""
        return REPLACED.get(check)

    @property
    def transimpedance(self) -> float:
        """The DC transimpedance with an ideal op-amp, Ω: rf‖Rsh seen as rf (Rsh carries
        no signal current at a virtual ground)."""
        return self.rf

    @property
    def feedback_pole_hz(self) -> float:
        """1/(2π·rf·cf), Hz: the bandwidth an unlimited GBW gives."""
        return 1 / (2 * math.pi * self.rf * self.cf) if self.cf > 0 else math.inf

    @property
    def amps_per_volt_out(self) -> float:
        """Output current per volt of output at the wanted bandwidth: the load plus the
        feedback pair |1/rf + j2πB·cf| (the current at the top of the band)."""
        i = 0.0 if math.isinf(self.load) else 1.0 / self.load
        return i + abs(complex(1 / self.rf, 2 * math.pi * self.band_hz * self.cf))


class Transimpedance(StageType):
    name = "transimpedance"
    network_names: ClassVar[tuple[str, ...]] = ("rf", "cf")
    required: ClassVar[tuple[str, ...]] = ("rf", "cf")
    gain_names: ClassVar[tuple[str, ...]] = ()

    def designed(self, req: Requirement, series: str) -> Requirement | None:
        """rf from the series, cf from the capacitor series (picker.design.tianet)."""
        from picker.design.tianet import with_tia_network  # it imports this module

        return with_tia_network(req, series)  # type: ignore[arg-type]

    def design(self, req: Requirement, series: str) -> Any:
        """picker.design.tianet.TiaNetwork."""
        from picker.design.tianet import design_tia  # it imports this module

        return design_tia(req, series)  # type: ignore[arg-type]

    def build(self, req: Requirement) -> Stage:
        """The stage of ``req``: its rf and cf (given, or designed by picker.api.built)."""
        if req.network is None:
            from picker.design.tianet import design_values  # here: picker.design imports us

            values = design_values(req)
        else:
            values = dict(req.network)
        rf, cf = values["rf"], values.get("cf", 0.0)
        if not (rf > 0 and math.isfinite(rf)):
            raise BadRequirement(f"--rf: {rf!r} Ω is not a feedback resistor; give one above 0")
        rsh = math.inf if req.rshunt_ohm is None else req.rshunt_ohm
        rn = req.norton_ohm
        load = math.inf if req.load_ohm is None else req.load_ohm
        kp, zp, kg, rg, rf_ = self.reduce({"rf": rf, "rn": rn}, 0.0)
        net = with_cload(self.tia_netlist(rf, cf, rn, req.cdet_f, load), req.cload_f)
        assert req.zt_ohm is not None and req.band_hz is not None
        return TiaStage(self.name, {"rf": rf, "cf": cf}, kp, zp, kg, rg, rf_, load,
                        req.gain, req.network is None, net, req.cload_f, rn=rn, rsh=rsh,
                        cd=req.cdet_f, cf=cf, zt=req.zt_ohm, band_hz=req.band_hz,
                        response_q=RESPONSE_Q[req.tia_response])

    def ideal_network(self, gain: float, rs: float, rf: float) -> dict[str, float]:
        raise NotImplementedError("a transimpedance stage is designed by picker.design.tianet")

    def reduce(self, res: Mapping[str, float], rs: float) -> tuple[float, float, float, float, float]:
        return 0.0, 0.0, 1.0, res["rn"], res["rf"]

    def tia_netlist(self, rf: float, cf: float, rn: float, cd: float, load: float) -> Netlist:
        """The circuit (module docstring): output node ``o``, inverting input ``n``."""
        e: list[Resistor | Capacitor | Source | OpAmp] = [
            Source("s", "0", 1.0), Resistor("s", "n", rn), Resistor("n", "o", rf)]
        if cd > 0:
            e.append(Capacitor("n", "0", cd))
        if cf > 0:
            e.append(Capacitor("n", "o", cf))
        e += [Resistor("p", "0", 0.0), Resistor("o", "0", load), OpAmp("p", "n", "o")]
        return Netlist(tuple(e), "o")

    def netlist(self, res: Mapping[str, float], rs: float, load: float) -> Netlist:
        rn = res.get("rn", OPEN_FACTOR * res["rf"])
        return self.tia_netlist(res["rf"], res.get("cf", 0.0), rn, res.get("cd", 0.0), load)

    def ideal_gain(self, rs: float, res: Mapping[str, npt.ArrayLike]) -> Array:
        return np.asarray(res["rf"], float)  # type: ignore[no-any-return]


KIND = Transimpedance()

__all__ = ["KIND", "OPEN_FACTOR", "REPLACED", "RESPONSE_Q", "TIA_CHECKS", "TiaStage",
           "Transimpedance", "f3db_of", "fn_of", "gbw_for_band", "gbw_for_q", "gbw_needed", "norton_ohm", "q_of"]
