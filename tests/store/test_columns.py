"""The lean read (Store.parts_columns, parts_frame) against pandas.read_sql of the same rows."""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_array_equal

from picker.store import Condition
from picker.store import columns as columns_module

COLUMNS = ["gbw_hz", "slew_v_per_s", "aol_v_per_v", "rout_ohm", "qty", "channels", "price"]


def reference(store: Any, where: str = "") -> pd.DataFrame:
    """pandas' own read of the same columns, ordered by label (the outside reference)."""
    sql = f"SELECT label, {', '.join(COLUMNS)} FROM parts {where} ORDER BY label"
    with store.engine.connect() as conn:
        return pd.read_sql(sql, conn).set_index("label")


@pytest.mark.parametrize("chunk", [3, 5_000])  # many chunks, and one
def test_parts_columns_match_read_sql(store: Any, chunk: int,
                                      monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(columns_module, "CHUNK_ROWS", chunk)
    labels, cols = store.parts_columns(COLUMNS)
    ref = reference(store)
    assert list(labels) == list(ref.index) and len(labels) >= 5
    assert list(cols) == COLUMNS
    for name in COLUMNS:
        assert cols[name].dtype == np.float64
        assert_array_equal(cols[name], ref[name].to_numpy(dtype=float, na_value=np.nan))


def test_conditions_and_min_qty_are_applied_in_sql(store: Any) -> None:
    labels, cols = store.parts_columns(COLUMNS, [Condition("slew_v_per_s", ">=", 1e6)],
                                       min_qty=5)
    ref = reference(store, "WHERE slew_v_per_s >= 1000000 AND qty >= 5")
    assert 0 < len(labels) == len(ref) < store.count()
    assert_array_equal(cols["slew_v_per_s"], ref["slew_v_per_s"].to_numpy())


def test_parts_frame_keeps_its_shape(store: Any) -> None:
    frame = store.parts_frame()
    with store.engine.connect() as conn:
        ref = pd.read_sql("SELECT * FROM parts ORDER BY label", conn).set_index("label")
    assert frame.index.name == "label" and list(frame.index) == list(ref.index)
    assert frame.columns[-1] == "updated_at"
    assert pd.api.types.is_datetime64_any_dtype(frame["updated_at"])
    for name in ("gbw_hz", "qty", "channels"):
        assert frame[name].dtype == np.float64
        assert_array_equal(frame[name].to_numpy(), ref[name].to_numpy(dtype=float, na_value=np.nan))
    assert list(frame["tech"].fillna("")) == list(ref["tech"].fillna(""))
    narrow = store.parts_frame(["label", "tech", "gbw_hz"])
    assert list(narrow.columns) == ["tech", "gbw_hz"]


def test_parts_columns_refuses_text_fields(store: Any) -> None:
    with pytest.raises(ValueError, match="numeric"):
        store.parts_columns(["tech"])
