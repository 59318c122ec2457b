"""The stage requirement: what the amplifier stage must do, in SI units.

A requirement is read from command-line options or a TOML design file through the
same keys (the option names without dashes: ``gain-error`` or ``gain_error``), with
command-line values overriding the file. Every value goes through picker.quantities,
so a wrong unit is named where it was written: ``--freq: '10 V' is a voltage, ...``.

Signals ride on the reference level ``ref`` (mid-rail by default): the input, the
ground leg of the network and the load all return to it, as in split-supply practice
or a single-supply stage with AC-coupled source and load.

Explicit resistor networks (``network``; values in Ω, or ``inf`` for an open leg):

- inverting: ``rf`` out -> inverting input, ``rg`` from the source (after its
  own source resistance) -> inverting input, optional ``rp`` non-inverting input -> ref.
- non-inverting: ``rf`` out -> inverting input, ``rg`` inverting input -> ref,
  optional ``rp`` in series with the non-inverting input.
- follower: optional ``rf`` out -> inverting input (default 0), optional ``rp``.
- difference: ``r1`` negative input -> inverting input, ``r2`` out -> inverting input,
  ``r3`` positive input -> non-inverting input, ``r4`` non-inverting input -> ref.

Without a network the stage uses an ideal-ratio network built from ``rf`` (see
picker.stages).
"""

from __future__ import annotations

import math
import tomllib
from collections.abc import Callable, Mapping
from dataclasses import MISSING, dataclass, field, fields, replace
from pathlib import Path
from typing import Any, Literal, get_args

from picker.errors import BadRequirement, BadValue
from picker.quantities import Brief, as_number, check_rails, parse, parse_amplitude, parse_rails
from picker.stages import kind, kinds

Topology = Literal["inverting", "non-inverting", "follower", "difference", "vcvs-lowpass",
                   "vcvs-highpass", "mfb-lowpass", "mfb-bandpass", "level-shift"]
TOPOLOGIES: tuple[Topology, ...] = get_args(Topology)

#: Extra-low voltage limit for DC (IEC 61140 practice): beyond it, a caution.
ELV_DC_V = 60.0
#: The temperature offset drift is specified from.
T_REF_C = 25.0

# requirement key (as written, dashes) -> dataclass field
KEYS: dict[str, str] = {
    "topology": "topology",
    "gain": "gain",
    "vin": "vin_pk",
    "vout": "vout_pk",
    "freq": "freq_hz",
    "ref": "ref_v",
    "load": "load_ohm",
    "source": "source_ohm",
    "rails": "rails",
    "gain-error": "gain_error",
    "tolerance": "tolerance",
    "tolerance-rule": "tolerance_rule",
    "phase-error": "phase_error_deg",
    "offset-max": "offset_max_v",
    "noise-max": "noise_max_v",
    "temp": "temp",
    "qty": "qty",
    "margin": "margin",
    "rf": "rf_ohm",
    "rg": "rg_ohm",
    "rin": "rg_ohm",
    "zin": "zin_ohm",
    "mains": "mains",
    "light-load-swing": "light_load_swing",
    "network": "network",
    "assume": "assume",
    "cload": "cload_f",
    "vcm": "vcm",
    "cmrr": "cmrr_min_db",
    "phase-margin": "phase_margin_deg",
    "ripple": "ripple",
    "f0": "f0_hz",
    "response": "response",
    "passband-ripple": "passband_ripple_db",
    "bandwidth": "bandwidth_hz",
    "cap-tolerance": "cap_tolerance",
    "cap-series": "cap_series",
    "response-error": "response_error",
    # level-shifting stages (picker.stages.levelshift)
    "vin-range": "vin_range",
    "vout-range": "vout_range",
    "shift-source": "shift_source_v",
}

#: Keys of a level-shift stage; the ranges replace --vin/--vout, --gain and --ref.
LEVEL_KEYS = ("vin-range", "vout-range", "shift-source")
#: How closely a --gain given with the ranges must agree with theirs (relative).
RANGE_GAIN_AGREEMENT = 1e-3

#: Keys that describe a filter section; other stages refuse them.
FILTER_KEYS = ("f0", "response", "passband-ripple", "bandwidth")
#: The response shapes of a low- or high-pass section (trade terms).
RESPONSES = ("butterworth", "bessel", "chebyshev")

Label = Callable[[str], str]

#: Physical ranges a stage value must lie in (common practice for op-amp stages, no
#: source): beyond them, derived quantities (loop gain, time steps, noise integrals)
#: overflow or underflow a float, and no real stage is built there. key -> (low, high, unit)
RANGES: dict[str, tuple[float, float, str]] = {
    "gain": (1e-3, 1e6, "V/V (-60 dB to 120 dB)"),
    "freq": (1e-3, 1e9, "Hz (1 mHz to 1 GHz)"),
    "vin": (1e-9, 1e3, "V (1 nV to 1 kV)"),
    "vout": (1e-9, 1e3, "V (1 nV to 1 kV)"),
    "load": (1e-3, 1e12, "Ω (1 mΩ to 1 TΩ)"),
    "source": (0.0, 1e12, "Ω (0 to 1 TΩ)"),
    "rf": (1e-3, 1e12, "Ω (1 mΩ to 1 TΩ)"),
    "rg": (1e-3, 1e12, "Ω (1 mΩ to 1 TΩ)"),
    "rin": (1e-3, 1e12, "Ω (1 mΩ to 1 TΩ)"),
    "zin": (1.0, 1e12, "Ω (1 Ω to 1 TΩ)"),
    "network": (1e-3, 1e12, "Ω (1 mΩ to 1 TΩ; 0 where a short is allowed)"),
    "network-c": (1e-15, 1.0, "F (1 fF to 1 F)"),
    "gain-error": (1e-9, 1.0, "(1 ppb to 100%)"),
    "offset-max": (1e-12, 1e3, "V (1 pV to 1 kV)"),
    "noise-max": (1e-12, 1e3, "V (1 pV to 1 kV)"),
    "temp": (-273.15, 500.0, "°C (-273.15 °C to 500 °C)"),
    "qty": (1, 1e9, "channels (1 to 1,000,000,000)"),
    "margin": (1.0, 100.0, "(1 to 100)"),
    "cload": (0.0, 1e-3, "F (0 to 1 mF)"),
    "cmrr": (0.0, 200.0, "dB (0 to 200 dB)"),
    "phase-margin": (1.0, 89.0, "° (1° to 89°)"),
    "ripple": (1e-9, 1e3, "V (1 nV to 1 kV)"),
    "ripple-freq": (1e-3, 1e9, "Hz (1 mHz to 1 GHz)"),
    "f0": (1e-3, 1e8, "Hz (1 mHz to 100 MHz)"),
    "bandwidth": (1e-4, 1e8, "Hz (0.1 mHz to 100 MHz)"),
    "passband-ripple": (0.001, 6.0, "dB (0.001 dB to 6 dB)"),
    "cap-tolerance": (0.0, 0.2, "(0 to 20%)"),
    "response-error": (1e-6, 0.5, "(1 ppm to 50%)"),
    "vin-range": (-1e3, 1e3, "V (-1 kV to 1 kV)"),
    "vout-range": (-1e3, 1e3, "V (-1 kV to 1 kV)"),
    "shift-source": (1e-3, 1e3, "V (1 mV to 1 kV)"),
}


