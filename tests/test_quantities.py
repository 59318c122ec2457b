"""The engineering-value parser against outside tables and round trips."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from picker.errors import BadValue, PickerError
from picker.quantities import KINDS, fmt, parse, parse_amplitude, parse_rails

# BIPM, The International System of Units (SI Brochure), 9th ed. 2019, table 7 (prefixes);
# plus the trade's 'meg' (SPICE) and 'u' for micro.
BIPM_PREFIXES = [
    ("T", 1e12), ("G", 1e9), ("M", 1e6), ("k", 1e3), ("m", 1e-3), ("u", 1e-6), ("µ", 1e-6),
    ("μ", 1e-6), ("n", 1e-9), ("p", 1e-12), ("f", 1e-15), ("meg", 1e6),
]


@pytest.mark.parametrize("prefix, factor", BIPM_PREFIXES)
def test_si_prefixes_bipm_table_7(prefix: str, factor: float) -> None:
    # source: BIPM SI Brochure 9th ed., table 7
    assert_allclose(parse(f"3.3{prefix}Hz", "frequency"), 3.3 * factor, rtol=1e-12)
    assert_allclose(parse(f"3.3{prefix}", "resistance"), 3.3 * factor, rtol=1e-12)


# IEC 60062:2016, clause 4 (letter and digit code for resistance values): the letter
# stands for the decimal point and the multiplier (R = 1, k = 1e3, M = 1e6, G = 1e9).
IEC_60062 = [("4k7", 4.7e3), ("2M2", 2.2e6), ("4R7", 4.7), ("1R0", 1.0), ("R47", 0.47),
             ("47R", 47.0), ("1G0", 1e9), ("10k", 1e4), ("6K8", 6.8e3)]


@pytest.mark.parametrize("code, ohms", IEC_60062)
def test_iec_60062_letter_codes(code: str, ohms: float) -> None:
    assert_allclose(parse(code, "resistance"), ohms, rtol=1e-12)  # source: IEC 60062 clause 4


@pytest.mark.parametrize("db", [0.0, 6.0, 20.0, 100.0, 120.0, 86.5])
def test_db_gain_is_20_log10(db: float) -> None:
    # definition of the decibel for a voltage ratio: G_dB = 20·log10(V/V) (IEC 60027-3)
    assert_allclose(parse(f"{db}dB", "gain"), 10 ** (db / 20), rtol=1e-12)


@pytest.mark.parametrize(
    "text, kind, si",
    [
        ("0.5V/us", "slew", 5e5), ("13 V/µs", "slew", 13e6), ("200V/mV", "gain", 2e5),
        ("100000", "gain", 1e5), ("18nV/rtHz", "vnoise", 18e-9), ("0.8 pA/√Hz", "inoise", 0.8e-12),
        ("1%", "ratio", 0.01), ("85C", "temperature", 85.0), ("-40 °C", "temperature", -40.0),
        ("10meg", "resistance", 1e7), ("4.7 kΩ", "resistance", 4700.0), ("20mA", "current", 0.02),
        ("1 A", "current", 1.0), ("2uV/C", "drift", 2e-6), ("1.5MHz", "frequency", 1.5e6),
    ],
)
def test_trade_forms(text: str, kind: str, si: float) -> None:
    # unit definitions (SI Brochure 9th ed.): 1 V/µs = 1e6 V/s, 1 V/mV = 1e3 V/V
    assert_allclose(parse(text, kind), si, rtol=1e-12)  # type: ignore[arg-type]


@pytest.mark.parametrize(
    "text, peak",
    # sine relations: Vpp = 2·Vpk, Vrms = Vpk/√2 (any circuits textbook, from memory)
    [("3Vpk", 3.0), ("6Vpp", 3.0), ("2.12Vrms", 2.12 * math.sqrt(2)), ("3", 3.0), ("100mVpp", 0.05)],
)
def test_amplitude_forms(text: str, peak: float) -> None:
    assert_allclose(parse_amplitude(text), peak, rtol=1e-12)


@pytest.mark.parametrize(
    "text, rails",
    [("±12", (12, -12)), ("+12/-12", (12, -12)), ("+5/0", (5, 0)), ("5", (5, 0)),
     ("+-15", (15, -15)), ("+15V/-5V", (15, -5))],
)
def test_rails(text: str, rails: tuple[float, float]) -> None:
    assert parse_rails(text) == rails  # common practice, no source: how rails are written


@pytest.mark.parametrize(
    "text, kind, words",
    [("10 V", "frequency", "is a voltage"), ("abc", "resistance", "is not a resistance"),
     ("1..2k", "resistance", "is not"), ("NaN", "gain", "is not a gain"),
     ("inf", "frequency", "is not a frequency"), ("-5", "frequency", "negative"),
     ("1e400", "frequency", "finite"), ("", "slew", "is not a slew")],
)
def test_bad_values_name_field_value_and_expectation(text: str, kind: str, words: str) -> None:
    with pytest.raises(BadValue) as info:
        parse(text, kind, "--freq")  # type: ignore[arg-type]
    message = str(info.value)
    assert message.startswith("--freq: ")
    assert repr(text) in message and words in message
    assert isinstance(info.value, ValueError)


@pytest.mark.parametrize("text", ["±0", "+5/+5", "0/5", "twelve", "+1e9/-1e9"])
def test_bad_rails(text: str) -> None:
    with pytest.raises(BadValue, match="rails"):
        parse_rails(text)


@pytest.mark.parametrize(
    "value, kind, shown",
    [(1.9e6, "slew", "1.9 V/µs"), (2200.0, "resistance", "2.2 kΩ"), (1e6, "frequency", "1 MHz"),
     (1e5, "gain", "100 dB"), (18e-9, "vnoise", "18 nV/√Hz"), (2e-6, "drift", "2 µV/°C")],
)
def test_format(value: float, kind: str, shown: str) -> None:
    assert fmt(value, kind) == shown  # type: ignore[arg-type]


ROUND_TRIP_KINDS = [k for k in KINDS if k not in ("count", "price", "amplitude")]


@settings(max_examples=1000, deadline=None)
@given(
    kind=st.sampled_from(ROUND_TRIP_KINDS),
    mantissa=st.floats(min_value=1.0, max_value=9.999),
    exponent=st.integers(min_value=-14, max_value=13),
)
def test_round_trip_within_format_precision(kind: str, mantissa: float, exponent: int) -> None:
    x = mantissa * 10.0**exponent
    if kind == "temperature":
        x = float(np.clip(x, -200, 1000))
    shown = fmt(x, kind, prec=4)  # type: ignore[arg-type]
    back = parse(shown, kind)  # type: ignore[arg-type]
    rtol = 2e-3 if kind == "gain" else 1e-3  # 4 significant digits (dB: 5 digits of a log)
    assert_allclose(back, x, rtol=rtol, atol=1e-3 if kind == "temperature" else 0)


@settings(max_examples=3000, deadline=None)
@given(text=st.text(max_size=30) | st.from_regex(r"[-+]?[0-9.,eE]{0,6} ?[a-zA-Zµ°%/√]{0,6}", fullmatch=True),
       kind=st.sampled_from(list(KINDS)))
def test_only_our_error_type_escapes(text: str, kind: str) -> None:
    try:
        value = parse(text, kind, "fuzz")  # type: ignore[arg-type]
    except PickerError as exc:
        assert "fuzz" in str(exc) or kind == "amplitude"
    else:
        assert math.isfinite(value)
