"""Design files: a stage's requirement kept in TOML, to rerun later against the stock.

``template()`` is the commented file ``picker design new`` writes: every requirement key
(picker.design.requirement.KEYS) with its unit, its default and an example; the keys a
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

from picker.design.requirement import KEYS
from picker.errors import BadValue

# key -> (unit written after an SI number, or "" for a plain number; unit in words;
# default; example value as TOML text; what it means)
FIELDS: dict[str, tuple[str, str, str, str, str]] = {
    "topology": ("", "", "none: required", '"inverting"',
                 "inverting, non-inverting, follower or difference"),
    "gain": (" V/V", "V/V or dB", "none: required (a follower has 1)", '"10"',
             "signal-gain magnitude, e.g. 10 or 20dB"),
    "vin": (" Vpk", "Vpk, Vpp or Vrms", "none: give vin or vout", '"0.5Vpk"',
            "input amplitude with its form (a bare number is the peak)"),
    "vout": (" Vpk", "Vpk, Vpp or Vrms", "none: give vin or vout", '"5Vpk"',
             "output amplitude instead of vin"),
    "freq": (" Hz", "Hz", "none: required", '"20kHz"', "top signal frequency (a sine)"),
    "ref": (" V", "V", "mid-rail", '"0V"', "DC level the signal rides on"),
    "load": (" Ω", "Ω", "none (no load)", '"2k"', "load resistance to the reference"),
    "source": (" Ω", "Ω", "0", '"50"', "source resistance"),
    "rails": ("", "V", "none: required", '"±12"', "supply rails: ±12, +12/-12, +5/0 or [12, -12]"),
    "gain-error": ("", "ratio", "1%", '"1%"', "largest closed-loop gain error at DC and at freq"),
    "tolerance": ("", "ratio", "1%", '"1%"', "tolerance of the gain-setting resistors"),
    "tolerance-rule": ("", "", "worst", '"worst"', "how tolerances add: worst or rss"),
    "phase-error": (" deg", "degrees", "none (shown, not limited)", '"5deg"',
                    "largest phase shift of the gain at freq from the ideal"),
    "offset-max": (" V", "V", "none (not checked)", '"20mV"', "largest DC output error"),
    "noise-max": (" V", "V RMS", "none (not checked)", '"100uV"', "largest output RMS noise"),
    "temp": ("", "°C", "25C", '"-40..85C"', "ambient, or a range low..high"),
    "qty": ("", "channels", "1", "2", "channels needed"),
    "margin": ("", "", "1.25", "1.25", "design margin: needs x margin, errors / margin"),
    "rf": (" Ω", "Ω", "designed (E24)", '"10k"', "the feedback resistor, exact (never snapped)"),
    "rg": (" Ω", "Ω", "designed (E24)", '"1k"',
           "the gain leg, exact: inverting input resistor, non-inverting ground leg, r1 = r3"),
    "rin": (" Ω", "Ω", "designed (E24)", '"10k"', "inverting stage: the input resistor (as rg)"),
    "zin": (" Ω", "Ω", "max(10 kΩ, 10 x source)", '"10k"',
            "least input impedance the source may see"),
    "mains": ("", "", "false", "false", "the input comes from mains (a safety caution)"),
    "light-load-swing": ("", "", "false", "false",
                         "check a part without Rsat with its light-load headroom"),
    "network": ("", "Ω", "designed (E24)", '{ rf = "47k", rg = "4k7" }',
                "the stage's own resistors instead of the designed ones"),
    "assume": ("", "", "none", '["rout=100"]',
               "values to take where a part leaves a field blank (marked assumed)"),
    "cload": (" F", "F", "0", '"1nF"', "capacitance at the output"),
    "vcm": ("", "V", "ref", '"-5..5V"', "difference stage: input common-mode level or range"),
    "cmrr": (" dB", "dB", "none", '"60dB"', "difference stage: least common-mode rejection"),
    "phase-margin": (" deg", "degrees", "45", '"45deg"', "least phase margin of the loop"),
    "ripple": ("", "amplitude@Hz", "none", '"50mVpp@100Hz"', "supply ripple on each rail"),
    "f0": (" Hz", "Hz", "none: required for a filter", '"1kHz"',
           "filter: corner (low-, high-pass) or centre (band-pass) frequency"),
    "response": ("", "", "butterworth", '"butterworth"',
                 "filter: butterworth, bessel or chebyshev"),
    "passband-ripple": (" dB", "dB", "none", '"0.5dB"', "filter: chebyshev pass-band ripple"),
    "bandwidth": (" Hz", "Hz", "none", '"200Hz"', "filter: -3 dB bandwidth of a band-pass"),
    "cap-tolerance": ("", "ratio", "5%", '"5%"', "filter: capacitor tolerance"),
    "cap-series": ("", "", "E12", '"E12"', "filter: capacitor series (E6, E12 or E24)"),
    "response-error": ("", "ratio", "2%", '"2%"',
                       "filter: how far the op-amp may move f0, Q and gain"),
    "vin-range": ("", "V", "none", '"0..80mV"',
                  "level-shift: the input range low..high, from ground (replaces vin, ref)"),
    "vout-range": ("", "V", "none", '"0.25..4.75V"',
                   "level-shift: the output at the input's low end..at its high end"),
    "shift-source": (" V", "V", "the positive rail", '"2.5V"',
                     "level-shift: the voltage the offset divider hangs from"),
}

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
    for key in KEYS:
        unit, words, default, example, meaning = FIELDS[key]
        lines.append(f"# {key}: {meaning}" + (f" [{words}]" if words else "")
                     + f"; default: {default}")
        lines.append(f"{key} = {EXAMPLE_STAGE[key]}" if key in EXAMPLE_STAGE
                     else f"# {key} = {example}")
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
        unit = FIELDS[key][0]
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
    body = [f"{key} = {_toml(_as_written(key, *values[key]))}" for key in KEYS if key in values]
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


__all__ = ["FIELDS", "design_text", "template", "write_design"]