def _ranged(key: str, value: float, name: str, raw: Any, what: str = "") -> float:
    """``value`` if it lies in RANGES[key], else BadValue naming the range."""
    lo, hi, unit = RANGES[key]
    if not lo <= value <= hi:
        raise BadValue(name, Brief(raw), f"is outside {what or 'the range'} {lo:g} to {hi:g} "
                       f"{unit}")
    return value


def option_label(key: str) -> str:
    """How a key is named on the command line: ``--gain-error``."""
    return f"--{key}"


@dataclass(frozen=True)
class Requirement:
    """One amplifier stage to build. SI units; temperatures in °C.

    ``gain`` is the signal-gain magnitude in V/V (a follower has 1). Exactly one of
    ``vin_pk`` and ``vout_pk`` gives the signal's peak amplitude. ``margin`` (>= 1)
    makes every need stricter: requirements on a part grow by it, allowed errors
    shrink by it.
    """

    topology: Topology
    gain: float
    rail_pos: float
    rail_neg: float
    freq_hz: float
    vin_pk: float | None = None
    vout_pk: float | None = None
    ref_v: float | None = None
    load_ohm: float | None = None
    source_ohm: float = 0.0
    gain_error: float = 0.01
    tolerance: float = 0.01  # of the gain-setting resistors (the budget includes it)
    tolerance_rule: Literal["worst", "rss"] = "worst"  # worst case, or root-sum-square
    phase_error_deg: float | None = None  # largest phase shift at f from the ideal, degrees
    offset_max_v: float | None = None
    noise_max_v: float | None = None
    temp_min_c: float = T_REF_C
    temp_max_c: float = T_REF_C
    qty: int = 1
    margin: float = 1.25
    rf_ohm: float = 10e3
    rf_pinned: bool = False  # rf was given: the designed network keeps it, exactly
    # the gain leg as built (rg: the inverting stage's input resistor, also written
    # --rin; the non-inverting stage's ground leg; r1 = r3 of the difference stage),
    # kept exactly; None: designed
    rg_ohm: float | None = None
    # least input impedance the source may see (inverting, difference), Ω; None: the
    # designer's default max(10 kΩ, 10 x the source) (picker.design.netlimits)
    zin_ohm: float | None = None
    network: Mapping[str, float] | None = field(default=None, hash=False)
    # part values to take where a part leaves them blank (field -> SI value), by the
    # user's explicit choice; every output marks them as assumed
    assume: Mapping[str, float] = field(default_factory=dict, hash=False)
    mains: bool = False
    light_load_swing: bool = False  # a part without Rsat swings as at light load (assumed)
    cload_f: float = 0.0  # capacitance at the output to the reference, F
    # input common-mode level or range of a difference stage (low, high), V; None: ref
    vcm: tuple[float, float] | None = None
    cmrr_min_db: float | None = None  # required common-mode rejection, dB
    phase_margin_deg: float = 45.0  # least phase margin of the loop, degrees
    # rail ripple (peak amplitude V, frequency Hz) for the supply-rejection budget
    ripple: tuple[float, float] | None = None
    # second-order filter stages (picker.stages.filterbase): corner or centre frequency,
    # response shape, chebyshev pass-band ripple (dB), band-pass -3 dB bandwidth (Hz)
    f0_hz: float | None = None
    response: str | None = None
    passband_ripple_db: float | None = None
    bandwidth_hz: float | None = None
    cap_tolerance: float = 0.05  # of the filter's capacitors (C0G/NP0 film and ceramic 5%)
    cap_series: str = "E12"  # the IEC 60063 series capacitors are chosen from
    response_error: float = 0.02  # how far the op-amp may move f0, Q and gain (ratio)
    # level-shift stage: the input range (low, high) and the output levels at its two
    # ends (at low, at high; a falling pair is an inverting stage), V from ground; the
    # voltage the offset divider hangs from (None: the positive rail)
    vin_range: tuple[float, float] | None = None
    vout_range: tuple[float, float] | None = None
    shift_source_v: float | None = None

    @property
    def is_filter(self) -> bool:
        """True for a second-order filter stage (it has a section, not just a gain)."""
        from picker.stages.filterbase import FilterType

        return isinstance(kind(self.topology), FilterType)

    def __post_init__(self) -> None:
        self.validate(option_label)

    # -- derived values -------------------------------------------------------------
    @property
    def vout(self) -> float:
        """Peak output amplitude around the reference, V."""
        if self.vout_pk is not None:
            return self.vout_pk
        assert self.vin_pk is not None
        return self.vin_pk * self.gain

    @property
    def vin(self) -> float:
        """Peak input amplitude around the reference, V (differential for difference)."""
        if self.vin_pk is not None:
            return self.vin_pk
        assert self.vout_pk is not None
        return self.vout_pk / self.gain

    @property
    def ref(self) -> float:
        """The DC level the signal rides on, V (mid-rail when not given)."""
        return (self.rail_pos + self.rail_neg) / 2 if self.ref_v is None else self.ref_v

    @property
    def span(self) -> float:
        """Total supply span V+ - V-, V."""
        return self.rail_pos - self.rail_neg

    @property
    def drift_span_c(self) -> float:
        """Largest distance of the ambient range from 25 °C, where offsets are specified."""
        return max(abs(self.temp_min_c - T_REF_C), abs(self.temp_max_c - T_REF_C))

    @property
    def temp_max_k(self) -> float:
        """Hottest ambient in kelvin (resistor thermal noise is taken there)."""
        return self.temp_max_c + 273.15

    @property
    def cautions(self) -> list[str]:
        """Safety cautions this stage calls for (rendered with every result)."""
        out = []
        if self.span > ELV_DC_V:
            out.append(
                f"Caution: the rails span {self.span:g} V, beyond the {ELV_DC_V:g} V DC "
                "extra-low-voltage limit; touchable parts can be hazardous. Follow local "
                "electrical codes and have the design reviewed under licensed practice."
            )
        if self.mains:
            out.append(
                "Caution: the input comes from mains. Isolation, creepage and protection "
                "are beyond what picker checks; follow local electrical codes and licensed "
                "practice, and do not build it without qualified review."
            )
        return out

    def with_changes(self, **changes: Any) -> Requirement:
        return replace(self, **changes)

    # -- validation -----------------------------------------------------------------
    def validate(self, label: Label) -> None:
        """Raise BadRequirement (one line naming the option) if no stage can do this."""
        t = self.topology
        if t not in kinds():
            raise BadRequirement(f"{label('topology')}: {t!r} is not a topology; use one of "
                                 + ", ".join(kinds()))
        if not (math.isfinite(self.gain) and self.gain > 0):
            raise BadRequirement(f"{label('gain')}: {self.gain!r} is not a gain above zero")
        if t == "follower" and not math.isclose(self.gain, 1.0, rel_tol=1e-9):
            raise BadRequirement(
                f"{label('gain')}: a follower has gain 1, not {self.gain:g}; "
                "use --topology non-inverting for gain above 1")
        if t == "non-inverting" and self.gain < 1:
            raise BadRequirement(
                f"{label('gain')}: {self.gain:g} V/V is below 1, which a non-inverting stage "
                "cannot make; use --topology inverting (or a divider before a follower)")
        if not (self.freq_hz > 0 and math.isfinite(self.freq_hz)):
            raise BadRequirement(f"{label('freq')}: {self.freq_hz!r} Hz; the top signal "
                                 "frequency must be above zero, e.g. --freq 20kHz")
        if (self.vin_pk is None) == (self.vout_pk is None):
            which = "both were given" if self.vin_pk is not None else "neither was given"
            raise BadRequirement(f"{label('vin')}/{label('vout')}: give exactly one signal "
                                 f"amplitude ({which}), e.g. --vin 0.5Vpk")
        if not (self.rail_pos > self.rail_neg):
            raise BadRequirement(f"{label('rails')}: the positive rail must be above the "
                                 "negative; e.g. --rails ±12")
        ref = self.ref
        if not (self.rail_neg <= ref <= self.rail_pos):
            raise BadRequirement(
                f"{label('ref')}: {ref:g} V lies outside the rails "
                f"{self.rail_pos:+g}/{self.rail_neg:+g} V; choose a level between them")
        out_name = label("vout") if self.vout_pk is not None else label("vin")
        if ref + self.vout > self.rail_pos or ref - self.vout < self.rail_neg:
            raise BadRequirement(
                f"{out_name}: an output of {self.vout:g} Vpk around {ref:g} V goes beyond the "
                f"rails {self.rail_pos:+g}/{self.rail_neg:+g} V; lower the amplitude or "
                "widen the rails")
        if t in ("non-inverting", "follower") and (
            ref + self.vin > self.rail_pos or ref - self.vin < self.rail_neg
        ):
            raise BadRequirement(
                f"{label('vin')}: an input of {self.vin:g} Vpk around {ref:g} V goes beyond "
                "the rails; lower the amplitude or widen the rails")
        if not (0 <= self.tolerance < 0.5):
            raise BadRequirement(f"{label('tolerance')}: {self.tolerance!r} is not a resistor "
                                 "tolerance; give e.g. 1% or 0.1%")
        if not (0 < self.gain_error < 1):
            raise BadRequirement(f"{label('gain-error')}: {self.gain_error!r} must lie between "
                                 "0 and 100%, e.g. --gain-error 1%")
        if self.load_ohm is not None and not self.load_ohm > 0:
            raise BadRequirement(f"{label('load')}: a load must be above 0 Ω (omit for none)")
        if not (self.source_ohm >= 0 and math.isfinite(self.source_ohm)):
            raise BadRequirement(f"{label('source')}: the source resistance must be >= 0 Ω")
        if not (self.rf_ohm > 0 and math.isfinite(self.rf_ohm)):
            raise BadRequirement(f"{label('rf')}: the feedback resistor must be above 0 Ω")
        if self.rg_ohm is not None and t == "follower":
            raise BadRequirement(f"{label('rg')}: a follower has no gain leg; omit it (--rf "
                                 "alone gives its bias-balancing feedback resistor)")
        if self.rg_ohm is not None and not (self.rg_ohm > 0 and math.isfinite(self.rg_ohm)):
            raise BadRequirement(f"{label('rg')}: the gain leg must be above 0 Ω")
        if self.zin_ohm is not None and t not in ("inverting", "difference"):
            raise BadRequirement(f"{label('zin')}: a {t} stage's input impedance is the "
                                 "op-amp's own, not set by resistors; use --zin with inverting "
                                 "or difference")
        for name, v in (("offset-max", self.offset_max_v), ("noise-max", self.noise_max_v)):
            if v is not None and not v > 0:
                raise BadRequirement(f"{label(name)}: the limit must be above 0 V")
        if not (self.margin >= 1 and math.isfinite(self.margin)):
            raise BadRequirement(f"{label('margin')}: {self.margin!r} is below 1; a margin of "
                                 "1 gives the bare minimums, 1.25 asks 25% more")
        if self.qty < 1:
            raise BadRequirement(f"{label('qty')}: at least one channel is needed")
        if self.temp_min_c > self.temp_max_c:
            raise BadRequirement(f"{label('temp')}: write the range low..high, e.g. -40..85C")
        if t != "difference":
            for name, given in (("vcm", self.vcm), ("cmrr", self.cmrr_min_db)):
                if given is not None:
                    raise BadRequirement(
                        f"{label(name)}: applies to the difference stage only (the {t} stage "
                        "has no common-mode input to reject); omit it")
        if self.vcm is not None:
            lo, hi = self.vcm
            if lo > hi:
                raise BadRequirement(f"{label('vcm')}: write the range low..high, e.g. -5..5V")
            if lo < self.rail_neg - 1e3 or hi > self.rail_pos + 1e3:
                raise BadRequirement(f"{label('vcm')}: {lo:g}..{hi:g} V is not a common-mode "
                                     "level a stage on these rails sees; check the units")
        self._validate_filter(label)
        self._validate_levels(label)
        if not (self.cload_f >= 0 and math.isfinite(self.cload_f)):
            raise BadRequirement(f"{label('cload')}: the load capacitance must be >= 0 F")
        if not (0 < self.phase_margin_deg < 90):
            raise BadRequirement(f"{label('phase-margin')}: {self.phase_margin_deg!r}° must lie "
                                 "between 0° and 90°, e.g. --phase-margin 45deg")
        if self.network is not None:
            allowed = kind(t).network_names
            for name, value in self.network.items():
                if name not in allowed:
                    raise BadRequirement(
                        f"{label('network')}: {name!r} is not a resistor of the {t} stage; "
                        f"use {', '.join(allowed)}")
                if not value > 0 and not (name in ("rf", "rp") and value == 0):
                    raise BadRequirement(f"{label('network')}: {name} = {value!r} Ω; "
                                         "resistors must be above 0 Ω")
            missing = [n for n in kind(t).required if n not in self.network]
            if missing:
                raise BadRequirement(f"{label('network')}: the {t} stage needs "
                                     f"{', '.join(missing)} as well")

    def _validate_filter(self, label: Label) -> None:
        """The filter keys: given only for a filter, complete and consistent for one."""
        t = self.topology
        given = {"f0": self.f0_hz, "response": self.response,
                 "passband-ripple": self.passband_ripple_db, "bandwidth": self.bandwidth_hz}
        if not self.is_filter:
            for name, v in given.items():
                if v is not None:
                    raise BadRequirement(f"{label(name)}: applies to the filter stages only "
                                         f"(the {t} stage has no corner frequency); omit it")
            return
        if self.f0_hz is None or not (self.f0_hz > 0 and math.isfinite(self.f0_hz)):
            raise BadRequirement(f"{label('f0')}: missing; give the section's corner (or "
                                 "centre) frequency, e.g. --f0 1kHz")
        if t == "mfb-bandpass":
            if self.response is not None or self.passband_ripple_db is not None:
                name = "response" if self.response is not None else "passband-ripple"
                raise BadRequirement(f"{label(name)}: a second-order band-pass has one shape, "
                                     "set by its Q = f0/bandwidth; give --bandwidth instead")
            if self.bandwidth_hz is None or not self.bandwidth_hz > 0:
                raise BadRequirement(f"{label('bandwidth')}: missing; give the band-pass "
                                     "section's -3 dB bandwidth, e.g. --bandwidth 100Hz")
            q = self.f0_hz / self.bandwidth_hz
            if self.gain >= 2 * q * q:
                raise BadRequirement(
                    f"{label('gain')}: {self.gain:g} V/V at the centre needs Q above "
                    f"{math.sqrt(self.gain / 2):.4g}, but f0/bandwidth gives {q:.4g}; the "
                    f"multiple-feedback band-pass reaches at most 2Q² = {2 * q * q:.4g}; "
                    "lower --gain or narrow --bandwidth")
            return
        if self.bandwidth_hz is not None:
            raise BadRequirement(f"{label('bandwidth')}: applies to mfb-bandpass only; a "
                                 f"{t} section is set by --f0 and --response; omit it")
        if self.response is not None and self.response not in RESPONSES:
            raise BadRequirement(f"{label('response')}: {self.response!r} is not a response "
                                 "shape; use one of " + ", ".join(RESPONSES))
        if self.response == "chebyshev":
            if self.passband_ripple_db is None:
                raise BadRequirement(f"{label('passband-ripple')}: missing; a chebyshev "
                                     "response needs its pass-band ripple, e.g. "
                                     "--passband-ripple 0.5dB")
        elif self.passband_ripple_db is not None:
            raise BadRequirement(f"{label('passband-ripple')}: applies to --response "
                                 "chebyshev only; omit it")
        if t.startswith("vcvs-") and self.gain < 1:
            raise BadRequirement(f"{label('gain')}: {self.gain:g} V/V is below 1, which a "
                                 f"{t} section (a non-inverting amplifier) cannot make; use "
                                 "mfb-lowpass, or a divider before the section")

    def _validate_levels(self, label: Label) -> None:
        """The level-shift keys: both ranges for a level-shift stage, none for others."""
        if self.topology != "level-shift":
            for name, v in (("vin-range", self.vin_range), ("vout-range", self.vout_range),
                            ("shift-source", self.shift_source_v)):
                if v is not None:
                    raise BadRequirement(
                        f"{label(name)}: describes a level-shift stage; use --topology "
                        f"level-shift (or omit --topology), not {self.topology}")
            return
        for name, v in (("vin-range", self.vin_range), ("vout-range", self.vout_range)):
            if v is None:
                raise BadRequirement(f"{label(name)}: missing; a level-shift stage needs the "
                                     "input range and the output levels at its ends, e.g. "
                                     "--vin-range 0..80mV --vout-range 0.25..4.75V")
        assert self.vin_range is not None and self.vout_range is not None
        _range_errors(self.vin_range, self.vout_range, label)
        c, d = self.vout_range
        if min(c, d) < self.rail_neg or max(c, d) > self.rail_pos:
            raise BadRequirement(
                f"{label('vout-range')}: {c:g}..{d:g} V goes beyond the rails "
                f"{self.rail_pos:+g}/{self.rail_neg:+g} V; narrow it or widen the rails")
        if self.shift_source_v is not None and not (
                self.shift_source_v > 0 and math.isfinite(self.shift_source_v)):
            raise BadRequirement(f"{label('shift-source')}: the divider's source must be a "
                                 "positive voltage, e.g. --shift-source 2.5V")

    # -- construction from user text ---------------------------------------------------
    @classmethod
    def from_mapping(cls, d: Mapping[str, Any], where: str = "--") -> Requirement:
        """Build from user text (or numbers) under requirement keys.

        ``where`` prefixes each key in error messages: ``"--"`` gives ``--freq: ...``,
        ``"stage.toml: "`` gives ``stage.toml: freq: ...``.
        """
        return _build({normal_key(k, where): (v, where) for k, v in d.items() if v is not None})


