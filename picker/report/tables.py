"""Tables of parts for people (tabulate), with engineering units in the cells."""

from __future__ import annotations

import json
import math
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
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
    f = BY_NAME.get(name)
    if f is None:  # a stock count beside the fields (reserved)
        return "-" if value is None else str(value)
    if f.kind == "text":
        return "" if value is None else str(value)
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "-"
    return fmt(value, f.kind)  # type: ignore[arg-type]


def table(rows: Iterable[Mapping[str, Any]], columns: Sequence[str]) -> str:
    from tabulate import tabulate

    body = [[cell(c, r.get(c)) for c in columns] for r in rows]
    return tabulate(body, headers=[header(c) for c in columns], disable_numparse=True)


_EXTRA = {"updated_at": "last change",
          "reserved": "packages held for projects (picker stock reserve)"}


def card(row: Mapping[str, Any]) -> str:
    """Every field of one part, one per line, with its meaning."""
    from tabulate import tabulate

    body = []
    for name, value in row.items():
        meaning = BY_NAME[name].help if name in BY_NAME else _EXTRA.get(name, name)
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


def to_json_rows(obj: Mapping[str, Any], write: Callable[[str], Any] | None = None) -> str:
    """The same JSON as ``to_json``, laid out with each element of a top-level list on one
    line. Each element is written by json's C encoder (to_json's indentation runs in pure
    Python), so a list of a hundred thousand parts takes seconds, not minutes.

    A top-level value may be an iterator of elements (built while writing). Elements
    must hold plain JSON values. With ``write`` the text goes out piece by piece (and ""
    is returned), so a long list is never held whole.
    """
    pieces: list[str] = []
    out = write if write is not None else pieces.append

    def plain(x: Any) -> Any:
        value = _jsonable(x)
        if value is x:
            raise TypeError(f"{type(x).__name__} is not a JSON value")
        return value

    out("{")
    for k, (key, value) in enumerate(obj.items()):
        out(("," if k else "") + "\n  " + json.dumps(str(key), ensure_ascii=False) + ": ")
        if isinstance(value, Iterator) or (isinstance(value, list) and value):
            first = True
            for item in value:
                out(("[\n    " if first else ",\n    ")
                    + json.dumps(item, ensure_ascii=False, allow_nan=False, default=plain))
                first = False
            out("[]" if first else "\n  ]")
        else:
            out(to_json(value).replace("\n", "\n  "))
    out("\n}" if obj else "}")
    return "".join(pieces)


def change_lines(changes: Iterable[Any]) -> Iterator[str]:
    """`PART  FIELD: OLD -> NEW` for each field an update changes (FieldChange records),
    in engineering units; 'unknown' for no value, text quoted so spaces show."""
    for c in changes:
        old, new = _changed(c.field, c.old), _changed(c.field, c.new)
        if old == new:  # rounded alike: show the exact SI numbers
            old, new = repr(c.old), repr(c.new)
        yield f"{c.label}  {c.field}: {old} -> {new}"


def _changed(name: str, value: Any) -> str:
    if value is None:
        return "unknown"
    if BY_NAME[name].kind == "text":
        return json.dumps(value, ensure_ascii=False)
    return cell(name, value)
