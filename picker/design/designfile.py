"""Design files: a stage's requirement kept in TOML, to rerun later against the stock.

``template()`` is the commented file ``picker design new`` writes: every requirement key
(picker.keys) with its unit, its default and an example; the keys a
stage cannot do without are set to an example stage, the others commented out.
``design_text(values)`` writes a requirement as given (picker.design.requirement.given:
a design file's values with the options over them) so that reading it back builds the
same requirement: text the user wrote is kept as written, numbers the command line has
already converted are written in SI with their unit in full precision (``repr`` of the
float, which reads back to the same float), e.g. ``freq = "20000.0 Hz"``.
``write_design`` puts the text in place through picker.store.outfile (never the
stockroom's own file; an existing file only when asked).
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from picker.errors import BadValue
from picker.keys import BY_NAME, KEYS

#: The keys ``template()`` sets to an example stage (a stage needs them).
EXAMPLE_STAGE: dict[str, str] = {"topology": '"inverting"', "gain": '"10"',
                                 "vin": '"0.5Vpk"', "freq": '"20kHz"', "rails": '"±12"'}


def template() -> str:
    """The commented TOML template of every requirement key (``picker design new``)."""
    lines = ["# picker design file: one amplifier stage's requirement.",
             "# Use it with --design FILE on spec, pick, why, net, wave, bode and netlist;",
             "# command-line options override the values here. Values take units as on the",
             "# command line (20kHz, 4k7, 1%); a key left commented out takes its default.",
             ""]
    for k in KEYS:
        lines.append(f"# {k.name}: {k.text}" + (f" [{k.words}]" if k.words else "")
                     + f"; default: {k.default}")
        lines.append(f"{k.name} = {EXAMPLE_STAGE[k.name]}" if k.name in EXAMPLE_STAGE
                     else f"# {k.name} = {k.example}")
    return "\n".join(lines) + "\n"


def _toml(value: Any) -> str:
    """One TOML value: strings, numbers, booleans, arrays and inline tables."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else ("nan" if math.isnan(value)
                                                          else "inf" if value > 0 else "-inf")
    if isinstance(value, str):
        # a JSON string is a TOML basic string, once DEL is escaped too (TOML 1.0, strings)
        return json.dumps(value, ensure_ascii=False).replace("\x7f", "\\u007f")
    if isinstance(value, Mapping):
        return "{ " + ", ".join(f"{_toml(str(k))} = {_toml(v)}" for k, v in value.items()) + " }"
    if isinstance(value, Sequence):
        return "[" + ", ".join(_toml(v) for v in value) + "]"
    raise BadValue("design value", value, "cannot be written to a design file")


def _as_written(key: str, value: Any, where: str) -> Any:
    """A given value in a form that reads back the same: a design file's value as it
    was; an option's text as typed; an option's number (converted to SI by the command
    line) in full precision with its SI unit; rails as [positive, negative]."""
    if where != "--" or isinstance(value, str | bool | int):
        return value
    if isinstance(value, float):
        unit = BY_NAME[key].unit
        return f"{value!r}{unit}" if unit else value
    if key == "rails":
        pos, neg = value
        return [float(pos), float(neg)]
    if isinstance(value, tuple):  # --assume FIELD=VALUE, repeated
        return list(value)
    return value


def design_text(values: Mapping[str, tuple[Any, str]], *, origin: str = "") -> str:
    """TOML for a requirement as given (key -> (value, where), as
    picker.design.requirement.given returns), keys in the order of KEYS."""
    head = ["# picker design file: a stage's requirement as given"
            + (f" ({origin})" if origin else ""),
            "# (`picker design new FILE` writes a template listing every key)", ""]
    body = [f"{k.name} = {_toml(_as_written(k.name, *values[k.name]))}" for k in KEYS
            if k.name in values]
    return "\n".join(head + body) + "\n"


def write_design(path: str | Path, text: str, protected: Sequence[Path], *,
                 overwrite: bool, what: str = "FILE") -> None:
    """Write a design file in one step (a temporary file replaces the target when
    complete). Refused, nothing written: the stockroom's own files, and an existing file
    unless ``overwrite``."""
    from picker.store.outfile import replacing

    target = Path(path)
    if not overwrite and target.expanduser().exists():
        raise BadValue(what, str(path), "exists already; choose another name or give "
                       "--force to replace it")
    with replacing(target, protected, what) as tmp:
        tmp.write_text(text, encoding="utf-8")


__all__ = ["design_text", "template", "write_design"]