def normal_key(key: str, where: str = "--") -> str:
    """'gain_error', '--gain-error' -> 'gain-error'; unknown keys are an error."""
    k = key.strip().lstrip("-").replace("_", "-").lower()
    if k not in KEYS:
        raise BadRequirement(f"{where}{key}: not a requirement key; known keys: "
                             + ", ".join(KEYS))
    return k


def _temp_range(text: Any, name: str) -> tuple[float, float]:
    lo, hi = _temps(text, name)
    return _ranged("temp", lo, name, text), _ranged("temp", hi, name, text)


def _temps(text: Any, name: str) -> tuple[float, float]:
    if isinstance(text, list | tuple):
        if len(text) != 2:
            raise BadValue(name, Brief(text), "needs two temperatures, low and high")
        lo, hi = (parse(t, "temperature", name) for t in text)
        return lo, hi
    if isinstance(text, int | float) and not isinstance(text, bool):
        v = parse(text, "temperature", name)
        return v, v
    if not isinstance(text, str):
        raise BadValue(name, Brief(text), "is not a temperature or a range, e.g. -40..85C")
    s = text
    if ".." in s:
        a, b = s.split("..", 1)
        unit = "".join(ch for ch in b if not (ch.isdigit() or ch in "+-. "))
        a = a if any(ch.isalpha() for ch in a) else a + unit
        return parse(a, "temperature", name), parse(b, "temperature", name)
    v = parse(s, "temperature", name)
    return v, v


