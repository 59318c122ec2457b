"""Parse and format engineering values as engineers write them.

Everything inside picker is in SI base units (Ω, Hz, V/s, V/V, V, A, V/√Hz, A/√Hz),
with two exceptions kept on purpose: temperatures are in °C and money is a plain
number. Conversion happens only here, at the edges.

SI prefixes are read by quantiphy (BIPM SI Brochure, 9th ed., table 7); this module
adds only the trade's own forms: ``meg``, IEC 60062 letter-and-digit codes (4k7, 4R7),
V/µs, dB and V/mV gains, noise densities per root hertz, percentages, °C, signal
amplitudes with their form (pk, pp, rms) and supply rails (±12, +5/0).

A bare number is in the SI base unit of its kind (a bare slew of 1 is 1 V/s), except
an amplitude, where a bare number is a peak voltage.
"""

from __future__ import annotations

import math
import re
import reprlib
import sys
import unicodedata
from dataclasses import dataclass
from typing import Literal, get_args

from picker.errors import BadValue

Kind = Literal[
    "resistance",
    "frequency",
    "slew",
    "gain",
    "voltage",
    "current",
    "vnoise",
    "inoise",
    "ratio",
    "temperature",
    "drift",
    "price",
    "count",
    "time",
    "amplitude",
    "angle",
    "capacitance",
    "decibel",
    "thermal",
    "power",
]

KINDS: tuple[Kind, ...] = get_args(Kind)


@dataclass(frozen=True)
class _Unit:
    text: str  # as written (matched case-insensitively)
    scale: float  # multiply the prefixed number by this to get SI
    prefix_ok: bool = True


_ROOT_HZ = ("rtHz", "√Hz", "sqrtHz", "sqrt(Hz)", "rHz", "/√Hz")

_UNITS: dict[str, list[_Unit]] = {
    "resistance": [_Unit("Ω", 1), _Unit("ohm", 1), _Unit("ohms", 1), _Unit("Ohm", 1)],
    "frequency": [_Unit("Hz", 1)],
    "slew": [
        _Unit("V/s", 1),
        _Unit("V/ms", 1e3),
        _Unit("V/us", 1e6),
        _Unit("V/µs", 1e6),
        _Unit("V/μs", 1e6),
        _Unit("V/ns", 1e9),
    ],
    "gain": [
        _Unit("V/V", 1),
        _Unit("V/mV", 1e3),
        _Unit("V/uV", 1e6),
        _Unit("V/µV", 1e6),
        _Unit("dB", 1, prefix_ok=False),
    ],
    "voltage": [_Unit("V", 1)],
    "current": [_Unit("A", 1)],
    "vnoise": [_Unit(f"V/{r}", 1) for r in _ROOT_HZ if not r.startswith("/")],
    "inoise": [_Unit(f"A/{r}", 1) for r in _ROOT_HZ if not r.startswith("/")],
    "ratio": [_Unit("%", 0.01, prefix_ok=False), _Unit("ppm", 1e-6, prefix_ok=False)],
    "temperature": [
        _Unit("C", 1, prefix_ok=False),
        _Unit("°C", 1, prefix_ok=False),
        _Unit("degC", 1, prefix_ok=False),
        _Unit("K", 1, prefix_ok=False),  # converted below
    ],
    "drift": [_Unit(f"V/{t}", 1) for t in ("C", "°C", "K", "degC")],
    "price": [],
    "count": [],
    "time": [_Unit("s", 1)],
    "angle": [_Unit("°", 1, prefix_ok=False), _Unit("deg", 1, prefix_ok=False)],
    "capacitance": [_Unit("F", 1)],
    "decibel": [_Unit("dB", 1, prefix_ok=False)],
    "thermal": [_Unit(f"{t}/W", 1, prefix_ok=False) for t in ("°C", "C", "K", "degC")],
    "power": [_Unit("W", 1)],
    "amplitude": [
        _Unit("Vpk", 1),
        _Unit("Vp", 1),
        _Unit("V", 1),
        _Unit("Vpp", 0.5),
        _Unit("Vp-p", 0.5),
        _Unit("Vrms", math.sqrt(2)),
    ],
}

