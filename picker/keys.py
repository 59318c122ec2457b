"""The requirement keys: one definition each, read by every front end.

A key (``gain-error``) is written the same way as a command-line option (``--gain-error``)
and in a TOML design file (``gain-error = "0.5%"`` or ``gain_error``). Its ``Key`` says
everything about it once: the Requirement field it sets, how its text is read (``read``:
value as written -> fields, in SI units, with errors naming where it was written), its
meaning, its default and an example (for ``--help`` and the design-file template), the
quantity kind a command line converts it with, and the SI unit a converted number is
written back with (``--save``). picker.design.requirement builds a Requirement from these;
picker.cli.reqopts makes the options; picker.design.designfile writes the template.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

from picker.errors import BadValue
from picker.quantities import (
    Brief,
    Kind,
    as_number,
    check_rails,
    parse,
    parse_amplitude,
    parse_rails,
)

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
    "fmin": (1e-3, 1e9, "Hz (1 mHz to 1 GHz)"),
    "low-corner": (1e-4, 1e9, "Hz (0.1 mHz to 1 GHz)"),
    "iin": (1e-15, 1.0, "A (1 fA to 1 A)"),
    "iin-min": (1e-15, 1.0, "A (1 fA to 1 A)"),
    "cdet": (0.0, 1e-6, "F (0 to 1 µF)"),
    "rshunt": (1.0, 1e15, "Ω (1 Ω to 1 PΩ)"),
    "zt": (1.0, 1e12, "Ω (1 Ω to 1 TΩ)"),
    "f3db": (1e-3, 1e9, "Hz (1 mHz to 1 GHz)"),
    "rise": (1e-12, 1e3, "s (1 ps to 1000 s)"),
    "vin-range": (-1e3, 1e3, "V (-1 kV to 1 kV)"),
    "vout-range": (-1e3, 1e3, "V (-1 kV to 1 kV)"),
    "shift-source": (1e-3, 1e3, "V (1 mV to 1 kV)"),
}

#: The response shapes of a low- or high-pass section (trade terms).
RESPONSES = ("butterworth", "bessel", "chebyshev")
#: Part fields a requirement may assume (technical values, not stock or text).
ASSUMABLE = ("gbw_hz", "slew_v_per_s", "aol_v_per_v", "rin_ohm", "rout_ohm", "iout_a",
             "ib_a", "ios_a", "vos_v", "drift_v_per_c", "en_v_per_rthz", "in_a_per_rthz",
             "out_head_pos_v", "out_head_neg_v", "cm_head_pos_v", "cm_head_neg_v",
             "supply_min_v", "supply_max_v", "channels", "out_rsat_pos_ohm", "out_rsat_neg_ohm",
             "pm_unity_deg", "min_noise_gain", "cin_diff_f", "cin_cm_f", "vdiff_max_v",
             "cmrr_db", "psrr_db", "theta_ja_c_per_w", "tj_max_c")

Reader = Callable[[Any, str], dict[str, Any]]


@dataclass(frozen=True)
class Key:
    """One requirement key.

    ``read(raw, name)`` turns the value as written (text, a TOML number, table or
    array, or a number a command line has converted to SI already) into Requirement
    fields; ``name`` labels it in errors (``--freq`` or ``stage.toml: freq``).
    ``kind`` is how a command line converts the option before the library reads it: a
    picker.quantities kind, or ``text`` (passed as typed), ``choice`` (one of
    ``choices``), ``count``, ``number``, ``rails``, ``flag`` (an on/off switch),
    ``list`` (repeatable) or ``table`` (design files only). ``unit`` is written after a converted SI number in a design
    file (``" Hz"``; empty: a plain number).
    """

    name: str
    field: str
    read: Reader
    text: str  # what it means, one line
    default: str  # in words
    example: str  # as TOML text
    kind: str = "text"
    positive: bool = False  # the command line refuses zero (and negative) values
    choices: tuple[str, ...] = ()
    unit: str = ""
    words: str = ""  # the unit in words, for the template

    @property
    def help(self) -> str:
        """The option's help text."""
        if self.default.startswith("none: "):
            return f"{self.text} ({self.default[6:]})"
        return f"{self.text} (default: {self.default})"


