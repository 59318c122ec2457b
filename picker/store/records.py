"""Validation of user-written part records (CSV rows, `field=value` arguments).

One function turns text into SI values and collects every problem as
``row N, column X: problem`` so an import can report all bad cells at once.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from datetime import UTC, datetime

from picker.errors import BadValue
from picker.fields import BY_NAME, FIELDS
from picker.quantities import parse

# Short names people type: the field name without its unit suffix (gbw, slew, aol...).
_SUFFIX = re.compile(r"_(hz|v_per_s|v_per_v|ohm|a_per_rthz|v_per_rthz|v_per_c|a|v)$")
ALIASES: dict[str, str] = {}
for _f in FIELDS:
    ALIASES[_f.name] = _f.name
    ALIASES[_SUFFIX.sub("", _f.name)] = _f.name
ALIASES.update({"sr": "slew_v_per_s", "ro": "rout_ohm", "vs_min": "supply_min_v",
                "vs_max": "supply_max_v"})
# the table headers without a unit (`input`, `ch`, `reorder at`) name their field too; a
# header with a unit ("SR [V/µs]") does not, as a CSV cell is read in SI units
ALIASES.update({_f.header.lower(): _f.name for _f in FIELDS if "[" not in _f.header})

TEXT_MAX = 10_000
# The largest quantity a stockroom holds: import, edit, stock add and restore accept up
# to this, and it fits the 32-bit integer column of every database picker uses.
QTY_MAX = 1_000_000_000
# Times are kept in UTC; this range fits SQLite's text times and PostgreSQL's timestamp.
YEARS = (1970, 9999)
# Characters that make a spreadsheet treat a cell as a formula (OWASP, CSV injection).
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def field_name(name: str, where: str) -> str:
    key = name.strip().lower()
    if key in ALIASES:
        return ALIASES[key]
    raise BadValue(
        where, name, "is not a part field; `picker parts fields` lists the names"
    )


# A line break inside a cell starts a new line in a spreadsheet or a line-based tool:
# the text after it gets the same guard as the start of the cell.
_GUARD_AFTER_BREAK = re.compile(r"(?<=[\r\n])(?=[=+\-@\t'])")
_GUARDED_AFTER_BREAK = re.compile(r"(?<=[\r\n])'")


def unescape_text(text: str) -> str:
    """Undo the export's formula guard (escape_text): one apostrophe is removed at the
    start of the cell and right after each line break."""
    if text.startswith("'"):
        text = text[1:]
    return _GUARDED_AFTER_BREAK.sub("", text) if "'" in text else text


def escape_text(text: str) -> str:
    """Guard a text cell against formula execution in spreadsheets (OWASP CSV injection).

    A cell that starts with a formula character (= + - @ tab CR) or an apostrophe gets
    a leading apostrophe; so does every line inside the cell (after CR or LF) that
    starts with one of = + - @ tab or an apostrophe. Apostrophes already there are
    doubled the same way, so unescape_text gives back exactly the original text.
    """
    if "\r" in text or "\n" in text:
        text = _GUARD_AFTER_BREAK.sub("'", text)
    if text.startswith(FORMULA_START) or text.startswith("'"):
        return "'" + text
    return text


def convert(name: str, raw: object, where: str, *, from_csv: bool = False) -> object:
    """One cell to its stored value: None for empty, SI float, int or text.

    from_csv: the text came from a CSV file, where a leading apostrophe is the
    export's formula guard and is removed.
    """
    f = BY_NAME[name]
    if raw is None:
        return None
    if isinstance(raw, float) and math.isnan(raw):
        return None
    text = str(raw)
    if f.kind == "text":
        if from_csv:
            text = unescape_text(text)
        if len(text) > TEXT_MAX:
            raise BadValue(where, text[:20] + "...", f"is longer than {TEXT_MAX} characters")
        if "\x00" in text:
            raise BadValue(where, text[:20], "contains a NUL character")
        if name == "label":
            text = text.strip()
            if not text:
                raise BadValue(where, raw, "is empty; every part needs a label")
            if len(text) > 100:
                raise BadValue(where, text[:20] + "...", "is longer than 100 characters")
            return text
        return text if text != "" else None
    if text.strip() == "":
        if name == "qty":
            return 0
        return None
    number: float | str = text
    try:  # fast path: a plain number in the column's SI unit (what export writes)
        as_float = float(text)
    except ValueError:
        pass
    else:
        if math.isfinite(as_float):
            number = as_float  # else let the parser explain it
    # a field that must be above zero (supply span, GBW, ...) is never negative, even of
    # a kind that may be (a voltage)
    signed = f.signed or (False if f.positive else None)
    value = parse(number, f.kind, where, allow_negative=signed, allow_zero=not f.positive)  # type: ignore[arg-type]
    if f.kind == "count":
        if value > QTY_MAX:
            raise BadValue(where, raw, "is more than a stockroom can hold")
        return int(value)
    if abs(value) > 1e30:
        raise BadValue(where, raw, "is too large to be a real op-amp figure")
    return value


def stored_value(name: str, value: object, where: str) -> object:
    """A part field read back from storage (a backup), held to the rules of an import.

    Text must be text; a number must be a finite int or float (a count a whole
    number); then the value goes through convert, so whatever an import refuses
    (too long, negative, zero where positive, above QTY_MAX, beyond 1e30) is refused.
    """
    f = BY_NAME[name]
    if value is None:
        if name in ("label", "qty"):
            raise BadValue(where, value, "is missing; every part has one")
        return None
    if f.kind == "text":
        if not isinstance(value, str):
            raise BadValue(where, value, "is not text")
        if name == "label" and value != value.strip():
            raise BadValue(where, value[:20], "has spaces around it; picker never stores that")
        return convert(name, value, where)
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise BadValue(where, str(value)[:40], "is not a number")
    if f.kind == "count" and not isinstance(value, int):
        raise BadValue(where, value, "is not a whole number")
    if isinstance(value, float) and not math.isfinite(value):
        raise BadValue(where, value, "is not a finite number")
    return convert(name, repr(value), where)


def utc_time(raw: object, where: str) -> datetime:
    """An ISO 8601 time (text or datetime) as an aware UTC datetime within YEARS.

    An offset is honoured (converted to UTC), a time without one is taken as UTC
    (what picker writes).
    """
    if isinstance(raw, datetime):
        value = raw
    else:
        try:
            value = datetime.fromisoformat(str(raw).strip())
        except ValueError:
            raise BadValue(where, str(raw)[:40],
                           "is not an ISO date-time (2026-01-31T12:00:00+00:00)") from None
    try:
        value = value.replace(tzinfo=UTC) if value.tzinfo is None else value.astimezone(UTC)
        year = value.year
    except OverflowError:  # past the year 9999 once in UTC
        year = YEARS[1] + 1
    if not YEARS[0] <= year <= YEARS[1]:
        raise BadValue(where, str(raw)[:40], f"is outside the years {YEARS[0]}..{YEARS[1]} "
                       "(in UTC); give a real date-time such as 2026-01-31T12:00:00+00:00")
    return value


def record(raw: Mapping[str, object], where: str = "") -> dict[str, object]:
    """Convert a whole mapping of field -> text; raise on the first bad value."""
    out = {name: convert(name, value, f"{where}{name}") for name, value in raw.items()}
    check_consistency(out, where)
    return out


def check_consistency(values: Mapping[str, object], where: str = "") -> None:
    lo, hi = values.get("supply_min_v"), values.get("supply_max_v")
    if isinstance(lo, float) and isinstance(hi, float) and lo > hi:
        raise BadValue(
            f"{where}supply_min_v", lo, f"is above supply_max_v ({hi}); swap the two"
        )