def _vcm(value: Any, name: str) -> tuple[float, float]:
    """A common-mode level (``2.5V``) or range (``-5..5V``, ``[-5, 5]``), V."""
    if isinstance(value, list | tuple):
        if len(value) != 2:
            raise BadValue(name, Brief(value), "needs two levels, low and high, e.g. [-5, 5]")
        lo, hi = (parse(v, "voltage", name) for v in value)
    elif isinstance(value, str) and ".." in value:
        a, b = value.split("..", 1)
        unit = "".join(ch for ch in b if ch.isalpha())
        a = a if any(ch.isalpha() for ch in a) else a + unit
        lo, hi = parse(a, "voltage", name), parse(b, "voltage", name)
    else:
        lo = hi = parse(value, "voltage", name)
    return lo, hi


def _ripple(value: Any, name: str) -> tuple[float, float]:
    """Rail ripple ``50mVpp@100Hz`` (or a TOML table {amplitude, freq}): (peak V, Hz)."""
    if isinstance(value, Mapping):
        amp, freq = value.get("amplitude"), value.get("freq")
        if amp is None or freq is None:
            raise BadValue(name, Brief(value), "needs amplitude and freq, e.g. "
                           "{amplitude = '50mVpp', freq = '100Hz'}")
    elif isinstance(value, str) and "@" in value:
        amp, freq = (t.strip() for t in value.split("@", 1))
    else:
        raise BadValue(name, Brief(value), "is not amplitude@frequency, e.g. 50mVpp@100Hz")
    v = _ranged("ripple", parse_amplitude(amp, name), name, value)
    f = _ranged("ripple-freq", parse(freq, "frequency", name, allow_zero=False), name, value)
    return v, f


