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

from picker import keys as _keys
from picker.errors import BadRequirement, BadValue
from picker.keys import RESPONSES
from picker.stages import kind, kinds

Topology = Literal["inverting", "non-inverting", "follower", "difference", "vcvs-lowpass",
                   "vcvs-highpass", "mfb-lowpass", "mfb-bandpass", "transimpedance",
                   "level-shift"]
TOPOLOGIES: tuple[Topology, ...] = get_args(Topology)

#: Extra-low voltage limit for DC (IEC 61140 practice): beyond it, a caution.
ELV_DC_V = 60.0
#: The temperature offset drift is specified from.
T_REF_C = 25.0

# requirement key (as written, dashes) -> dataclass field (picker.keys)
KEYS: dict[str, str] = {k.name: k.field for k in _keys.KEYS}

#: How closely a --gain given with the ranges must agree with theirs (relative).
RANGE_GAIN_AGREEMENT = 1e-3

Label = Callable[[str], str]

#: Keys a transimpedance stage refuses (its input is a current, set by --iin).
TIA_REFUSED = ("gain", "vin", "source", "rg", "rin", "zin")
#: 10-90% rise time x -3 dB bandwidth of a single pole, 0.35 (ln 9/2π; common practice,
#: no source): --rise gives the bandwidth 0.35/rise.
RISE_PRODUCT = 0.35

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
    # the network was designed by picker (not given): advice that changes the tolerance
    # designs it again, as a rerun would (picker.design.spec.tolerance_that_fits)
    network_designed: bool = False
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
    # AC coupling (picker.design.coupling): "dc", or "ac" with a coupling capacitor at the
    # input and a bias network; the lowest signal frequency, Hz; the highest overall
    # low-frequency -3 dB point allowed, Hz (None: fmin/10)
    coupling: Literal["dc", "ac"] = "dc"
    fmin_hz: float | None = None
    low_corner_hz: float | None = None
    # the transimpedance stage (picker.stages.transimpedance): the sensor current, signed
    # (low, high) A (a peak p is (-p, p)); positive flows into the inverting input
    iin_a: tuple[float, float] | None = None
    iin_min_a: float | None = None  # smallest signal current to resolve, A (default: peak)
    cdet_f: float = 0.0  # the sensor's own capacitance (photodiode), F
    rshunt_ohm: float | None = None  # the sensor's shunt resistance, Ω (None: open)
    zt_ohm: float | None = None  # transimpedance asked for, Ω
    band_hz: float | None = None  # -3 dB bandwidth asked for, Hz
    rise_s: float | None = None  # 10-90% rise time asked for instead, s
    tia_response: str = "butterworth"  # the response cf is designed for

    @property
    def is_tia(self) -> bool:
        """True for the transimpedance stage."""
        return self.topology == "transimpedance"

    @property
    def iin_peak(self) -> float:
        """Largest magnitude of the sensor current, A."""
        assert self.iin_a is not None
        return max(abs(self.iin_a[0]), abs(self.iin_a[1]))

    @property
    def iin_smallest(self) -> float:
        """The smallest signal current to resolve, A (--iin-min, default the peak)."""
        return self.iin_peak if self.iin_min_a is None else self.iin_min_a

    @property
    def norton_ohm(self) -> float:
        """The Norton resistance of the sensor in the netlist, Ω (the shunt, or
        OPEN_FACTOR x the transimpedance for an open shunt)."""
        from picker.stages.transimpedance import norton_ohm

        assert self.zt_ohm is not None
        return norton_ohm(self.zt_ohm, self.rshunt_ohm)

    def output_levels(self) -> tuple[float, float]:
        """Lowest and highest output level the signal reaches, V (a transimpedance
        stage's DC range goes one way: vo = ref - I·Zt)."""
        if self.is_tia and self.iin_a is not None and self.zt_ohm is not None:
            a, b = (self.ref - i * self.zt_ohm for i in self.iin_a)
            return min(a, b), max(a, b)
        return self.ref - self.vout, self.ref + self.vout
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
        if self.is_tia:
            out_name = label("iin")
        low, high = self.output_levels()
        if high > self.rail_pos or low < self.rail_neg:
            shown = (f"{low:g} .. {high:g} V (ref - I·Zt)" if self.is_tia
                     else f"{self.vout:g} Vpk around {ref:g} V")
            raise BadRequirement(
                f"{out_name}: an output of {shown} goes beyond the rails "
                f"{self.rail_pos:+g}/{self.rail_neg:+g} V; lower the amplitude or widen the "
                "rails")
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
        if self.zin_ohm is not None and t not in ("inverting", "difference") and not (
                self.coupling == "ac" and t in ("non-inverting", "follower")):
            raise BadRequirement(f"{label('zin')}: a {t} stage's input impedance is the "
                                 "op-amp's own, not set by resistors; use --zin with inverting "
                                 "or difference (or an AC-coupled non-inverting stage or "
                                 "follower: its bias resistor)")
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
        self._validate_coupling(label)
        self._validate_tia(label)
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

    def _validate_coupling(self, label: Label) -> None:
        """The AC-coupling keys: fmin (and low-corner) only with coupling ac, below freq."""
        from picker.design.coupling import COUPLED_TOPOLOGIES

        t = self.topology
        if self.coupling not in ("dc", "ac"):
            raise BadRequirement(f"{label('coupling')}: {self.coupling!r} is not a coupling; "
                                 "use dc or ac")
        if self.coupling == "dc":
            for name, v in (("fmin", self.fmin_hz), ("low-corner", self.low_corner_hz)):
                if v is not None:
                    raise BadRequirement(f"{label(name)}: applies to an AC-coupled stage only; "
                                         "add --coupling ac, or omit it")
            return
        if t not in COUPLED_TOPOLOGIES:
            raise BadRequirement(f"{label('coupling')}: ac applies to the "
                                 f"{', '.join(COUPLED_TOPOLOGIES)} stages, not {t}; use "
                                 "--coupling dc")
        if self.fmin_hz is None:
            raise BadRequirement(f"{label('fmin')}: missing; an AC-coupled stage needs its "
                                 "lowest signal frequency, e.g. --fmin 20Hz")
        if not (0 < self.fmin_hz < self.freq_hz):
            raise BadRequirement(f"{label('fmin')}: {self.fmin_hz:g} Hz is not below the top "
                                 f"frequency --freq {self.freq_hz:g} Hz; give the lowest "
                                 "signal frequency, below --freq")
        if self.low_corner_hz is not None and not 0 < self.low_corner_hz < self.fmin_hz:
            raise BadRequirement(f"{label('low-corner')}: {self.low_corner_hz:g} Hz is not "
                                 f"below --fmin {self.fmin_hz:g} Hz; the low-frequency -3 dB "
                                 "point must lie below the band, e.g. fmin/10")
        if self.network is not None and self.network.get("rp", 0.0) != 0.0:
            raise BadRequirement(f"{label('network')}: rp has no place in an AC-coupled stage "
                                 "(the bias network drives the non-inverting input); omit it")

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

    def _validate_tia(self, label: Label) -> None:
        """The transimpedance keys: given only for that stage, complete for it."""
        given = {"iin": self.iin_a, "iin-min": self.iin_min_a, "rshunt": self.rshunt_ohm,
                 "zt": self.zt_ohm, "f3db": self.band_hz, "rise": self.rise_s}
        if not self.is_tia:
            for name, v in given.items():
                if v is not None:
                    raise BadRequirement(f"{label(name)}: applies to the transimpedance stage "
                                         f"only (the {self.topology} stage's input is a "
                                         "voltage); omit it")
            if self.cdet_f:
                raise BadRequirement(f"{label('cdet')}: applies to the transimpedance stage "
                                     "only; omit it")
            return
        if self.iin_a is None or self.iin_peak <= 0:
            raise BadRequirement(f"{label('iin')}: missing; give the sensor current's peak, "
                                 "e.g. --iin 10uA, or its DC range, e.g. --iin 0..10uA")
        if self.zt_ohm is None or not self.zt_ohm > 0:
            raise BadRequirement(f"{label('zt')}: missing; give the transimpedance, e.g. "
                                 "--zt 100k, or the output swing --vout")
        if self.band_hz is None or not self.band_hz > 0:
            raise BadRequirement(f"{label('f3db')}: missing; give the -3 dB bandwidth, e.g. "
                                 "--f3db 100kHz, or the rise time --rise")
        if self.tia_response not in _tia_responses():
            raise BadRequirement(f"{label('tia-response')}: {self.tia_response!r} is not a "
                                 "response; use one of " + ", ".join(_tia_responses()))
        if self.iin_min_a is not None and self.iin_min_a > self.iin_peak:
            raise BadRequirement(f"{label('iin-min')}: {self.iin_min_a:g} A is above the "
                                 f"peak current {self.iin_peak:g} A; give the smallest "
                                 "signal to resolve")
        if not (self.cdet_f >= 0 and math.isfinite(self.cdet_f)):
            raise BadRequirement(f"{label('cdet')}: the sensor capacitance must be >= 0 F")
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


