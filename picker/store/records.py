"""Validation of user-written part records (CSV rows, `field=value` arguments).

One function turns text into SI values and collects every problem as
``row N, column X: problem`` so an import can report all bad cells at once.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping

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
# Characters that make a spreadsheet treat a cell as a formula (OWASP, CSV injection).
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def field_name(name: str, where: str) -> str:
    key = name.strip().lower()
    if key in ALIASES:
        return ALIASES[key]
    raise BadValue(
        where, name, "is not a part field; `picker parts fields` lists the names"
    )


def unescape_text(text: str) -> str:
    """Undo the export's formula guard: one leading apostrophe is removed."""
    return text[1:] if text.startswith("'") else text


def escape_text(text: str) -> str:
    """Guard a text cell against formula execution in spreadsheets (OWASP CSV injection)."""
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
        if value > 1e9:
            raise BadValue(where, raw, "is more than a stockroom can hold")
        return int(value)
    if abs(value) > 1e30:
        raise BadValue(where, raw, "is too large to be a real op-amp figure")
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