def _bool(value: Any, name: str) -> bool:
    if isinstance(value, bool):
        return value
    s = str(value).strip().lower() if isinstance(value, str | int) else ""
    if s in ("1", "true", "yes", "on"):
        return True
    if s in ("0", "false", "no", "off"):
        return False
    raise BadValue(name, Brief(value), "is not yes or no")


def _optional(value: Any) -> bool:
    return isinstance(value, str) and value.strip().lower() in ("none", "open", "")


def _rms_stripped(value: Any) -> Any:
    if isinstance(value, str) and value.strip().lower().endswith("rms"):
        return value.strip()[:-3]
    return value


def _network(value: Any, name: str) -> dict[str, float]:
    if not isinstance(value, Mapping):
        raise BadValue(name, Brief(value),
                       "is not a table of resistors, e.g. {rf = '47k', rg = '4k7'}")
    out: dict[str, float] = {}
    for k, v in value.items():
        key = str(k).lower()
        if isinstance(v, str) and v.strip().lower() in ("inf", "open"):
            out[key] = math.inf
        elif key.startswith("c"):  # a filter's capacitor (c1, c2)
            out[key] = _ranged("network-c", parse(v, "capacitance", f"{name}.{key}",
                                                  allow_zero=False), f"{name}.{key}", v)
        else:
            r = parse(v, "resistance", f"{name}.{key}")
            out[key] = r if r == 0 else _ranged("network", r, f"{name}.{key}", v)
    return out