def _tia_responses() -> tuple[str, ...]:
    from picker.stages.transimpedance import RESPONSE_Q

    return tuple(RESPONSE_Q)


def _tia_fill(kw: dict[str, Any], values: Mapping[str, Any], lab: Label) -> None:
    """Complete a transimpedance requirement: transimpedance from --vout, bandwidth from
    --rise, and the Norton form's gain and input amplitude (picker.stages.transimpedance)."""
    from picker.stages.transimpedance import norton_ohm

    for key in TIA_REFUSED:
        if key in values:
            raise BadRequirement(f"{lab(key)}: a transimpedance stage is driven by a current; "
                                 "give --iin (and --zt or --vout) instead; omit it")
    if "iin_a" not in kw:
        raise BadRequirement(f"{lab('iin')}: missing; give the sensor current's peak, e.g. "
                             "--iin 10uA, or its DC range, e.g. --iin 0..10uA")
    peak = max(abs(kw["iin_a"][0]), abs(kw["iin_a"][1]))
    vout = kw.pop("vout_pk", None)
    if "zt_ohm" in kw and vout is not None:
        raise BadRequirement(f"{lab('zt')}: give the transimpedance or the output swing "
                             "--vout, not both")
    if vout is not None:
        kw["zt_ohm"] = vout / peak
    elif "zt_ohm" not in kw:
        if not kw.get("rf_pinned"):
            raise BadRequirement(f"{lab('zt')}: missing; give the transimpedance, e.g. "
                                 "--zt 100k, or the output swing --vout")
        kw["zt_ohm"] = kw["rf_ohm"]
    if "band_hz" in kw and "rise_s" in kw:
        raise BadRequirement(f"{lab('rise')}: give the bandwidth --f3db or the rise time "
                             "--rise, not both")
    if "rise_s" in kw:
        kw["band_hz"] = RISE_PRODUCT / kw["rise_s"]
    if "band_hz" not in kw:
        raise BadRequirement(f"{lab('f3db')}: missing; give the -3 dB bandwidth, e.g. "
                             "--f3db 100kHz, or the rise time --rise")
    kw.setdefault("freq_hz", kw["band_hz"])
    rn = norton_ohm(kw["zt_ohm"], kw.get("rshunt_ohm"))
    kw["gain"] = kw["zt_ohm"] / rn  # per volt of the Norton source (stage docstring)
    kw["vin_pk"] = peak * rn


def normal_key(key: str, where: str = "--") -> str:
    """'gain_error', '--gain-error' -> 'gain-error'; unknown keys are an error."""
    k = key.strip().lstrip("-").replace("_", "-").lower()
    if k not in KEYS:
        raise BadRequirement(f"{where}{key}: not a requirement key; known keys: "
                             + ", ".join(KEYS))
    return k


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
        if key == "rin" and "rg" in values:
            raise BadRequirement(f"{lab(key)}: --rin and --rg name the same resistor of an "
                                 "inverting stage; give one of them")
        kw.update(_keys.BY_NAME[key].read(raw, lab(key)))
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
    if kw["topology"] == "transimpedance":
        _tia_fill(kw, values, lab)
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
    _keys.ranged("gain", g, lab("vout-range"), f"{c:g}..{d:g} V",
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