# -- readers --------------------------------------------------------------------------

def ranged(key: str, value: float, name: str, raw: Any, what: str = "") -> float:
    """``value`` if it lies in RANGES[key], else BadValue naming the range."""
    lo, hi, unit = RANGES[key]
    if not lo <= value <= hi:
        raise BadValue(name, Brief(raw), f"is outside {what or 'the range'} {lo:g} to {hi:g} "
                       f"{unit}")
    return value


def optional(value: Any) -> bool:
    """True for the words that mean "none": none, open, or empty text."""
    return isinstance(value, str) and value.strip().lower() in ("none", "open", "")


def _quantity(key: str, field: str, kind: Kind, *, positive: bool = False,
              nonnegative: bool = False, none: Any = ..., in_range: bool = True,
              strip_rms: bool = False) -> Reader:
    """A reader of one quantity into ``field``: ``none`` (when given) is taken for the
    words of ``optional``; ``in_range`` checks RANGES[key]."""
    def read(raw: Any, name: str) -> dict[str, Any]:
        if none is not ... and optional(raw):
            return {field: none}
        text = raw.strip()[:-3] if (strip_rms and isinstance(raw, str)
                                    and raw.strip().lower().endswith("rms")) else raw
        if kind == "amplitude":
            v = parse_amplitude(text, name)
        else:
            v = parse(text, kind, name, allow_zero=not positive,
                      allow_negative=False if nonnegative else None)
        return {field: ranged(key, v, name, raw) if in_range else v}
    return read


def _topology(raw: Any, name: str) -> dict[str, Any]:
    t = raw.strip().lower().replace("_", "-") if isinstance(raw, str) else ""
    t = {"noninverting": "non-inverting", "non-inv": "non-inverting",
         "inv": "inverting", "buffer": "follower", "diff": "difference"}.get(t, t)
    from picker.stages import kinds  # here: the stage modules load numpy (keeps --help light)

    if t not in kinds():
        raise BadValue(name, Brief(raw), "is not a topology; use one of " + ", ".join(kinds()))
    return {"topology": t}


def _rails(raw: Any, name: str) -> dict[str, Any]:
    if isinstance(raw, list | tuple):
        if len(raw) != 2:
            raise BadValue(name, Brief(raw), "needs two rails, e.g. [12, -12]")
        a, b = (parse(r, "voltage", name) for r in raw)
        pos, neg = check_rails(max(a, b), min(a, b), name, Brief(raw))
    else:
        pos, neg = parse_rails(raw, name)
    return {"rail_pos": pos, "rail_neg": neg}


def _choice(field: str, choices: tuple[str, ...], what: str) -> Reader:
    def read(raw: Any, name: str) -> dict[str, Any]:
        v = raw.strip().lower() if isinstance(raw, str) else ""
        if v not in choices:
            raise BadValue(name, Brief(raw), f"is not {what}; use one of " + ", ".join(choices))
        return {field: v}
    return read


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
    if ".." in text:
        a, b = text.split("..", 1)
        unit = "".join(ch for ch in b if not (ch.isdigit() or ch in "+-. "))
        a = a if any(ch.isalpha() for ch in a) else a + unit
        return parse(a, "temperature", name), parse(b, "temperature", name)
    v = parse(text, "temperature", name)
    return v, v


def _temp(raw: Any, name: str) -> dict[str, Any]:
    lo, hi = _temps(raw, name)
    return {"temp_min_c": ranged("temp", lo, name, raw), "temp_max_c": ranged("temp", hi, name, raw)}


def _qty(raw: Any, name: str) -> dict[str, Any]:
    return {"qty": int(ranged("qty", parse(raw, "count", name, allow_zero=False), name, raw))}


def _margin(raw: Any, name: str) -> dict[str, Any]:
    if isinstance(raw, bool) or not isinstance(raw, str | int | float):
        raise BadValue(name, Brief(raw), "is not a number, e.g. 1.25")
    m = as_number(str(raw), name)
    if m > RANGES["margin"][1]:  # below 1 is explained by Requirement.validate
        ranged("margin", m, name, raw)
    return {"margin": m}


