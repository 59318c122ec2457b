"""to_json_rows: the JSON the standard library writes, one list element per line."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from picker.report.tables import to_json_rows

OBJ = {
    "spec": {"gain": 10.0, "min": {"gbw": 4.2e6, "rin": None}},
    "accepted": [{"part": "bipolar general purpose A", "checks": {"slew": {"status": "pass",
                                                                          "margin": 1.5}}},
                 {"part": "µ-power B", "checks": {}}],
    "rejected": [],
    "counts": {"accepted": 2},
}


def test_same_json_as_the_standard_library() -> None:
    text = to_json_rows(OBJ)
    assert json.loads(text) == json.loads(json.dumps(OBJ))  # the reference: json itself
    lines = [ln.strip().rstrip(",") for ln in text.splitlines() if '"part"' in ln]
    assert [json.loads(ln) for ln in lines] == OBJ["accepted"]  # one line per element


def test_iterators_are_written_piece_by_piece() -> None:
    pieces: list[str] = []
    lazy = {**OBJ, "accepted": iter(OBJ["accepted"]), "rejected": iter([])}
    assert to_json_rows(lazy, write=pieces.append) == ""
    assert len(pieces) > 5
    assert json.loads("".join(pieces)) == json.loads(json.dumps(OBJ))


def test_numpy_numbers_become_plain_and_nan_is_refused() -> None:
    text = to_json_rows({"accepted": [{"qty": np.int64(3), "gbw": np.float64(1e6)}]})
    assert json.loads(text) == {"accepted": [{"qty": 3, "gbw": 1e6}]}
    with pytest.raises(ValueError):
        to_json_rows({"accepted": [{"gbw": math.nan}]})
