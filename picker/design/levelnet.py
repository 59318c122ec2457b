"""A level-shifting stage's network from standard E-series values.

The exact network (picker.stages.levelshift.ideal_levels) is computed for every
feedback resistor ``rf`` of the series in 1 kΩ .. 1 MΩ (or the given ``--rf`` alone);
each other resistor is snapped to its series neighbours below and above, and every
combination is scored by the worse output-level error at the two ends of the input
range (ideal op-amp, ``achieved``), as a share of the output span; each resistor may
take the two series values on either side, so one snapped value can make up for
another. In the ``sum+`` form, ``rg`` also runs over the series values that set a noise
gain up to 1.5 times the least (G + Voffset/Vs), and ``rlp`` divides the surplus away: the
E-series ratios rf/rg alone lie about 10 % apart. The least error wins; among networks within 5 % of it, the one whose ``rf`` lies closest (log scale) to
``max(10 kΩ, (N - 1)·1 kΩ)``, so the gain leg stays near or above 1 kΩ.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from picker.design import series as es
from picker.design.requirement import Requirement
from picker.errors import BadRequirement
from picker.stages.levelshift import (
    Form,
    Levels,
    LevelShift,
    achieved,
    dc_levels,
    form_in,
    form_of,
    ideal_levels,
    mapping,
    source_of,
    thevenin,
)

#: The window of the feedback resistor searched, Ω.
RF_WINDOW = (1e3, 1e6)
#: How many series values on each side of an exact value are tried.
NEIGHBOURS = 2
#: In the ``sum+`` form, noise gains up to this factor above the least are tried (rlp
#: then divides the input and the source down to the gain and offset wanted).
SUM_TRIM = 1.5
#: Networks within this share of the least error count as ties.
TIE = 1.05


@dataclass(frozen=True)
class LevelNetwork:
    """The designed level-shift network and what it makes (SI units)."""

    form: Form
    series: str
    network: dict[str, float]
    exact: dict[str, float]
    source_v: float
    gain: float  # wanted, signed
    offset_v: float  # wanted
    gain_made: float
    offset_made_v: float
    ends: tuple[Levels, Levels]  # at the input range's low and high ends, E-series values
    thevenin_v: float
    thevenin_ohm: float
    load_ohm: float

    @property
    def gain_error(self) -> float:
        """Relative error of the achieved gain."""
        return self.gain_made / self.gain - 1.0

    @property
    def offset_error_v(self) -> float:
        return self.offset_made_v - self.offset_v

    @property
    def ref_current_a(self) -> float:
        """The most current drawn from the divider's source over the input range, A."""
        return max(abs(e.i_ref) for e in self.ends)

    def as_json(self) -> dict[str, Any]:
        """The network as JSON (SI units; an open leg or no load is null)."""
        return {
            "form": self.form.name, "form_text": self.form.text, "series": self.series,
            "network_ohm": _finite(self.network), "exact_ohm": _finite(self.exact),
            "source_v": self.source_v, "gain": self.gain, "offset_v": self.offset_v,
            "gain_made": self.gain_made, "offset_made_v": self.offset_made_v,
            "gain_error": self.gain_error, "offset_error_v": self.offset_error_v,
            "thevenin_v": self.thevenin_v, "thevenin_ohm": _none_if_inf(self.thevenin_ohm),
            "ref_current_a": self.ref_current_a, "load_ohm": _none_if_inf(self.load_ohm),
            "ends": [{"vin_v": e.vin, "vp_v": e.vp, "vout_v": e.vout, "iout_a": e.i_out,
                      "iref_a": e.i_ref} for e in self.ends],
        }


def _none_if_inf(v: float) -> float | None:
    return None if math.isinf(v) else v


def _finite(net: dict[str, float]) -> dict[str, float | None]:
    return {k: _none_if_inf(v) for k, v in net.items()}


