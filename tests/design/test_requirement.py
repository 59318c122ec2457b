"""Reading a stage requirement: engineering text, TOML design files, one-line errors.

Expected values are the SI definitions of the units written (BIPM SI Brochure, 9th ed.:
k = 1e3, µ = 1e-6; 20 dB of voltage gain = 10 V/V; a sine's peak is √2 × RMS).
"""

from __future__ import annotations

import math
from pathlib import Path

import pytest
from numpy.testing import assert_allclose

from picker.design.requirement import Requirement, load_design, requirement_from
from picker.errors import BadRequirement, BadValue, PickerError


def test_engineering_text_is_read_in_si() -> None:
    r = Requirement.from_mapping({
        "topology": "non-inverting", "gain": "20dB", "vin": "100mVrms", "freq": "20kHz",
        "rails": "+5/0", "load": "4k7", "source": "600", "gain_error": "0.5%",
        "offset-max": "10mV", "noise-max": "50uVrms", "temp": "-40..85C", "qty": "4",
        "margin": "1.5", "rf": "22k", "mains": "no",
    })
    assert r.topology == "non-inverting"
    assert_allclose(r.gain, 10.0, rtol=1e-12)  # 20 dB = 10 V/V
    assert_allclose(r.vin, 0.1 * math.sqrt(2), rtol=1e-12)  # a sine's peak is √2 x RMS
    assert_allclose(r.vout, math.sqrt(2), rtol=1e-12)
    assert r.freq_hz == 20e3 and r.load_ohm == 4.7e3 and r.source_ohm == 600.0
    assert (r.rail_pos, r.rail_neg, r.ref) == (5.0, 0.0, 2.5)  # reference mid-rail
    assert_allclose(r.gain_error, 0.005, rtol=1e-12)
    assert_allclose(r.offset_max_v, 10e-3, rtol=1e-12)
    assert_allclose(r.noise_max_v, 50e-6, rtol=1e-12)
    assert (r.temp_min_c, r.temp_max_c, r.drift_span_c) == (-40.0, 85.0, 65.0)
    assert r.qty == 4 and r.margin == 1.5 and r.rf_ohm == 22e3 and not r.mains
    assert r.cautions == []


def test_defaults() -> None:
    r = Requirement.from_mapping({"topology": "follower", "vout": "6Vpp", "freq": "1kHz",
                                  "rails": "±12"})
    assert r.gain == 1.0 and r.vout == 3.0 and r.ref == 0.0 and r.load_ohm is None
    assert r.source_ohm == 0.0 and r.gain_error == 0.01 and r.margin == 1.25
    assert (r.temp_min_c, r.temp_max_c) == (25.0, 25.0) and r.qty == 1 and r.rf_ohm == 10e3


def test_single_temperature_applies_drift_from_25_c() -> None:
    r = Requirement.from_mapping({"topology": "follower", "vin": 1, "freq": 1e3,
                                  "rails": "±12", "temp": "85C"})
    assert (r.temp_min_c, r.temp_max_c, r.drift_span_c) == (85.0, 85.0, 60.0)


BASE = {"topology": "inverting", "gain": "10", "vin": "0.5V", "freq": "10kHz", "rails": "±12"}
BAD = [
    ({"freq": "10 V"}, "--freq: '10 V' is a voltage"),
    ({"freq": "0Hz"}, "--freq: '0Hz' is zero"),
    ({"freq": "-5kHz"}, "--freq: '-5kHz' is negative"),
    ({"topology": "non-inverting", "gain": "0.5"}, "--gain: 0.5 V/V is below 1"),
    ({"topology": "follower", "gain": "3"}, "--gain: a follower has gain 1"),
    ({"topology": "sideways"}, "--topology: 'sideways' is not a topology"),
    ({"vin": "2V"}, "--vin: an output of 20 Vpk around 0 V goes beyond the rails"),
    ({"rails": None}, "--rails: missing"),
    ({"gain": None}, "--gain: missing"),
    ({"vout": "5V"}, "give exactly one signal amplitude (both were given)"),
    ({"ref": "13V"}, "--ref: 13 V lies outside the rails"),
    ({"margin": "0.8"}, "--margin: 0.8 is below 1"),
    ({"gain-error": "150%"}, "--gain-error"),
    ({"load": "0"}, "--load: '0' is zero"),
    ({"source": "2k"}, "--source: 2000 Ω is not below the input resistor"),
    ({"colour": "red"}, "--colour: not a requirement key"),
]


@pytest.mark.parametrize("change,message", BAD, ids=[m for _, m in BAD])
def test_bad_requirements_give_one_line(change: dict[str, str | None], message: str) -> None:
    from picker.design.spec import minimum_specs

    d = {**BASE, **change}
    with pytest.raises(PickerError) as info:
        minimum_specs(Requirement.from_mapping({k: v for k, v in d.items() if v is not None}))
    text = str(info.value)
    assert message in text
    assert "\n" not in text
    assert isinstance(info.value, BadValue | BadRequirement)


def test_design_file_with_command_line_overrides(tmp_path: Path) -> None:
    path = tmp_path / "stage.toml"
    path.write_text(
        'topology = "inverting"\ngain = 10\nvin = "0.3Vpk"\nfreq = "20kHz"\n'
        'rails = "±15"\ngain_error = "2%"\nload = "2k"\n[network]\nrf = "47k"\nrg = "4k7"\n'
    )
    r = load_design(path)
    assert r.gain == 10 and r.gain_error == 0.02 and r.network == {"rf": 47e3, "rg": 4.7e3}
    over = requirement_from({"freq": 5e3, "gain-error": "1%", "load": None}, path)
    assert over.freq_hz == 5e3 and over.gain_error == 0.01 and over.load_ohm == 2e3
    assert over.vin == 0.3


def test_design_file_errors_name_the_file(tmp_path: Path) -> None:
    path = tmp_path / "stage.toml"
    path.write_text('topology = "inverting"\ngain = "ten"\nvin = 1\nfreq = "1kHz"\nrails = 12\n')
    with pytest.raises(BadValue, match=r"^stage.toml: gain: 'ten' is not a gain"):
        load_design(path)
    path.write_text("gain = [\n")
    with pytest.raises(BadRequirement, match="stage.toml: not valid TOML"):
        load_design(path)
    with pytest.raises(BadValue, match="--design: .* does not exist"):
        load_design(tmp_path / "missing.toml")
    path.write_text('topology = "inverting"\nvin = 1\nfreq = "1kHz"\nrails = 12\n')
    with pytest.raises(BadRequirement, match="^stage.toml: gain: missing"):
        load_design(path)


def test_cautions_beyond_extra_low_voltage_and_for_mains() -> None:
    r = Requirement.from_mapping({**BASE, "rails": "±40"})
    assert len(r.cautions) == 1
    assert "60 V" in r.cautions[0] and "local" in r.cautions[0] and "licensed" in r.cautions[0]
    r = Requirement.from_mapping({**BASE, "mains": "yes"})
    assert len(r.cautions) == 1 and "mains" in r.cautions[0] and "licensed" in r.cautions[0]
    r = Requirement.from_mapping({**BASE, "rails": "±30"})  # 60 V span: still extra-low voltage
    assert r.cautions == []


def test_network_names_are_checked() -> None:
    with pytest.raises(BadRequirement, match="'r3' is not a resistor of the inverting stage"):
        Requirement.from_mapping({**BASE, "network": {"rf": "10k", "r3": "1k"}})
    with pytest.raises(BadRequirement, match="needs rg as well"):
        Requirement.from_mapping({**BASE, "network": {"rf": "10k"}})