_WHAT: dict[str, str] = {
    "resistance": "a resistance in Ω (e.g. 4k7, 4.7kΩ, 10meg, 4R7)",
    "frequency": "a frequency in Hz (e.g. 20kHz, 1.5MHz)",
    "slew": "a slew rate (e.g. 0.5V/us, 13 V/µs)",
    "gain": "a gain in V/V, dB or V/mV (e.g. 10, 100dB, 200V/mV)",
    "voltage": "a voltage (e.g. 1.5V, 300mV)",
    "current": "a current (e.g. 20mA, 5nA)",
    "vnoise": "a voltage noise density (e.g. 18nV/rtHz, 18 nV/√Hz)",
    "inoise": "a current noise density (e.g. 0.8pA/rtHz)",
    "ratio": "a ratio or percentage (e.g. 1%, 0.01, 50ppm)",
    "temperature": "a temperature (e.g. 85C, -40 °C)",
    "drift": "an offset drift (e.g. 2uV/C)",
    "price": "a price (a plain number, e.g. 0.42)",
    "count": "a whole number (e.g. 25)",
    "time": "a time (e.g. 10ms)",
    "angle": "an angle in degrees (e.g. 5deg, 2.5°)",
    "capacitance": "a capacitance (e.g. 100pF, 4.7nF)",
    "decibel": "a level in dB (e.g. 90dB; bare = dB)",
    "thermal": "a thermal resistance (e.g. 150°C/W, 150 K/W)",
    "power": "a power (e.g. 250mW)",
    "amplitude": "an amplitude with its form (e.g. 3Vpk, 6Vpp, 2.12Vrms; bare = peak)",
}

_NUM = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"
_PREFIX = r"(?:meg|MEG|Meg|[TGMkKmunpfaµμ])"
_IEC_CODE = re.compile(r"^(\d*)([RrkKMGm])(\d*)$")
_IEC_SCALE = {"R": 1.0, "r": 1.0, "k": 1e3, "K": 1e3, "M": 1e6, "G": 1e9, "m": 1e-3}

# Kinds whose values may be negative (headroom into a rail, a rail, a temperature).
_SIGNED: frozenset[str] = frozenset({"voltage", "temperature", "decibel"})


def _regex(kind: str, with_prefix: bool) -> re.Pattern[str]:
    units = sorted(_UNITS[kind], key=lambda u: -len(u.text))
    alts = "|".join(re.escape(u.text) for u in units)
    unit = f"(?P<unit>(?i:{alts}))" if alts else "(?P<unit>)"
    if with_prefix:
        return re.compile(rf"^\s*(?P<num>{_NUM})\s*(?P<prefix>{_PREFIX})?\s*{unit}?\s*$")
    return re.compile(rf"^\s*(?P<num>{_NUM})\s*{unit}\s*$")


# A unit read without a prefix wins over a prefix read without a unit ("5K" is
# 5 kelvin as a temperature but 5 kΩ as a resistance; "1 A" is an ampere, not atto).
_PATTERNS = {k: (_regex(k, False), _regex(k, True)) for k in _UNITS}


def _prefixed(num: str, prefix: str | None) -> float:
    """The number times its SI prefix, the prefix's factor read by quantiphy (BIPM SI
    Brochure table 7). The product is taken here: quantiphy reads ``1e308k`` as 1e308
    with the unit "k", which would drop the prefix."""
    if not prefix:
        return float(num)
    from quantiphy import Quantity  # lazy: keeps `picker --help` light

    p = {"meg": "M", "MEG": "M", "Meg": "M", "K": "k", "μ": "µ"}.get(prefix, prefix)
    return float(num) * float(Quantity(f"1{p}").real)  # overflow gives inf, refused later


# Decimal digits of any script (full-width １０, Arabic-Indic ١٠, ...) read as their ASCII
# digit, so a value is read whole or refused, never half-read (Unicode category Nd).
_DIGITS = {c: str(unicodedata.decimal(chr(c))) for c in range(0x80, sys.maxunicode + 1)
           if unicodedata.category(chr(c)) == "Nd"}


def ascii_digits(text: str) -> str:
    """``text`` with every decimal digit of another script replaced by its ASCII digit."""
    return text.translate(_DIGITS) if not text.isascii() else text


def _same_unit(written: str, unit: str) -> bool:
    """Units compare without case, except the prefix after the slash: M is mega and m is
    milli (SI), so ``V/MV`` is not ``V/mV``."""
    if written.lower() != unit.lower():
        return False
    slash = unit.find("/")
    return slash < 0 or slash + 1 >= len(unit) or (
        unit[slash + 1] not in "mM" or written[slash + 1] == unit[slash + 1])


