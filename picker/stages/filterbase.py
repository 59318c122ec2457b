"""Second-order active filter stages: what they share.

A filter stage type (``FilterType``) knows its netlist with capacitors, its ideal
transfer function as a closed form over arrays of component values (``biquad``: pass-band
gain K, ωn and Q, for tolerance analysis), its design procedure (``solve``: capacitors
from a capacitor series first, then the exact resistors for the section) and its reduction
at DC (capacitors open) for the offset check.

A built filter stage (``FilterStage``) carries, besides the base ``Stage``, the section
asked for and what an ideal op-amp must deliver over the signal band (DC, or the lowest
frequency of interest, up to the top frequency ``--freq``), read from the netlist with a
nullor (picker.circuit.nullor) on a log grid of 40 points a decade plus the section's f0:

- ``peak_gain``: max |H(f)| (the output's peak per volt of input: swing);
- ``slew_per_volt``: max 2π·f·|H(f)| (a sine's steepest output slope per volt: slew);
- ``amps_peak``: max |I_out(f)| (load plus network, per volt of input);
- ``cm_peak``: max |v_p(f)| (the inputs' excursion per volt of input).

The netlist carries the load capacitance (``--cload``) at the output, so the band scan,
the response and the loop see it.

Only the checks that hold for a reactive stage apply to it (``FILTER_CHECKS``): the
resistive-stage gain, phase, stability, noise, slew and output-current checks are
replaced by the filter checks of picker.checks.filters (``REPLACED``); a check added
later applies only once it is listed here.
"""

from __future__ import annotations

import math
from abc import abstractmethod
from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, ClassVar

import numpy as np
import numpy.typing as npt

from picker.circuit.mna import Netlist
from picker.circuit.nullor import node_voltages, output_current
from picker.errors import BadRequirement
from picker.stages.base import Array, Stage, StageType, with_cload
from picker.stages.sections import Kind, Section, section

if TYPE_CHECKING:
    from picker.design.requirement import Requirement

#: Checks that apply to a filter stage (picker.checks names), in no particular order.
FILTER_CHECKS: frozenset[str] = frozenset({
    "swing", "common_mode", "supply", "offset", "stock",
    "filter_gbw", "filter_response", "filter_slew", "filter_current", "filter_min_gain",
    "filter_stability", "filter_noise",
})
#: Resistive-stage checks and the filter checks that take their place.
REPLACED: dict[str, str] = {"slew": "filter_slew", "gain_accuracy": "filter_response",
                            "phase": "filter_response", "output_current": "filter_current",
                            "stability": "filter_stability", "noise": "filter_noise"}
#: Resistance level the design aims at, Ω: 1 kΩ .. 100 kΩ keeps the op-amp's output
#: load light and bias-current offset and resistor noise low (common practice, no source).
R_TARGET_OHM = 10e3
#: Grid density of the band scan, points per decade.
POINTS_PER_DECADE = 40


@dataclass(frozen=True)
class FilterStage(Stage):
    """A filter stage: the base Stage (its DC reduction) plus the section and the band scan."""

    kind: Kind = "lowpass"
    target: Section | None = None  # the section the requirement asks for
    top_hz: float = 0.0  # top signal frequency
    peak_gain: float = 0.0
    slew_per_volt: float = 0.0  # V/s per volt of input
    amps_peak: float = 0.0  # A per volt of input
    cm_peak: float = 0.0  # V per volt of input
    inverting: bool = False
    ideal: Section | None = None  # the network's own section (ideal op-amp)

    def allows(self, check: str) -> bool:
        """Whether the check ``check`` holds for this stage (module docstring)."""
        return check in FILTER_CHECKS

    def replaced_by(self, check: str) -> str | None:
        """The filter check that stands in for a resistive-stage check (or None)."""
        return REPLACED.get(check)

    @property
    def ideal_gain(self) -> float:
        """Signed pass-band gain of the network with an ideal op-amp."""
        assert self.ideal is not None
        return self.ideal.gain

    @property
    def cm_per_volt(self) -> float:
        return self.cm_peak

    @property
    def amps_per_volt_out(self) -> float:
        """Peak output current per volt of pass-band output (load plus network)."""
        return self.amps_peak / self.gain


def band(f0_hz: float, top_hz: float) -> npt.NDArray[np.float64]:
    """The scan grid: DC, then log-spaced from f0/1000 to the top frequency, and f0."""
    lo, hi = math.log10(f0_hz / 1000), math.log10(max(top_hz, f0_hz / 100))
    n = max(2, int((hi - lo) * POINTS_PER_DECADE) + 1)
    grid = np.logspace(lo, hi, n)
    extra = [0.0] + ([f0_hz] if f0_hz <= top_hz else [])
    return np.unique(np.concatenate([extra, grid[grid <= top_hz * (1 + 1e-12)]]))


