"""Design files and options with values of the wrong type or beyond physical ranges.

Issue 17, findings 9 and 10: each used to end in a TypeError, ZeroDivisionError,
RecursionError or a silent acceptance. Every case must be one PickerError naming the
file and the key. The ranges are common practice for op-amp stages, no source; the
2 kV rail span is the limit the --rails option already applies.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from picker.design.requirement import load_design, requirement_from
from picker.errors import PickerError

BASE = ('topology = "non-inverting"\ngain = 10\nvin = "0.1"\nfreq = "1kHz"\n'
        'rails = "±12"\n')


def _with(line: str) -> str:
    key = line.split("=", 1)[0].strip()
    kept = [x for x in BASE.splitlines() if x.split("=", 1)[0].strip() != key]
    return "\n".join([*kept, line]) + "\n"


WRONG = [
    "gain = [10]", "gain = 2024-01-01", "gain = {}", "gain = true", "load = {}",
    "load = [1]", "rails = [[12],[-12]]", "rails = [1e308, -1e308]", "rails = [12]",
    "rails = {}", "freq = [1]", "temp = {}", "temp = [[1], 2]", "qty = [1]", "qty = 1e300",
    "margin = [1]", "margin = 1e308", "mains = [true]", "topology = [1]", "vin = {}",
    "vin = 1e-320", "freq = 1e-320", "freq = '1e308k'", "gain = '10000dB'", "rf = '1e300'",
    "source = '1e300'", "gain-error = 1e-320", "offset-max = []", "noise-max = {}",
    'network = {rf = "10k", rg = "open"}',  # rg open is allowed only non-inverting: see below
    "network = [1]", 'network = {rf = [1], rg = "1k"}',
]


@pytest.mark.parametrize("line", WRONG)
def test_wrong_type_or_range_is_one_picker_error(line: str, tmp_path: Path) -> None:
    path = tmp_path / "stage.toml"
    text = _with(line)
    if line.startswith("network = {rf = \"10k\", rg = \"open\"}"):
        text = text.replace('"non-inverting"', '"inverting"')
    path.write_text(text, encoding="utf-8")
    with pytest.raises(PickerError) as info:
        load_design(path)
    assert str(info.value).startswith("stage.toml: "), str(info.value)
    assert "\n" not in str(info.value) and len(str(info.value)) < 400


@pytest.mark.parametrize("topology, network", [
    ("inverting", '{rf = "10k", rg = "inf"}'),
    ("inverting", '{rf = "0", rg = "1k"}'),
    ("inverting", '{rf = "inf", rg = "1k"}'),
    ("non-inverting", '{rf = "inf", rg = "1k"}'),
    ("follower", '{rp = "inf"}'),
    ("difference", '{r1 = "1k", r2 = "10k", r3 = "1k", r4 = "inf"}'),
    ("difference", '{r1 = "0", r2 = "10k", r3 = "1k", r4 = "10k"}'),
])
def test_open_or_shorted_legs_that_leave_the_stage_undefined(
        topology: str, network: str, tmp_path: Path) -> None:
    path = tmp_path / "stage.toml"
    gain = "1" if topology == "follower" else "10"
    path.write_text(f'topology = "{topology}"\ngain = {gain}\nvin = "0.1"\nfreq = "1kHz"\n'
                    f'rails = "±12"\nnetwork = {network}\n', encoding="utf-8")
    with pytest.raises(PickerError, match=r"^stage.toml: network[.:] ?r"):
        load_design(path)


def test_an_open_ground_leg_of_a_non_inverting_stage_is_a_follower(tmp_path: Path) -> None:
    # rg open: gain 1 + rf/rg = 1 (the follower with a feedback resistor; textbook
    # non-inverting gain, common practice, no source)
    path = tmp_path / "stage.toml"
    path.write_text('topology = "non-inverting"\ngain = 1\nvin = "0.1"\nfreq = "1kHz"\n'
                    'rails = "±12"\nnetwork = {rf = "10k", rg = "open"}\n', encoding="utf-8")
    req = load_design(path)
    assert req.network is not None and req.network["rg"] == float("inf")


def test_a_50000_deep_array_is_one_line(tmp_path: Path) -> None:
    path = tmp_path / "deep.toml"
    path.write_text("gain = " + "[" * 50_000 + "]" * 50_000 + "\n", encoding="utf-8")
    with pytest.raises(PickerError, match="^deep.toml: "):
        load_design(path)


@pytest.mark.parametrize("key, value", [
    ("freq", 1e-320), ("freq", 2e9), ("gain", 1e7), ("gain", 1e-4), ("rf", 1e300),
    ("load", 1e-6), ("vin", 1e-12), ("margin", 1e6), ("qty", 2e9), ("temp", "600C"),
])
def test_values_beyond_physical_ranges_name_the_option(key: str, value: object) -> None:
    options = {"topology": "inverting", "gain": 10, "vin": 0.01, "freq": 1e3, "rails": "±12"}
    options[key] = value
    with pytest.raises(PickerError, match=rf"^--{key}: .*(outside|below)"):
        requirement_from(options)
