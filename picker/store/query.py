"""The ``--where`` query language of part lists: ``FIELD OP VALUE``.

OP is one of ``>= <= > < = !=`` (a number in the field's unit, read by
picker.quantities) or ``~`` (text contains, any case). A ``~`` pattern is matched
literally: ``_`` and ``%`` are characters, not SQL LIKE wildcards. An unknown value
never matches a filter (SQL comparison with NULL).
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from picker.errors import BadValue
from picker.fields import BY_NAME
from picker.quantities import parse
from picker.store.records import field_name

_WHERE = re.compile(r"^\s*([A-Za-z_]+)\s*(>=|<=|!=|=|>|<|~)\s*(.+?)\s*$", re.DOTALL)

_COMPARE: dict[str, Callable[[Any, Any], Any]] = {
    ">=": lambda c, v: c >= v,
    "<=": lambda c, v: c <= v,
    ">": lambda c, v: c > v,
    "<": lambda c, v: c < v,
    "=": lambda c, v: c == v,
    "!=": lambda c, v: c != v,
}


@dataclass(frozen=True)
class Condition:
    """One list filter: field, operator (>=, <=, >, <, =, !=, ~) and SI value or text."""

    field: str
    op: str
    value: float | str


def parse_where(text: str) -> Condition:
    """Read one ``FIELD OP VALUE`` filter; BadValue (naming --where) if it is not one."""
    m = _WHERE.match(text)
    if m is None:
        raise BadValue("--where", text, "is not FIELD OP VALUE; e.g. 'slew>=1V/us' or 'tech~cmos'")
    name = field_name(m.group(1), "--where")
    op, raw = m.group(2), m.group(3)
    kind = BY_NAME[name].kind
    if kind == "text" or op == "~":
        if kind != "text":
            raise BadValue("--where", text, f"uses '~' on {name}, a number; use >=, <=, = ...")
        return Condition(name, op, raw)
    value = parse(raw, kind, f"--where {name}", allow_negative=True)
    return Condition(name, op, value)


def clause(cond: Condition | str) -> Any:
    """The SQLAlchemy clause of one filter (a text is read with ``parse_where`` first)."""
    from picker.store.models import parts

    if isinstance(cond, str):
        cond = parse_where(cond)
    col = parts.c[cond.field]
    if cond.op == "~":
        return col.icontains(str(cond.value), autoescape=True)  # '_' and '%' are literal
    return _COMPARE[cond.op](col, cond.value)


__all__ = ["Condition", "clause", "parse_where"]
