"""Tables of parts for people (tabulate), with engineering units in the cells."""

from __future__ import annotations

import json
import math
from collections.abc import Iterable, Mapping, Sequence
from datetime import datetime
from typing import Any

from picker.fields import BY_NAME
from picker.quantities import fmt

LIST_COLUMNS: tuple[str, ...] = (
    "label", "tech", "channels", "gbw_hz", "slew_v_per_s", "aol_v_per_v", "vos_v",
    "ib_a", "iout_a", "supply_min_v", "supply_max_v", "qty", "location",
)


def header(name: str) -> str:
    return BY_NAME[name].header if name in BY_NAME else name


def cell(name: str, value: Any) -> str:
    """One value as people read it: engineering notation, '-' for unknown."""
    if name == "updated_at":
        return value.strftime("%Y-%m-%d %H:%M") if isinstance(value, datetime) else str(value or "")
    f = BY_NAME[name]
    if f.kind == "text":
        return "" if value is None else str(value)
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "-"
    return fmt(value, f.kind)  # type: ignore[arg-type]


def table(rows: Iterable[Mapping[str, Any]], columns: Sequence[str]) -> str:
    from tabulate import tabulate

    body = [[cell(c, r.get(c)) for c in columns] for r in rows]
    return tabulate(body, headers=[header(c) for c in columns], disable_numparse=True)


def card(row: Mapping[str, Any]) -> str:
    """Every field of one part, one per line, with its meaning."""
    from tabulate import tabulate

    body = []
    for name, value in row.items():
        meaning = BY_NAME[name].help if name in BY_NAME else "last change"
        body.append([name, cell(name, value), meaning])
    return tabulate(body, headers=["field", "value", "meaning"], disable_numparse=True)


def _jsonable(value: Any) -> Any:
    if isinstance(value, float) and math.isnan(value):
        return None
    if isinstance(value, datetime):
        return value.isoformat()
    if hasattr(value, "item"):  # numpy scalars
        return _jsonable(value.item())
    return value


def to_json(obj: Any) -> str:
    def walk(x: Any) -> Any:
        if isinstance(x, Mapping):
            return {str(k): walk(v) for k, v in x.items()}
        if isinstance(x, list | tuple):
            return [walk(v) for v in x]
        return _jsonable(x)

    return json.dumps(walk(obj), indent=2, ensure_ascii=False, allow_nan=False)