def _rf(raw: Any, name: str) -> dict[str, Any]:
    r = ranged("rf", parse(raw, "resistance", name, allow_zero=False), name, raw)
    return {"rf_ohm": r, "rf_pinned": True}


def _bool(field: str) -> Reader:
    def read(value: Any, name: str) -> dict[str, Any]:
        if isinstance(value, bool):
            return {field: value}
        s = str(value).strip().lower() if isinstance(value, str | int) else ""
        if s in ("1", "true", "yes", "on"):
            return {field: True}
        if s in ("0", "false", "no", "off"):
            return {field: False}
        raise BadValue(name, Brief(value), "is not yes or no")
    return read


def _network(value: Any, name: str) -> dict[str, Any]:
    if not isinstance(value, Mapping):
        raise BadValue(name, Brief(value),
                       "is not a table of resistors, e.g. {rf = '47k', rg = '4k7'}")
    out: dict[str, float] = {}
    for k, v in value.items():
        key = str(k).lower()
        if isinstance(v, str) and v.strip().lower() in ("inf", "open"):
            out[key] = math.inf
        elif key.startswith("c"):  # a filter's capacitor (c1, c2)
            out[key] = ranged("network-c", parse(v, "capacitance", f"{name}.{key}",
                                                 allow_zero=False), f"{name}.{key}", v)
        else:
            r = parse(v, "resistance", f"{name}.{key}")
            out[key] = r if r == 0 else ranged("network", r, f"{name}.{key}", v)
    return {"network": out}


def _assume(value: Any, name: str) -> dict[str, Any]:
    """``rout=100,rin=1meg`` (or a TOML table, or a list of ``field=value``) -> SI values."""
    from picker.store.records import convert, field_name  # the store's field reader

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
    return {"assume": out}


def _ends(value: Any, name: str, what: str, example: str) -> tuple[Any, Any] | None:
    """The two ends of a range as written: ``[a, b]`` or ``"a..bU"`` (the unit after b
    serves a too); None for a single value."""
    if isinstance(value, list | tuple):
        if len(value) != 2:
            raise BadValue(name, Brief(value), f"needs two {what}, low and high, e.g. {example}")
        return value[0], value[1]
    if isinstance(value, str) and ".." in value:
        a, b = value.split("..", 1)
        unit = "".join(ch for ch in b if ch.isalpha())
        return (a if any(ch.isalpha() for ch in a) else a + unit), b
    return None


def _levels(value: Any, name: str, what: str) -> tuple[float, float]:
    """A voltage level (``2.5V``) or range (``-5..5V``, ``[-5, 5]``), V."""
    ends = _ends(value, name, what, "[-5, 5]")
    if ends is None:
        v = parse(value, "voltage", name)
        return v, v
    return parse(ends[0], "voltage", name), parse(ends[1], "voltage", name)


def _vcm(raw: Any, name: str) -> dict[str, Any]:
    return {"vcm": None if optional(raw) else _levels(raw, name, "levels")}


def _ripple(value: Any, name: str) -> dict[str, Any]:
    """Rail ripple ``50mVpp@100Hz`` (or a TOML table {amplitude, freq}): (peak V, Hz)."""
    if optional(value):
        return {"ripple": None}
    if isinstance(value, Mapping):
        amp, freq = value.get("amplitude"), value.get("freq")
        if amp is None or freq is None:
            raise BadValue(name, Brief(value), "needs amplitude and freq, e.g. "
                           "{amplitude = '50mVpp', freq = '100Hz'}")
    elif isinstance(value, str) and "@" in value:
        amp, freq = (t.strip() for t in value.split("@", 1))
    else:
        raise BadValue(name, Brief(value), "is not amplitude@frequency, e.g. 50mVpp@100Hz")
    v = ranged("ripple", parse_amplitude(amp, name), name, value)
    f = ranged("ripple-freq", parse(freq, "frequency", name, allow_zero=False), name, value)
    return {"ripple": (v, f)}


def _cap_series(raw: Any, name: str) -> dict[str, Any]:
    from picker.design.series import parse_series  # series imports the network layer

    cs = parse_series(raw if isinstance(raw, str) else str(raw), name)
    if cs not in ("E3", "E6", "E12", "E24"):
        raise BadValue(name, Brief(raw), "is not a capacitor series; use E6, E12 or E24 "
                       "(capacitors are not made in E48 and finer)")
    return {"cap_series": cs}