#: Part fields a requirement may assume (technical values, not stock or text).
ASSUMABLE = ("gbw_hz", "slew_v_per_s", "aol_v_per_v", "rin_ohm", "rout_ohm", "iout_a",
             "ib_a", "ios_a", "vos_v", "drift_v_per_c", "en_v_per_rthz", "in_a_per_rthz",
             "out_head_pos_v", "out_head_neg_v", "cm_head_pos_v", "cm_head_neg_v",
             "supply_min_v", "supply_max_v", "channels", "out_rsat_pos_ohm", "out_rsat_neg_ohm",
             "pm_unity_deg", "min_noise_gain", "cin_diff_f", "cin_cm_f", "vdiff_max_v",
             "cmrr_db", "psrr_db", "theta_ja_c_per_w", "tj_max_c")


def _assume(value: Any, name: str) -> dict[str, float]:
    """``rout=100,rin=1meg`` (or a TOML table, or a list of ``field=value``) -> SI values."""
    from picker.store.records import convert, field_name

    if isinstance(value, Mapping):
        pairs = [(str(k), v) for k, v in value.items()]
    else:
        items = value if isinstance(value, list | tuple) else str(value).split(",")
        pairs = []
        for item in items:
            key, eq, raw = str(item).partition("=")
            if not eq or not key.strip() or not raw.strip():
                raise BadValue(name, item, "is not field=value, e.g. --assume rout=100")
            pairs.append((key.strip(), raw.strip()))
    out: dict[str, float] = {}
    for key, raw in pairs:
        field_ = field_name(key, name)
        if field_ not in ASSUMABLE:
            raise BadValue(name, key, "cannot be assumed; assume a technical value such as "
                           "rout, rin, gbw, iout or en")
        v = convert(field_, raw, f"{name} {key}")
        if not isinstance(v, int | float):
            raise BadValue(name, raw, f"is not a value for {key}")
        out[field_] = float(v)
    return out


# The legs that may be open (inf) or shorted (0) without leaving the stage undefined:
# an open rg makes a non-inverting stage a follower; a shorted rf makes it (or a
# follower) unity gain; a shorted rp is a plain wire. Any other open or shorted leg
# leaves a node floating or the gain at 0 or infinity.
_OPEN_OK: dict[str, tuple[str, ...]] = {"non-inverting": ("rg",), "vcvs-lowpass": ("rg",),
                                         "vcvs-highpass": ("rg",)}
_SHORT_OK: dict[str, tuple[str, ...]] = {
    "inverting": ("rp",), "non-inverting": ("rf", "rp"), "follower": ("rf", "rp"),
    "vcvs-lowpass": ("rf",), "vcvs-highpass": ("rf",),
}


def _check_network(topology: str, network: Mapping[str, float], name: str) -> None:
    for leg, r in network.items():
        if math.isinf(r) and leg not in _OPEN_OK.get(topology, ()):
            raise BadValue(f"{name}.{leg}", "inf", f"cannot be open in a {topology} stage; "
                           "give a resistance")
        if r == 0 and leg not in _SHORT_OK.get(topology, ()):
            raise BadValue(f"{name}.{leg}", r, f"cannot be 0 Ω in a {topology} stage; give a "
                           "resistance above 0")


