"""The text of a level-shift stage's network (``picker net`` for a level-shift stage)."""

from __future__ import annotations

import math

from tabulate import tabulate

from picker.design.levelnet import LevelNetwork
from picker.quantities import fmt
from picker.stages.levelshift import LEFT_OUT

_ROLE = {"rf": "output -> inverting input", "rg": "inverting input -> ground",
         "rp": "input -> non-inverting input", "ri": "input -> inverting input",
         "rup": "source -> non-inverting input", "rlp": "non-inverting input -> ground",
         "run": "source -> inverting input", "rln": "inverting input -> ground"}


def _r(v: float) -> str:
    return "open" if math.isinf(v) else ("short" if v == 0 else fmt(v, "resistance", 4))


def level_text(n: LevelNetwork, cautions: list[str] | tuple[str, ...] = ()) -> str:
    """The network, what it makes, its levels at both ends and what the model leaves out."""
    rows = [[k, _r(v), _r(n.exact[k]) if k in n.exact else "", _ROLE.get(k, "")]
            for k, v in n.network.items()]
    lines = [f"level-shift stage: {n.form.text}",
             f"vout = G·vin + Voffset, G {n.gain:+.6g} V/V, Voffset {fmt(n.offset_v, 'voltage', 5)}"
             f"; divider source {fmt(n.source_v, 'voltage', 4)}",
             "",
             tabulate(rows, headers=[f"resistor ({n.series})", "value", "exact", "between"]),
             "",
             f"gain made {n.gain_made:+.6g} V/V ({n.gain_error:+.3%}); offset made "
             f"{fmt(n.offset_made_v, 'voltage', 5)} ({fmt(n.offset_error_v, 'voltage', 3)})",
             f"reference divider: Thévenin {fmt(n.thevenin_v, 'voltage', 4)} behind "
             f"{_r(n.thevenin_ohm)}; reference current up to {fmt(n.ref_current_a, 'current', 3)}",
             ""]
    ends = [[fmt(e.vin, "voltage", 4), fmt(e.vp, "voltage", 4), fmt(e.vout, "voltage", 5),
             fmt(e.i_out, "current", 3), fmt(e.i_ref, "current", 3)] for e in n.ends]
    load = "no load" if math.isinf(n.load_ohm) else f"load {_r(n.load_ohm)} to ground"
    lines += [tabulate(ends, headers=["input", "inputs at", "output", "output current",
                                      "reference current"]),
              f"(ideal op-amp, E-series values, {load})", "", LEFT_OUT]
    lines += list(cautions)
    return "\n".join(lines)


__all__ = ["level_text"]