def _neighbours(value: float, values: np.ndarray) -> list[float]:
    """The two series values below ``value`` and the two at or above it (0 and inf stay
    as they are): a step further than the nearest lets one resistor make up for another."""
    if value == 0 or math.isinf(value):
        return [value]
    i = int(np.searchsorted(values, value))
    out = [float(values[j]) for j in range(i - NEIGHBOURS, i + NEIGHBOURS)
           if 0 <= j < len(values)]
    return sorted(set(out))


def design_levels(req: Requirement, series: es.SeriesName = "E24") -> LevelNetwork:
    """The E-series network of a level-shift requirement (module docstring).

    Returns
    -------
    LevelNetwork
        Values in Ω, levels in V, currents in A.
    """
    if req.vin_range is None or req.vout_range is None:
        LevelShift.mapping(req)  # raises the missing-range error
    assert req.vin_range is not None and req.vout_range is not None
    g, off = mapping(req.vin_range, req.vout_range)
    vs, rs = source_of(req), req.source_ohm
    span = abs(req.vout_range[1] - req.vout_range[0])
    lo, hi = req.vin_range
    load = math.inf if req.load_ohm is None else req.load_ohm
    if req.network is not None:
        net = dict(req.network)
        return _made(req, net, net, series, g, off, vs, load)
    grid = es.values(series, 1.0, 1e8)
    rfs = [req.rf_ohm] if req.rf_pinned else [float(v) for v in grid
                                              if RF_WINDOW[0] <= v <= RF_WINDOW[1]]
    best: list[tuple[float, float, dict[str, float], dict[str, float]]] = []
    failure: BadRequirement | None = None
    trials: list[tuple[float, float | None]] = [(rf, None) for rf in rfs]
    if form_of(g, off).name == "sum+":  # a series rg above the least noise gain, rlp trims
        least = abs(g) + off / vs
        trials += [(rf, float(rg)) for rf in rfs for rg in grid
                   if least <= 1 + rf / rg <= least * SUM_TRIM]
    for rf, rg in trials:
        try:
            exact = ideal_levels(g, off, vs, rs, rf, rg)
        except BadRequirement as exc:
            failure = exc
            continue
        names = [k for k in exact if k != "rf"]
        combos = np.array(list(itertools.product(*(
            [exact[k]] if (k == "rg" and rg is not None) else _neighbours(exact[k], grid)
            for k in names))), float)
        gm, om = achieved({"rf": np.full(len(combos), rf),
                           **{k: combos[:, j] for j, k in enumerate(names)}}, rs, vs)
        err = np.maximum(abs((gm - g) * lo + (om - off)), abs((gm - g) * hi + (om - off))) / span
        k = int(np.argmin(err))
        best.append((float(err[k]), rf, {"rf": rf, **{n: float(combos[k, j])
                                                       for j, n in enumerate(names)}}, exact))
    if not best:
        assert failure is not None
        raise failure
    least = min(b[0] for b in best)
    ties = [b for b in best if b[0] <= least * TIE + 1e-12]
    n = abs(g) + max(off, 0.0) / vs
    target = max(10e3, (n - 1.0) * 1e3)
    _, _, net, exact = min(ties, key=lambda b: (abs(math.log(b[1] / target)), b[0]))
    return _made(req, net, exact, series, g, off, vs, load)


def _made(req: Requirement, net: dict[str, float], exact: dict[str, float], series: str,
          g: float, off: float, vs: float, load: float) -> LevelNetwork:
    assert req.vin_range is not None
    gm, om = (float(x) for x in achieved(net, req.source_ohm, vs))
    lo, hi = (dc_levels(net, req.source_ohm, vs, v, load) for v in req.vin_range)
    vth, rth = thevenin(net, vs)
    return LevelNetwork(form_in(net), series, net, exact, vs, g, off, gm, om, (lo, hi), vth,
                        rth, load)


def with_level_network(req: Requirement, series: es.SeriesName = "E24") -> Requirement:
    """``req`` with its E-series network (or itself when it names its own)."""
    if req.network is not None:
        return req
    return req.with_changes(network=design_levels(req, series).network)


__all__ = ["LevelNetwork", "design_levels", "with_level_network"]