def _match(text: str, kind: str) -> float | None:
    bare, prefixed = _PATTERNS[kind]
    m = bare.match(text) if _UNITS[kind] else None
    prefix = None
    if m is None:
        m = prefixed.match(text)
        if m is None:
            if kind == "resistance":
                code = _IEC_CODE.match(text.strip().rstrip("Ωω").strip())
                if code and (code.group(1) or code.group(3)):
                    whole = code.group(1) or "0"
                    frac = code.group(3) or "0"
                    return float(f"{whole}.{frac}") * _IEC_SCALE[code.group(2)]
            return None
        prefix = m.group("prefix")
    unit_text = m.group("unit")
    unit = None
    if unit_text:
        for u in _UNITS[kind]:
            if _same_unit(unit_text, u.text):
                unit = u
                break
        if unit is None:
            return None
    if unit is not None and not unit.prefix_ok and prefix:
        return None
    if prefix and kind in ("price", "count", "ratio", "temperature", "decibel", "thermal"):
        return None
    value = _prefixed(m.group("num"), prefix)
    if unit is None:
        return value
    if kind == "gain" and unit.text == "dB":
        return math.inf if value / 20 > 308 else float(10 ** (value / 20))
    if kind == "temperature" and unit.text == "K":
        return value - 273.15
    return value * unit.scale


def _guess_kind(text: str, not_kind: str) -> str | None:
    for k in _UNITS:
        if k in (not_kind, "price", "count", "amplitude") or not _UNITS[k]:
            continue
        m = _PATTERNS[k][1].match(text)
        if m is not None and m.group("unit"):
            return k
    return None


def parse(
    text: str | float | int,
    kind: Kind,
    field: str = "value",
    *,
    allow_negative: bool | None = None,
    allow_zero: bool = True,
) -> float:
    """Read one value of the given kind and return it in SI base units.

    Raises BadValue naming the field, the value and what was expected.
    """
    if kind == "amplitude":
        v = parse_amplitude(text, field)
        return v
    if isinstance(text, bool) or not isinstance(text, str | int | float):
        # a TOML list, table or date where a value belongs
        raise BadValue(field, Brief(text), f"is not {_WHAT[kind]}")
    if isinstance(text, int | float):
        shown: object = text
        try:
            value = float(text)
        except OverflowError:
            value = math.inf
    else:
        shown = text
        if len(text) > 200:
            raise BadValue(field, text[:20] + "...", f"is too long to be {_WHAT[kind]}")
        plain = ascii_digits(text)
        got = _match(plain, kind)
        if got is None:
            other = _guess_kind(plain, kind)
            if other is not None:
                raise BadValue(
                    field, text, f"is {_WHAT[other].split(' (')[0]}, but {_WHAT[kind]} is expected"
                )
            raise BadValue(field, text, f"is not {_WHAT[kind]}")
        value = got
    if not math.isfinite(value):
        why = "is too large to be a finite number" if math.isinf(value) and "inf" not in str(shown).lower() else (
            "is not a finite number")
        raise BadValue(field, shown, f"{why}; expected {_WHAT[kind]}")
    signed = kind in _SIGNED if allow_negative is None else allow_negative
    if value < 0 and not signed:
        raise BadValue(field, shown, f"is negative; expected {_WHAT[kind]} >= 0")
    if value == 0 and not allow_zero:
        raise BadValue(field, shown, f"is zero; expected {_WHAT[kind]} > 0")
    if kind == "count":
        if value != int(value):
            raise BadValue(field, shown, f"is not {_WHAT[kind]}")
        return float(int(value))
    if kind == "temperature" and value < -273.15:
        raise BadValue(field, shown, "is below absolute zero")
    return value


def parse_amplitude(text: str | float | int, field: str = "amplitude") -> float:
    """Read a signal amplitude ('3Vpk', '6Vpp', '2.12Vrms', bare = peak); return the peak."""
    if isinstance(text, int | float) and not isinstance(text, bool):
        try:
            value = float(text)
        except OverflowError:
            value = math.inf
    elif isinstance(text, str):
        got = _match(ascii_digits(text[:200]), "amplitude")
        if got is None:
            raise BadValue(field, text, f"is not {_WHAT['amplitude']}")
        value = got
    else:
        raise BadValue(field, Brief(text), f"is not {_WHAT['amplitude']}")
    if not math.isfinite(value) or value <= 0:
        raise BadValue(field, text, "must be a finite amplitude above zero")
    return value


_RAIL = re.compile(
    rf"^\s*(?:(?P<pm>±|\+-|\+/-)\s*(?P<sym>{_NUM})\s*V?"
    rf"|(?P<pos>{_NUM})\s*V?\s*/\s*(?P<neg>{_NUM})\s*V?"
    rf"|(?P<single>{_NUM})\s*V?)\s*$",
    re.IGNORECASE,
)