def _build(values: Mapping[str, tuple[Any, str]]) -> Requirement:
    """Parse every (value, where) under its key and make the requirement."""

    # a key nobody gave is named as in the design file when there is one
    files = [w for _, w in values.values() if w != "--"]
    missing_where = files[0] if files else "--"

    def lab(key: str) -> str:
        where = values[key][1] if key in values else missing_where
        return f"{where}{key}"

    kw: dict[str, Any] = {}
    for key, (raw, _) in values.items():
        name = lab(key)
        if key == "topology":
            t = raw.strip().lower().replace("_", "-") if isinstance(raw, str) else ""
            t = {"noninverting": "non-inverting", "non-inv": "non-inverting",
                 "inv": "inverting", "buffer": "follower", "diff": "difference"}.get(t, t)
            if t not in kinds():
                raise BadValue(name, Brief(raw),
                               "is not a topology; use one of " + ", ".join(kinds()))
            kw["topology"] = t
        elif key == "gain":
            kw["gain"] = _ranged(key, parse(raw, "gain", name, allow_zero=False), name, raw)
        elif key in ("vin", "vout"):
            kw[KEYS[key]] = _ranged(key, parse_amplitude(raw, name), name, raw)
        elif key == "freq":
            kw["freq_hz"] = _ranged(key, parse(raw, "frequency", name, allow_zero=False),
                                    name, raw)
        elif key == "ref":
            kw["ref_v"] = None if _optional(raw) else parse(raw, "voltage", name)
        elif key == "load":
            kw["load_ohm"] = None if _optional(raw) else _ranged(
                key, parse(raw, "resistance", name, allow_zero=False), name, raw)
        elif key == "source":
            kw["source_ohm"] = _ranged(key, parse(raw, "resistance", name), name, raw)
        elif key == "rails":
            if isinstance(raw, list | tuple):
                if len(raw) != 2:
                    raise BadValue(name, Brief(raw), "needs two rails, e.g. [12, -12]")
                a, b = (parse(r, "voltage", name) for r in raw)
                kw["rail_pos"], kw["rail_neg"] = check_rails(max(a, b), min(a, b), name,
                                                             Brief(raw))
            else:
                kw["rail_pos"], kw["rail_neg"] = parse_rails(raw, name)
        elif key == "gain-error":
            kw["gain_error"] = _ranged(key, parse(raw, "ratio", name, allow_zero=False),
                                       name, raw)
        elif key == "tolerance":
            kw["tolerance"] = parse(raw, "ratio", name)
        elif key == "tolerance-rule":
            rule = str(raw).strip().lower()
            if rule not in ("worst", "rss"):
                raise BadValue(name, raw, "is not a tolerance rule; use worst or rss")
            kw["tolerance_rule"] = rule
        elif key == "phase-error":
            kw["phase_error_deg"] = None if _optional(raw) else parse(
                raw, "angle", name, allow_negative=False, allow_zero=False)
        elif key in ("offset-max", "noise-max"):
            kw[KEYS[key]] = None if _optional(raw) else _ranged(key, parse(
                _rms_stripped(raw), "voltage", name, allow_negative=False, allow_zero=False),
                name, raw)
        elif key == "temp":
            kw["temp_min_c"], kw["temp_max_c"] = _temp_range(raw, name)
        elif key == "qty":
            kw["qty"] = int(_ranged(key, parse(raw, "count", name, allow_zero=False), name, raw))
        elif key == "margin":
            if isinstance(raw, bool) or not isinstance(raw, str | int | float):
                raise BadValue(name, Brief(raw), "is not a number, e.g. 1.25")
            kw["margin"] = as_number(str(raw), name)
            if kw["margin"] > RANGES[key][1]:  # below 1 is explained by validate()
                _ranged(key, kw["margin"], name, raw)
        elif key == "rf":
            kw["rf_ohm"] = _ranged(key, parse(raw, "resistance", name, allow_zero=False),
                                   name, raw)
            kw["rf_pinned"] = True
        elif key in ("rg", "rin"):
            if key == "rin" and "rg" in values:
                raise BadRequirement(f"{name}: --rin and --rg name the same resistor of an "
                                     "inverting stage; give one of them")
            kw["rg_ohm"] = _ranged(key, parse(raw, "resistance", name, allow_zero=False),
                                   name, raw)
        elif key == "zin":
            kw["zin_ohm"] = None if _optional(raw) else _ranged(
                key, parse(raw, "resistance", name, allow_zero=False), name, raw)
        elif key in ("mains", "light-load-swing"):
            kw[KEYS[key]] = _bool(raw, name)
        elif key == "network":
            kw["network"] = _network(raw, name)
        elif key == "assume":
            kw["assume"] = _assume(raw, name)
        elif key == "cload":
            kw["cload_f"] = 0.0 if _optional(raw) else _ranged(
                key, parse(raw, "capacitance", name), name, raw)
        elif key == "vcm":
            kw["vcm"] = None if _optional(raw) else _vcm(raw, name)
        elif key == "cmrr":
            kw["cmrr_min_db"] = None if _optional(raw) else _ranged(
                key, parse(raw, "decibel", name, allow_negative=False), name, raw)
        elif key == "phase-margin":
            kw["phase_margin_deg"] = _ranged(key, parse(raw, "angle", name, allow_zero=False),
                                             name, raw)
        elif key == "ripple":
            kw["ripple"] = None if _optional(raw) else _ripple(raw, name)
        elif key in ("f0", "bandwidth"):
            kw[KEYS[key]] = _ranged(key, parse(raw, "frequency", name, allow_zero=False),
                                    name, raw)
        elif key == "response":
            r = raw.strip().lower() if isinstance(raw, str) else ""
            if r not in RESPONSES:
                raise BadValue(name, Brief(raw), "is not a response shape; use one of "
                               + ", ".join(RESPONSES))
            kw["response"] = r
        elif key == "passband-ripple":
            kw["passband_ripple_db"] = _ranged(key, parse(raw, "decibel", name,
                                                          allow_negative=False), name, raw)
        elif key in ("cap-tolerance", "response-error"):
            kw[KEYS[key]] = _ranged(key, parse(raw, "ratio", name), name, raw)
        elif key in ("vin-range", "vout-range"):
            kw[KEYS[key]] = _level_range(raw, name, key)
        elif key == "shift-source":
            kw["shift_source_v"] = None if _optional(raw) else _ranged(
                key, parse(raw, "voltage", name, allow_zero=False), name, raw)
        elif key == "cap-series":
            from picker.design.series import parse_series

            cs = parse_series(raw if isinstance(raw, str) else str(raw), name)
            if cs not in ("E3", "E6", "E12", "E24"):
                raise BadValue(name, Brief(raw), "is not a capacitor series; use E6, E12 "
                               "or E24 (capacitors are not made in E48 and finer)")
            kw["cap_series"] = cs
    if "rail_pos" not in kw:
        raise BadRequirement(f"{lab('rails')}: missing; give the supply rails, e.g. --rails ±12 "
                             "or --rails +5/0")
    if "vin_range" in kw or "vout_range" in kw:
        _from_ranges(kw, values, lab)
    if "topology" not in kw:
        raise BadRequirement(f"{lab('topology')}: missing; use one of " + ", ".join(kinds()))
    filt = kw["topology"] in ("vcvs-lowpass", "vcvs-highpass", "mfb-lowpass", "mfb-bandpass")
    if filt and "response" not in kw and kw["topology"] != "mfb-bandpass":
        kw["response"] = "butterworth"
    if filt and "f0_hz" not in kw:
        raise BadRequirement(f"{lab('f0')}: missing; give the section's corner (or centre) "
                             "frequency, e.g. --f0 1kHz")
    if filt and "freq_hz" not in kw:
        kw["freq_hz"] = 10 * kw["f0_hz"]  # the top of the band a section acts on
    if "gain" not in kw:
        if kw["topology"] != "follower" and not filt:
            raise BadRequirement(f"{lab('gain')}: missing; give the signal gain, e.g. --gain 10 "
                                 "or --gain 20dB")
        kw["gain"] = 1.0
    if "rin" in values and kw["topology"] != "inverting":
        raise BadRequirement(f"{lab('rin')}: --rin is the input resistor of an inverting "
                             f"stage; the {kw['topology']} stage's gain leg is --rg")
    if "freq_hz" not in kw:
        raise BadRequirement(f"{lab('freq')}: missing; give the top signal frequency, "
                             "e.g. --freq 20kHz")
    # built without __post_init__ so that validation names each value where it was written
    req = object.__new__(Requirement)
    for f in fields(Requirement):
        default = f.default_factory() if f.default_factory is not MISSING else f.default
        object.__setattr__(req, f.name, kw.get(f.name, default))
    req.validate(lab)
    if req.network is not None:
        _check_network(req.topology, req.network, lab("network"))
    return req