class FilterType(StageType):
    """A second-order filter stage type (module docstring)."""

    kind: ClassVar[Kind]
    inverting: ClassVar[bool] = False
    #: resistors that set f0 and Q (the E-series snapping varies these), then gain ones
    tuned_names: ClassVar[tuple[str, ...]] = ()
    capacitor_names: ClassVar[tuple[str, ...]] = ("c1", "c2")

    def target(self, req: Requirement) -> Section:
        """The section ``req`` asks for (picker.stages.sections.section)."""
        assert req.f0_hz is not None
        sign = -1.0 if self.inverting else 1.0
        return section(self.kind, req.f0_hz, sign * req.gain, req.response,
                       req.passband_ripple_db, req.bandwidth_hz)

    def designed(self, req: Requirement, series: str) -> Requirement | None:
        """Capacitors first, resistors snapped (picker.design.filternet)."""
        from picker.design.filternet import with_filter_network  # it imports this module

        return with_filter_network(req, series)  # type: ignore[arg-type]

    def design(self, req: Requirement, series: str) -> Any:
        """picker.design.filternet.FilterNetwork."""
        from picker.design.filternet import design_filter  # it imports this module

        return design_filter(req, series)  # type: ignore[arg-type]

    def build(self, req: Requirement) -> Stage:
        """The stage of ``req``: its network (given, or the exact design) and band scan."""
        sec = self.target(req)
        ideal = req.network is None
        values = (self.solve(sec, req.source_ohm, req.cap_series) if ideal
                  else dict(req.network or {}))
        bad = [k for k, v in values.items() if not v >= 0 or (k.startswith("c") and v == 0)]
        if bad:
            raise BadRequirement(
                f"--source: {req.source_ohm:g} Ω leaves no room for {', '.join(bad)} of the "
                f"{self.name} section at {sec.f0_hz:g} Hz; lower the source resistance or "
                "buffer the source")
        load = math.inf if req.load_ohm is None else req.load_ohm
        kp, zp, kg, rg, rf = self.reduce(values, req.source_ohm)
        net = with_cload(self.netlist(values, req.source_ohm, load), req.cload_f)
        k, wn, q = (float(np.asarray(x)) for x in self.biquad(req.source_ohm, values))
        own = Section(self.kind, wn / (2 * math.pi), q, k)
        top = req.freq_hz
        f = band(sec.f0_hz, top)
        v = node_voltages(net, f)
        h = np.abs(v[net.out])
        amp = net.opamp
        assert amp is not None
        i_out = np.abs(output_current(net, f))
        return FilterStage(
            self.name, values, kp, zp, kg, rg, rf, load, req.gain, ideal, net, req.cload_f,
            kind=self.kind, target=sec, top_hz=top, peak_gain=float(h.max()),
            slew_per_volt=float(np.max(2 * np.pi * f * h)), amps_peak=float(i_out.max()),
            cm_peak=float(np.abs(v[amp.p]).max()), inverting=self.inverting, ideal=own)

    def ideal_network(self, gain: float, rs: float, rf: float) -> dict[str, float]:
        raise NotImplementedError("a filter stage is designed from its section (solve)")

    def ideal_gain(self, rs: float, res: Mapping[str, npt.ArrayLike]) -> Array:
        return np.abs(self.biquad(rs, res)[0])  # type: ignore[no-any-return]

    @abstractmethod
    def biquad(self, rs: float, values: Mapping[str, npt.ArrayLike]) -> tuple[Array, Array, Array]:
        """(K, ωn, Q) of the ideal transfer function for arrays of component values."""

    @abstractmethod
    def solve(self, sec: Section, rs: float, cap_series: Any,
              level: float = 1.0) -> dict[str, float]:
        """The exact network for ``sec``: capacitors from ``cap_series`` (near ``level``
        times the capacitance of the 10 kΩ level), resistors solved."""

    def netlist(self, res: Mapping[str, float], rs: float, load: float) -> Netlist:
        raise NotImplementedError


def capacitor(value: float, series: Any, at_least: bool = False) -> float:
    """The capacitor-series value nearest ``value`` F (or the smallest not below it)."""
    from picker.design import series as es  # here: picker.design imports picker.stages

    if not at_least:
        return es.nearest(value, series)
    cand = es.values(series, value / 10, value * 10)
    return float(cand[cand >= value * (1 - 1e-12)][0])


def base_capacitance(f0_hz: float, spread: float = 1.0) -> float:
    """The capacitance that puts the resistors near R_TARGET_OHM at ωn, F: 1/(ωn·R·√spread)."""
    return 1.0 / (2 * math.pi * f0_hz * R_TARGET_OHM * math.sqrt(spread))


def gain_pair(gain: float, rf: float = R_TARGET_OHM) -> dict[str, float]:
    """rf and rg of the non-inverting gain K = 1 + rf/rg (K = 1: rf a wire, rg open)."""
    if gain == 1:
        return {"rf": 0.0, "rg": math.inf}
    return {"rf": rf, "rg": rf / (gain - 1)}


def vcvs_gain(values: Mapping[str, npt.ArrayLike]) -> Array:
    """K = 1 + rf/rg for arrays (rg open: 1)."""
    rf = np.asarray(values.get("rf", 0.0), float)
    rg = np.asarray(values.get("rg", math.inf), float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(np.isinf(rg), 1.0, 1.0 + rf / rg)  # type: ignore[no-any-return]


__all__ = ["FILTER_CHECKS", "FilterStage", "FilterType", "R_TARGET_OHM", "band",
           "base_capacitance", "capacitor", "gain_pair", "vcvs_gain"]