def _currents(value: Any, name: str) -> tuple[float, float]:
    """A peak current (``10uA``: (-p, p)) or a DC range (``0..10uA``, ``[-1uA, 5uA]``),
    signed, A."""
    def one(v: Any) -> float:
        x = parse(v, "current", name, allow_negative=True)
        if x != 0:
            ranged("iin", abs(x), name, value)
        return x

    ends = _ends(value, name, "currents", "[0, '10uA']")
    if ends is None:
        p = abs(one(value))
        if p == 0:
            raise BadValue(name, Brief(value), "is zero; give the peak signal current, e.g. "
                           "10uA")
        return -p, p
    lo, hi = one(ends[0]), one(ends[1])
    if lo > hi:
        raise BadValue(name, Brief(value), "write the range low..high, e.g. 0..10uA")
    if lo == hi:
        raise BadValue(name, Brief(value), "is a single level; give a range, e.g. 0..10uA, "
                       "or a peak, e.g. 10uA")
    return lo, hi


def _iin(raw: Any, name: str) -> dict[str, Any]:
    return {"iin_a": _currents(raw, name)}


def _rshunt(raw: Any, name: str) -> dict[str, Any]:
    if optional(raw) or str(raw).strip().lower() == "inf":
        return {"rshunt_ohm": None}
    return {"rshunt_ohm": ranged("rshunt", parse(raw, "resistance", name, allow_zero=False),
                                 name, raw)}


def _tia_response(raw: Any, name: str) -> dict[str, Any]:
    from picker.stages.transimpedance import RESPONSE_Q  # the stage owns its responses

    return _choice("tia_response", tuple(RESPONSE_Q), "a response")(raw, name)


def _level_range(value: Any, name: str, key: str) -> tuple[float, float]:
    """Two levels as written, in order: ``0..80mV``, ``4.75..0.25V``, ``[0, 0.08]``, V."""
    ends = _ends(value, name, "levels", "[0, 0.08]")
    if ends is None:
        raise BadValue(name, Brief(value), "is not a range; write two levels low..high, "
                       "e.g. 0..80mV")
    a, b = parse(ends[0], "voltage", name), parse(ends[1], "voltage", name)
    return ranged(key, a, name, value), ranged(key, b, name, value)


def _range_of(key: str, field: str) -> Reader:
    def read(raw: Any, name: str) -> dict[str, Any]:
        return {field: _level_range(raw, name, key)}
    return read


#: every registered stage type, written out so that `picker pick --help` loads no stage
#: module (they import numpy); tests/design/test_keys.py holds it equal to the registry
TOPOLOGY_NAMES: tuple[str, ...] = (
    "inverting", "non-inverting", "follower", "difference", "vcvs-lowpass", "vcvs-highpass",
    "mfb-lowpass", "mfb-bandpass", "transimpedance", "level-shift")