def _range_errors(vin_range: tuple[float, float], vout_range: tuple[float, float],
                  label: Label) -> None:
    """BadRequirement for an inverted or empty input range or an empty output range."""
    (a, b), (c, d) = vin_range, vout_range
    if a > b:
        raise BadRequirement(f"{label('vin-range')}: {a:g}..{b:g} V is inverted; write the "
                             "input range low..high (a falling --vout-range makes an "
                             "inverting stage)")
    if a == b:
        raise BadRequirement(f"{label('vin-range')}: {a:g}..{b:g} V is empty; give two "
                             "different levels, low..high")
    if c == d:
        raise BadRequirement(f"{label('vout-range')}: {c:g}..{d:g} V is empty; give the "
                             "output at the input's low end, then at its high end")


def _level_range(value: Any, name: str, key: str) -> tuple[float, float]:
    """Two levels as written, in order: ``0..80mV``, ``4.75..0.25V``, ``[0, 0.08]``, V."""
    if isinstance(value, list | tuple):
        if len(value) != 2:
            raise BadValue(name, Brief(value), "needs two levels, e.g. [0, 0.08]")
        a, b = (parse(v, "voltage", name) for v in value)
    elif isinstance(value, str) and ".." in value:
        left, right = value.split("..", 1)
        unit = "".join(ch for ch in right if ch.isalpha())
        left = left if any(ch.isalpha() for ch in left) else left + unit
        a, b = parse(left, "voltage", name), parse(right, "voltage", name)
    else:
        raise BadValue(name, Brief(value), "is not a range; write two levels low..high, "
                       "e.g. 0..80mV")
    return _ranged(key, a, name, value), _ranged(key, b, name, value)


def _from_ranges(kw: dict[str, Any], values: Mapping[str, tuple[Any, str]],
                 lab: Label) -> None:
    """A level-shift stage from its ranges: topology, gain magnitude, the output's middle
    as the reference and half its span as the amplitude (picker.stages.levelshift)."""
    both = [k for k in ("vin-range", "vout-range") if k in values]
    if len(both) == 1:
        other = "vout-range" if both[0] == "vin-range" else "vin-range"
        raise BadRequirement(f"{lab(both[0])}: needs --{other} as well (the input range and "
                             "the output levels at its two ends), e.g. --vin-range 0..80mV "
                             "--vout-range 0.25..4.75V")
    for key in ("vin", "vout", "ref"):
        if key in values:
            raise BadRequirement(f"{lab(key)}: the ranges set the levels and the amplitude; "
                                 f"omit --{key} with --vin-range/--vout-range")
    t = kw.setdefault("topology", "level-shift")
    if t != "level-shift":
        raise BadRequirement(f"{lab(both[0])}: describes a level-shift stage; use --topology "
                             f"level-shift (or omit --topology), not {t}")
    _range_errors(kw["vin_range"], kw["vout_range"], lab)
    (a, b), (c, d) = kw["vin_range"], kw["vout_range"]
    if min(c, d) < kw["rail_neg"] or max(c, d) > kw["rail_pos"]:
        raise BadRequirement(
            f"{lab('vout-range')}: {c:g}..{d:g} V goes beyond the rails "
            f"{kw['rail_pos']:+g}/{kw['rail_neg']:+g} V; narrow it or widen the rails")
    g = abs(d - c) / (b - a)
    if "gain" in kw and not math.isclose(kw["gain"], g, rel_tol=RANGE_GAIN_AGREEMENT):
        raise BadRequirement(
            f"{lab('gain')}: {kw['gain']:.6g} V/V disagrees with the ranges' {g:.6g} V/V "
            f"({abs(d - c):.6g} V out over {b - a:.6g} V in); omit --gain or correct it")
    _ranged("gain", g, lab("vout-range"), f"{c:g}..{d:g} V",
            "the gain the ranges make,")
    kw["gain"] = g
    kw["vout_pk"] = abs(d - c) / 2
    kw["ref_v"] = (c + d) / 2


def read_design(path: str | Path) -> dict[str, Any]:
    """The raw keys and values of a TOML design file (keys normalised, not parsed)."""
    p = Path(path)
    where = f"{p.name}: "
    try:
        with p.open("rb") as f:
            data = tomllib.load(f)
    except FileNotFoundError:
        raise BadValue("--design", str(path), "does not exist; give the path of a TOML "
                       "design file") from None
    except tomllib.TOMLDecodeError as exc:
        raise BadRequirement(f"{where}not valid TOML: {exc}") from None
    except RecursionError:  # arrays or tables nested thousands deep
        raise BadRequirement(f"{where}nests arrays or tables too deeply to be a design "
                             "file; write each value plainly, e.g. gain = 10") from None
    except OSError as exc:
        raise BadValue("--design", str(path), f"cannot be read ({exc.strerror})") from None
    except ValueError:  # a NUL in the path, or bytes that are not UTF-8
        raise BadValue("--design", str(path)[:60], "is not a readable UTF-8 TOML file") from None
    if "stage" in data and isinstance(data["stage"], Mapping):
        data = {**{k: v for k, v in data.items() if k != "stage"}, **data["stage"]}
    return {normal_key(k, where): v for k, v in data.items()}


def requirement_from(options: Mapping[str, Any], design: str | Path | None = None) -> Requirement:
    """Merge a design file (if any) with command-line options; options win.

    ``options`` holds command-line values under requirement keys (None = not given).
    """
    return _build(given(options, design))


def given(options: Mapping[str, Any], design: str | Path | None = None
          ) -> dict[str, tuple[Any, str]]:
    """The requirement as given: key -> (value as written, where), the design file's raw
    values overridden by the options' (None or () = not given)."""
    values: dict[str, tuple[Any, str]] = {}
    if design is not None:
        where = f"{Path(design).name}: "
        values.update({k: (v, where) for k, v in read_design(design).items()})
    for k, v in options.items():
        if v is not None and v != ():
            values[normal_key(k)] = (v, "--")
    return values


def load_design(path: str | Path) -> Requirement:
    """The requirement a TOML design file describes (same keys as the options)."""
    return requirement_from({}, path)


__all__ = [
    "ELV_DC_V", "KEYS", "TOPOLOGIES", "Requirement", "Topology",
    "given", "load_design", "read_design", "requirement_from",
]
