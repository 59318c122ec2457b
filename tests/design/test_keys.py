"""The requirement keys (picker.keys): one definition each, complete and consistent."""

from __future__ import annotations

from dataclasses import fields

from picker.design.requirement import Requirement
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