def parse_rails(text: str, field: str = "rails") -> tuple[float, float]:
    """Read supply rails: '±12', '+12/-12', '+5/0', '5' (single supply 0..5 V).

    Returns (positive rail, negative rail) in volts, positive above negative.
    """
    if not isinstance(text, str | int | float) or isinstance(text, bool):
        raise BadValue(field, Brief(text), "is not a pair of rails; write ±12, +12/-12, +5/0 or 5")
    m = _RAIL.match(ascii_digits(str(text)[:200]))
    if m is None:
        raise BadValue(field, text, "is not a pair of rails; write ±12, +12/-12, +5/0 or 5")
    if m.group("sym") is not None:
        v = float(m.group("sym"))
        pos, neg = abs(v), -abs(v)
    elif m.group("pos") is not None:
        pos, neg = float(m.group("pos")), float(m.group("neg"))
    else:
        v = float(m.group("single"))
        pos, neg = (v, 0.0) if v >= 0 else (0.0, v)
    return check_rails(pos, neg, field, text)


def check_rails(pos: float, neg: float, field: str, shown: object) -> tuple[float, float]:
    """(pos, neg) if they are finite, in order and span at most 2 kV; else BadValue."""
    if not (math.isfinite(pos) and math.isfinite(neg)):
        raise BadValue(field, shown, "is not a finite pair of rails")
    if pos <= neg:
        raise BadValue(field, shown, "needs the positive rail above the negative; e.g. +12/-12")
    if pos - neg > 2000:
        raise BadValue(field, shown, "spans more than 2 kV; no op-amp stage runs on that")
    return pos, neg


_SHORT = reprlib.Repr()  # keyword arguments only from Python 3.12
_SHORT.maxlevel, _SHORT.maxlist, _SHORT.maxdict = 3, 4, 4
_SHORT.maxstring = _SHORT.maxother = 40


class Brief:
    """A value shown in an error message in a few characters, however long or deeply
    nested it is (a TOML array 50,000 levels deep must not blow up the message)."""

    def __init__(self, value: object) -> None:
        self.value = value

    def __repr__(self) -> str:
        v = self.value
        kind = "a list" if isinstance(v, list | tuple) else "a table" if isinstance(v, dict) else ""
        shown = _SHORT.repr(self.value)
        return f"{shown} ({kind})" if kind else shown


def _sig(x: float, prec: int) -> str:
    import numpy as np

    return np.format_float_positional(x, precision=prec, unique=False, fractional=False, trim="-")


def fmt(value: float | int | None, kind: Kind, prec: int = 3) -> str:
    """Format an SI value for people: '1.9 V/µs', '2.2 kΩ', '1 MHz', '100 dB'."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "-"
    v = float(value)
    if math.isinf(v):
        return "∞" if v > 0 else "-∞"
    if kind == "slew":
        return f"{_sig(v / 1e6, prec)} V/µs"
    if kind == "gain":
        if v <= 0:
            return f"{_sig(v, prec)} V/V"
        return f"{_sig(20 * math.log10(v), prec + 1)} dB"
    if kind == "ratio":
        return f"{_sig(v * 100, prec)}%"
    if kind == "temperature":
        return f"{_sig(v, prec)} °C"
    if kind == "angle":
        return f"{_sig(v, prec)}°"
    if kind == "decibel":
        return f"{_sig(v, prec)} dB"
    if kind == "thermal":
        return f"{_sig(v, prec)} °C/W"
    if kind == "price":
        return f"{v:.2f}"
    if kind == "count":
        return str(int(v))
    unit = {
        "resistance": "Ω",
        "frequency": "Hz",
        "voltage": "V",
        "current": "A",
        "vnoise": "V/√Hz",
        "inoise": "A/√Hz",
        "drift": "V/°C",
        "time": "s",
        "amplitude": "Vpk",
        "capacitance": "F",
        "power": "W",
    }[kind]
    from quantiphy import Quantity

    text = str(Quantity(v, unit).render(prec=prec - 1 if prec > 1 else 0))
    number, _, rest = text.partition(" ")
    if rest.startswith("u"):  # quantiphy writes micro as 'u'; people read µ
        rest = "µ" + rest[1:]
    return f"{number} {rest}" if rest else number


def si(value: float, kind: Kind) -> str:
    """Format with full precision (used where the text must read back exactly)."""
    return repr(float(value))


def as_number(text: str, field: str) -> float:
    """A plain number (no unit): used for unit-free settings like margins."""
    try:
        v = float(ascii_digits(text) if isinstance(text, str) else text)
    except (TypeError, ValueError):
        raise BadValue(field, text, "is not a number") from None
    if not math.isfinite(v):
        raise BadValue(field, text, "is not a finite number")
    return v


__all__ = ["KINDS", "Brief", "Kind", "ascii_digits", "check_rails", "fmt", "parse", "parse_amplitude", "parse_rails", "as_number"]
