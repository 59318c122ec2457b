"""The requirement keys (picker.keys): one definition each, complete and consistent."""

from __future__ import annotations

import json
from dataclasses import fields
from pathlib import Path

import pytest

from picker.design.requirement import Requirement, load_design
from picker.errors import PickerError
from picker.keys import KEYS, RANGES, TOPOLOGY_NAMES
from picker.stages import kinds


def test_topology_names_are_the_registered_stage_types() -> None:
    assert TOPOLOGY_NAMES == tuple(kinds())


def test_every_key_sets_a_requirement_field_and_says_what_it_means() -> None:
    names = {f.name for f in fields(Requirement)}
    # keys whose reader fills several fields name a group: temp -> temp_min_c/temp_max_c,
    # rails -> rail_pos/rail_neg
    groups = {"temp": {"temp_min_c", "temp_max_c"}, "rails": {"rail_pos", "rail_neg"}}
    for k in KEYS:
        assert groups.get(k.field, {k.field}) <= names, k.name
        assert k.text and k.default and k.example, k.name
        assert k.kind != "choice" or k.choices, k.name
    assert len({k.name for k in KEYS}) == len(KEYS)


def test_every_range_belongs_to_a_key_or_a_part_of_one() -> None:
    parts = {"network-c", "ripple-freq"}  # a network's capacitors, a ripple's frequency
    assert set(RANGES) - {k.name for k in KEYS} <= parts


# A stage each key belongs to (the base of the hostile values below).
_BASES = {
    "resistive": {"topology": "inverting", "gain": "10", "vin": "0.1", "freq": "1kHz",
                  "rails": "±12"},
    "filter": {"topology": "vcvs-lowpass", "f0": "1kHz", "vin": "0.1", "rails": "±12"},
    "transimpedance": {"topology": "transimpedance", "iin": "10uA", "zt": "100k",
                       "f3db": "100kHz", "rails": "±12"},
    "level-shift": {"vin-range": "0..80mV", "vout-range": "0.25..4.75V", "freq": "1kHz",
                    "rails": "+5/0"},
    "coupled": {"topology": "non-inverting", "gain": "10", "vin": "0.1", "freq": "1kHz",
                "rails": "+5/0", "coupling": "ac", "fmin": "20Hz"},
}


def _base(key: str) -> dict[str, object]:
    text = next(k.text for k in KEYS if k.name == key)
    if text.startswith("filter:"):
        return dict(_BASES["filter"])
    if text.startswith("transimpedance:"):
        return dict(_BASES["transimpedance"])
    if text.startswith("level-shift:"):
        return dict(_BASES["level-shift"])
    if key in ("coupling", "fmin", "low-corner"):
        return dict(_BASES["coupled"])
    return dict(_BASES["resistive"])


# wrong TOML types, huge and tiny exponents, digits of other scripts, NaN, empty text
HOSTILE: list[object] = [[1, 2, 3], {"a": 1}, True, 1e308, -1e308, 1e-320, "１０", "٣",
                         "1e308k", "NaN", "", "inf", "0", -1]


@pytest.mark.parametrize("key", [k.name for k in KEYS])
def test_every_key_meets_hostile_values_with_one_line_or_a_stage(key: str,
                                                                 tmp_path: Path) -> None:
    """Each value either builds a stage or is one PickerError line naming the file and
    key (common practice, no source: the project's rule for bad input)."""
    for i, value in enumerate(HOSTILE):
        stage = {**_base(key), key: value}
        path = tmp_path / f"stage{i}.toml"
        body = []
        for k, v in stage.items():
            if isinstance(v, dict):
                body.append(f"{k} = {{ " + ", ".join(f'{a} = {b!r}' for a, b in v.items())
                            + " }")
            elif isinstance(v, bool):
                body.append(f"{k} = {'true' if v else 'false'}")
            elif isinstance(v, str):
                body.append(f"{k} = {json.dumps(v, ensure_ascii=False)}")
            else:
                body.append(f"{k} = {v!r}")
        path.write_text("\n".join(body) + "\n", encoding="utf-8")
        try:
            load_design(path)
        except PickerError as exc:
            msg = str(exc)
            assert "\n" not in msg and len(msg) < 500, (key, value, msg)
            assert msg.startswith(f"stage{i}.toml: "), (key, value, msg)


@pytest.mark.parametrize("name", list(_BASES))
def test_the_hostile_bases_are_stages(name: str, tmp_path: Path) -> None:
    """The property above is not vacuous: each base builds a stage as it stands."""
    path = tmp_path / "base.toml"
    path.write_text("\n".join(f"{k} = {json.dumps(v, ensure_ascii=False)}"
                              for k, v in _BASES[name].items()) + "\n", encoding="utf-8")
    req = load_design(path)
    assert req.topology == _BASES[name].get("topology", "level-shift")