#: Every requirement key, in the order of --help and the design-file template.
KEYS: tuple[Key, ...] = (
    Key("topology", "topology", _topology, "stage topology (see picker.stages)",
        "none: required", '"inverting"', kind="choice", choices=TOPOLOGY_NAMES),
    Key("gain", "gain", _quantity("gain", "gain", "gain", positive=True),
        "signal-gain magnitude, V/V or dB (e.g. 10, 20dB)", "none: required, 1 for a follower",
        '"10"', kind="gain", positive=True, unit=" V/V", words="V/V or dB"),
    Key("vin", "vin_pk", _quantity("vin", "vin_pk", "amplitude"),
        "input amplitude with its form: 0.5Vpk, 1Vpp, 0.35Vrms (bare = peak)",
        "none: give vin or vout", '"0.5Vpk"', kind="amplitude", unit=" Vpk",
        words="Vpk, Vpp or Vrms"),
    Key("vout", "vout_pk", _quantity("vout", "vout_pk", "amplitude"),
        "output amplitude instead of vin", "none: give vin or vout", '"5Vpk"',
        kind="amplitude", unit=" Vpk", words="Vpk, Vpp or Vrms"),
    Key("freq", "freq_hz", _quantity("freq", "freq_hz", "frequency", positive=True),
        "top signal frequency (a sine), e.g. 20kHz", "none: required, or 10 x f0 for a filter",
        '"20kHz"', kind="frequency", positive=True, unit=" Hz", words="Hz"),
    Key("ref", "ref_v", _quantity("ref", "ref_v", "voltage", none=None, in_range=False),
        "DC level the signal rides on", "mid-rail", '"0V"', kind="voltage", unit=" V",
        words="V"),
    Key("load", "load_ohm", _quantity("load", "load_ohm", "resistance", positive=True,
                                      none=None),
        "load resistance to the reference", "none (no load)", '"2k"', kind="resistance",
        positive=True, unit=" Ω", words="Ω"),
    Key("source", "source_ohm", _quantity("source", "source_ohm", "resistance"),
        "source resistance", "0", '"50"', kind="resistance", unit=" Ω", words="Ω"),
    Key("rails", "rails", _rails, "supply rails: ±12, +12/-12, +5/0 or [12, -12]",
        "none: required", '"±12"', kind="rails", words="V"),
    Key("gain-error", "gain_error", _quantity("gain-error", "gain_error", "ratio",
                                              positive=True),
        "largest closed-loop gain error at DC and at freq", "1%", '"1%"', kind="ratio",
        positive=True, words="ratio"),
    Key("tolerance", "tolerance", _quantity("tolerance", "tolerance", "ratio", in_range=False),
        "tolerance of the gain-setting resistors, inside the gain budget", "1%", '"1%"',
        kind="ratio", words="ratio"),
    Key("tolerance-rule", "tolerance_rule", _choice("tolerance_rule", ("worst", "rss"),
                                                    "a tolerance rule"),
        "how resistor tolerances add: worst case or root-sum-square (rss)", "worst",
        '"worst"', kind="choice", choices=("worst", "rss")),
    Key("phase-error", "phase_error_deg", _quantity("phase-error", "phase_error_deg", "angle",
                                                    positive=True, nonnegative=True,
                                                    none=None, in_range=False),
        "largest phase shift of the gain at freq from the ideal, e.g. 5deg",
        "none (shown, not limited)", '"5deg"', kind="angle", positive=True, unit=" deg",
        words="degrees"),
    Key("offset-max", "offset_max_v", _quantity("offset-max", "offset_max_v", "voltage",
                                                positive=True, nonnegative=True, none=None,
                                                strip_rms=True),
        "largest DC output error, e.g. 20mV", "none (not checked)", '"20mV"', unit=" V",
        words="V"),
    Key("noise-max", "noise_max_v", _quantity("noise-max", "noise_max_v", "voltage",
                                              positive=True, nonnegative=True, none=None,
                                              strip_rms=True),
        "largest output RMS noise, e.g. 100uV", "none (not checked)", '"100uV"', unit=" V",
        words="V RMS"),
    Key("temp", "temp", _temp, "ambient, or a range low..high, e.g. -40..85C (drift from 25C)",
        "25C", '"-40..85C"', words="°C"),
    Key("qty", "qty", _qty, "channels needed", "1", "2", kind="count", words="channels"),
    Key("margin", "margin", _margin, "design margin: needs x margin, allowed errors / margin "
        "(1 = bare minimums)", "1.25", "1.25", kind="number"),
    Key("rf", "rf_ohm", _rf, "the feedback resistor as built, kept exactly (never snapped)",
        "designed (E24), see picker net", '"10k"', kind="resistance", positive=True,
        unit=" Ω", words="Ω"),
    Key("rg", "rg_ohm", _quantity("rg", "rg_ohm", "resistance", positive=True),
        "the gain leg as built, kept exactly: the inverting stage's input resistor, the "
        "non-inverting stage's ground leg, r1 = r3 of the difference stage", "designed (E24)",
        '"1k"', kind="resistance", positive=True, unit=" Ω", words="Ω"),
    Key("rin", "rg_ohm", _quantity("rin", "rg_ohm", "resistance", positive=True),
        "inverting stage: its input resistor as built (another name for rg)", "designed (E24)",
        '"10k"', kind="resistance", positive=True, unit=" Ω", words="Ω"),
    Key("zin", "zin_ohm", _quantity("zin", "zin_ohm", "resistance", positive=True, none=None),
        "least input impedance the source may see, inverting or difference",
        "max(10 kΩ, 10 x source)", '"10k"', kind="resistance", positive=True, unit=" Ω",
        words="Ω"),
    Key("mains", "mains", _bool("mains"), "the input comes from mains (shows a safety caution)",
        "no", "false", kind="flag"),
    Key("light-load-swing", "light_load_swing", _bool("light_load_swing"),
        "check a part without output saturation resistances with its light-load headroom "
        "(printed as assumed)", "no", "false", kind="flag"),
    Key("network", "network", _network,
        "the stage's own resistors instead of the designed ones (design files)",
        "designed (E24)", '{ rf = "47k", rg = "4k7" }', kind="table", words="Ω"),
    Key("assume", "assume", _assume, "take this value where a part leaves the field blank, "
        "e.g. rout=100 (marked assumed in every output; repeat for more)", "none",
        '["rout=100"]', kind="list"),
    Key("cload", "cload_f", _quantity("cload", "cload_f", "capacitance", none=0.0),
        "capacitance at the output, e.g. 1nF (cable, ADC input)", "0", '"1nF"',
        kind="capacitance", unit=" F", words="F"),
    Key("vcm", "vcm", _vcm, "difference stage: input common-mode level or range, e.g. 2.5V or "
        "-5..5V", "ref", '"-5..5V"', words="V"),
    Key("cmrr", "cmrr_min_db", _quantity("cmrr", "cmrr_min_db", "decibel", nonnegative=True,
                                         none=None),
        "difference stage: least common-mode rejection of the stage, e.g. 60dB", "none",
        '"60dB"', kind="decibel", unit=" dB", words="dB"),
    Key("phase-margin", "phase_margin_deg", _quantity("phase-margin", "phase_margin_deg",
                                                      "angle", positive=True),
        "least phase margin of the loop", "45°", '"45deg"', kind="angle", positive=True,
        unit=" deg", words="degrees"),
    Key("ripple", "ripple", _ripple, "supply ripple on each rail as amplitude@frequency, e.g. "
        "50mVpp@100Hz", "none", '"50mVpp@100Hz"', words="amplitude@Hz"),
    Key("f0", "f0_hz", _quantity("f0", "f0_hz", "frequency", positive=True),
        "filter: corner frequency (low-, high-pass) or centre (band-pass), e.g. 1kHz",
        "none: required for a filter", '"1kHz"', kind="frequency", positive=True, unit=" Hz",
        words="Hz"),
    Key("response", "response", _choice("response", RESPONSES, "a response shape"),
        "filter: response shape of a low- or high-pass", "butterworth", '"butterworth"',
        kind="choice", choices=RESPONSES),
    Key("passband-ripple", "passband_ripple_db", _quantity(
        "passband-ripple", "passband_ripple_db", "decibel", nonnegative=True),
        "filter: pass-band ripple of a chebyshev response, e.g. 0.5dB", "none", '"0.5dB"',
        kind="decibel", unit=" dB", words="dB"),
    Key("bandwidth", "bandwidth_hz", _quantity("bandwidth", "bandwidth_hz", "frequency",
                                               positive=True),
        "filter: -3 dB bandwidth of a band-pass (Q = f0/bandwidth)", "none", '"200Hz"',
        kind="frequency", positive=True, unit=" Hz", words="Hz"),
    Key("cap-tolerance", "cap_tolerance", _quantity("cap-tolerance", "cap_tolerance", "ratio"),
        "filter: tolerance of the capacitors", "5%", '"5%"', kind="ratio", words="ratio"),
    Key("cap-series", "cap_series", _cap_series, "filter: capacitor series (E6, E12 or E24)",
        "E12", '"E12"', kind="choice", choices=("E6", "E12", "E24")),
    Key("response-error", "response_error", _quantity("response-error", "response_error",
                                                      "ratio"),
        "filter: how far the op-amp may move f0, Q and gain from the network's", "2%", '"2%"',
        kind="ratio", positive=True, words="ratio"),
    # AC coupling (picker.design.coupling)
    Key("coupling", "coupling", _choice("coupling", ("dc", "ac"), "a coupling"),
        "ac: an input coupling capacitor and a designed bias network (inverting, "
        "non-inverting, follower)", "dc", '"ac"', kind="choice", choices=("dc", "ac")),
    Key("fmin", "fmin_hz", _quantity("fmin", "fmin_hz", "frequency", positive=True),
        "with coupling ac: the lowest signal frequency, e.g. 20Hz",
        "none: required with coupling ac", '"20Hz"', kind="frequency", positive=True,
        unit=" Hz", words="Hz"),
    Key("low-corner", "low_corner_hz", _quantity("low-corner", "low_corner_hz", "frequency",
                                                 positive=True),
        "with coupling ac: the highest low-frequency -3 dB point allowed", "fmin/10", '"2Hz"',
        kind="frequency", positive=True, unit=" Hz", words="Hz"),
    # the transimpedance stage (picker.stages.transimpedance)
    Key("iin", "iin_a", _iin, "transimpedance: sensor current, its peak (10uA) or a DC range "
        "(0..10uA); positive flows into the inverting input",
        "none: required for transimpedance", '"10uA"', unit=" A", words="A, peak or low..high"),
    Key("iin-min", "iin_min_a", _quantity("iin-min", "iin_min_a", "current", positive=True),
        "transimpedance: smallest signal current to resolve", "the peak", '"100nA"',
        kind="current", positive=True, unit=" A", words="A"),
    Key("cdet", "cdet_f", _quantity("cdet", "cdet_f", "capacitance"),
        "transimpedance: the sensor's own capacitance, e.g. 10pF", "0", '"10pF"',
        kind="capacitance", unit=" F", words="F"),
    Key("rshunt", "rshunt_ohm", _rshunt, "transimpedance: the sensor's shunt resistance",
        "open", '"1G"', kind="resistance", positive=True, unit=" Ω", words="Ω"),
    Key("zt", "zt_ohm", _quantity("zt", "zt_ohm", "resistance", positive=True),
        "transimpedance: V/A wanted, e.g. 100k (or the output swing vout)", "none: zt or vout",
        '"100k"', kind="resistance", positive=True, unit=" Ω", words="Ω"),
    Key("f3db", "band_hz", _quantity("f3db", "band_hz", "frequency", positive=True),
        "transimpedance: -3 dB bandwidth wanted, e.g. 100kHz", "none: f3db or rise",
        '"100kHz"', kind="frequency", positive=True, unit=" Hz", words="Hz"),
    Key("rise", "rise_s", _quantity("rise", "rise_s", "time", positive=True),
        "transimpedance: 10-90% rise time wanted instead of f3db (bandwidth 0.35/rise)",
        "none: f3db or rise", '"3.5us"', kind="time", positive=True, unit=" s", words="s"),
    Key("tia-response", "tia_response", _tia_response,
        "transimpedance: response the feedback capacitor is designed for (butterworth, "
        "bessel, critical)", "butterworth", '"butterworth"', kind="choice",
        choices=("butterworth", "bessel", "critical")),
    # level-shifting stages (picker.stages.levelshift)
    Key("vin-range", "vin_range", _range_of("vin-range", "vin_range"),
        "level-shift: the input range low..high, V from ground, e.g. 0..80mV (instead of vin "
        "and ref)", "none", '"0..80mV"', words="V"),
    Key("vout-range", "vout_range", _range_of("vout-range", "vout_range"),
        "level-shift: the output at the input range's low end..at its high end, e.g. "
        "0.25..4.75V (falling: an inverting stage)", "none", '"0.25..4.75V"', words="V"),
    Key("shift-source", "shift_source_v", _quantity("shift-source", "shift_source_v",
                                                    "voltage", positive=True, none=None),
        "level-shift: the voltage the offset divider hangs from", "the positive rail",
        '"2.5V"', kind="voltage", unit=" V", words="V"),
)

#: key name -> Key
BY_NAME: dict[str, Key] = {k.name: k for k in KEYS}

__all__ = ["ASSUMABLE", "BY_NAME", "KEYS", "RANGES", "RESPONSES", "TOPOLOGY_NAMES", "Key", "optional", "ranged"]
