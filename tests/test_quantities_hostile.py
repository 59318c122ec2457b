"""Hostile values for the quantity parser: read whole or refused, never half-read.

Issue 17, findings 9 and 10. Digit values of other scripts come from the Unicode
Character Database (Python's unicodedata, category Nd); SI prefixes from the BIPM SI
Brochure, 9th ed., table 7; dB as 20·log10 of a voltage ratio (IEC 60027-3).
"""

from __future__ import annotations

import unicodedata

import pytest
from numpy.testing import assert_allclose

from picker.errors import BadValue
from picker.quantities import parse, parse_amplitude, parse_rails

# (written, the same value in ASCII digits) in full-width, Arabic-Indic, Devanagari, Thai
OTHER_SCRIPTS = ["１０k", "١٠k", "१०k", "๑๐k", "４k７", "２.２M"]


@pytest.mark.parametrize("text", OTHER_SCRIPTS)
def test_digits_of_another_script_read_exactly_as_ascii(text: str) -> None:
    ascii_text = "".join(str(unicodedata.decimal(c)) if unicodedata.category(c) == "Nd"
                         else c for c in text)  # source: Unicode Character Database
    assert parse(text, "resistance") == parse(ascii_text, "resistance")


def test_other_script_digits_in_amplitudes_and_rails() -> None:
    assert parse_amplitude("３Vpk") == 3.0
    assert parse_rails("±１２") == (12.0, -12.0)


@pytest.mark.parametrize("text, kind", [
    ("1e308k", "resistance"), ("1e308k", "frequency"), ("9e307M", "frequency"),
    ("10000dB", "gain"), ("1e30dB", "gain"),
])
def test_a_prefix_or_decibels_that_overflow_are_refused(text: str, kind: str) -> None:
    with pytest.raises(BadValue, match="too large"):
        parse(text, kind)  # type: ignore[arg-type]


def test_a_prefix_after_an_exponent_is_applied() -> None:
    # quantiphy reads '1e3k' as 1e3 with the unit 'k'; the prefix must still multiply
    # (BIPM SI Brochure table 7: k = 1e3)
    assert_allclose(parse("1e3k", "resistance"), 1e6, rtol=1e-15)
    assert_allclose(parse("2.5e-3M", "frequency"), 2.5e3, rtol=1e-15)


def test_capital_m_is_mega_not_milli_in_a_gain_unit() -> None:
    # BIPM SI Brochure table 7: M = 1e6, m = 1e-3; V/MV is 1e-6 V/V, not 1e3
    assert parse("200V/mV", "gain") == 200e3
    with pytest.raises(BadValue):
        parse("200V/MV", "gain")
    assert parse("200 v/mv", "gain") == 200e3  # a lower-case unit letter is still read
    with pytest.raises(BadValue):
        parse("5V/Ms", "slew")


@pytest.mark.parametrize("value", [[10], {}, [[12], [-12]], (1, 2), None, b"10"])
def test_a_non_scalar_is_one_bad_value(value: object) -> None:
    with pytest.raises(BadValue):
        parse(value, "gain")  # type: ignore[arg-type]
    with pytest.raises(BadValue):
        parse_amplitude(value)  # type: ignore[arg-type]
    with pytest.raises(BadValue):
        parse_rails(value)  # type: ignore[arg-type]


def test_a_deeply_nested_value_has_a_short_message() -> None:
    deep: list[object] = []
    for _ in range(50_000):
        deep = [deep]
    with pytest.raises(BadValue) as info:
        parse(deep, "gain")  # type: ignore[arg-type]
    assert len(str(info.value)) < 200
