"""The requirement options of the stability, rejection and ripple checks: read in SI
units, refused with one line naming the option where they cannot apply."""

from __future__ import annotations

import pytest

from picker.design.requirement import requirement_from
from picker.errors import PickerError

BASE = {"topology": "difference", "gain": "10", "vin": "0.1V", "freq": "1kHz", "rails": "±12"}


def test_new_options_read_in_si_units() -> None:
    req = requirement_from({**BASE, "cload": "1nF", "vcm": "-5..5V", "cmrr": "60dB",
                            "phase_margin": "50deg", "ripple": "50mVpp@100Hz"})
    assert req.cload_f == pytest.approx(1e-9)
    assert req.vcm == (-5.0, 5.0)
    assert req.cmrr_min_db == 60.0
    assert req.phase_margin_deg == 50.0
    assert req.ripple == pytest.approx((0.025, 100.0))  # 50 mV peak to peak is 25 mV peak


def test_defaults_are_stated_ones() -> None:
    req = requirement_from(BASE)
    assert (req.cload_f, req.vcm, req.cmrr_min_db, req.phase_margin_deg, req.ripple) == (
        0.0, None, None, 45.0, None)


@pytest.mark.parametrize(("extra", "match"), [
    ({"topology": "inverting", "vcm": "1V"}, "--vcm: applies to the difference stage only"),
    ({"topology": "follower", "gain": None, "cmrr": "60dB"}, "--cmrr: applies to the difference"),
    ({"vcm": "5..-5V"}, "--vcm: write the range low..high"),
    ({"phase_margin": "95deg"}, "--phase-margin: '95deg' is outside"),
    ({"ripple": "50mV"}, "--ripple: '50mV' is not amplitude@frequency"),
    ({"ripple": "50mV@0Hz"}, "--ripple"),
    ({"cload": "1V"}, "--cload: '1V' is a voltage"),
])
def test_bad_values_name_the_option(extra: dict[str, str | None], match: str) -> None:
    with pytest.raises(PickerError, match=match):
        requirement_from({**BASE, **extra})


@pytest.mark.parametrize(("key", "value"), [
    ("cload", [1, 2]), ("cload", "1e999F"), ("cload", "１nF"), ("vcm", {"a": 1}),
    ("vcm", [1, 2, 3]), ("ripple", 5), ("ripple", "50mV@１e999Hz"), ("phase_margin", True),
    ("cmrr", "1e999dB"), ("cmrr", "-3dB"), ("f0", "abc"), ("zin", "-1k"),
])
def test_hostile_values_are_one_line_errors(key: str, value: object) -> None:
    """Wrong TOML types, huge exponents and negative values for the new keys are refused
    with a BadValue/BadRequirement naming the key; full-width digits are read as digits
    (a value that then makes sense is accepted)."""
    try:
        requirement_from({**BASE, key: value})
    except PickerError as exc:
        assert key.replace("_", "-") in str(exc) and "\n" not in str(exc)
    else:
        assert isinstance(value, str) and any(ord(c) > 127 for c in value)
