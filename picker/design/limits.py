"""Checks of hard limits: output swing, input common-mode range, slew rate, output
current, supply span and stock. Pure functions over part arrays (one element per part).

Swing and common mode are measured as distances from the reference level: the part
has ``(V+ - headroom+) - ref`` towards V+ and ``ref - (V- + headroom-)`` towards V-,
and the stage needs ``Vp`` on each side (not scaled by the design margin: see
picker.design.spec). The worse side is
reported. Headrooms are the datasheet's "output (or input) within X V of the rail".
"""

from __future__ import annotations

import math

import numpy as np

from picker.design.checks import CheckResult, Parts, result, worse
from picker.design.spec import Spec


def swing(p: Parts, s: Spec) -> CheckResult:
    """Output must reach ref ± Vp,out: part's rail minus output headroom, per side."""
    req = s.requirement
    need = s.minimum["swing_pos"] - req.ref  # type: ignore[operator]
    up = result("swing", "voltage", ">=", need, (req.rail_pos - req.ref) - p["out_head_pos_v"],
                note="toward V+", fields=("out_head_pos_v",))
    down = result("swing", "voltage", ">=", need, (req.ref - req.rail_neg) - p["out_head_neg_v"],
                  note="toward V-", fields=("out_head_neg_v",))
    return worse(up, down)


def common_mode(p: Parts, s: Spec) -> CheckResult:
    """Inputs reach ref ± |kp|·Vp,in; the part's common-mode range, per side."""
    req = s.requirement
    lo, hi = s.common_mode
    up = result("common_mode", "voltage", ">=", hi - req.ref,
                (req.rail_pos - req.ref) - p["cm_head_pos_v"], note="toward V+",
                fields=("cm_head_pos_v",))
    down = result("common_mode", "voltage", ">=", req.ref - lo,
                  (req.ref - req.rail_neg) - p["cm_head_neg_v"], note="toward V-",
                  fields=("cm_head_neg_v",))
    return worse(up, down)


def slew(p: Parts, s: Spec) -> CheckResult:
    """SR >= 2π·f·Vp,out·m: a sine's steepest slope (Vp·ω at the zero crossing)."""
    need = s.minimum["slew_rate"]
    assert need is not None
    return result("slew", "slew", ">=", need, p["slew_v_per_s"], fields=("slew_v_per_s",))


def output_current(p: Parts, s: Spec) -> CheckResult:
    """Iout >= m·Vp,out·(1/RL + (1 - vn/vo)/rf): load plus feedback network at the peak."""
    need = s.minimum["output_current"]
    assert need is not None
    r = result("output_current", "current", ">=", need, p["iout_a"], fields=("iout_a",))
    if need == 0:  # nothing to drive: no limit to meet, whatever the part
        return CheckResult(r.name, r.kind, r.sense, r.need, r.has,
                           np.full(len(p), math.inf), r.detail, r.note, ())
    return r


def supply(p: Parts, s: Spec) -> CheckResult:
    """The rail span must lie inside the part's rated supply range."""
    span = s.requirement.span
    high = result("supply", "voltage", ">=", span, p["supply_max_v"],
                  note="rated maximum", fields=("supply_max_v",))
    low = result("supply", "voltage", "<=", span, p["supply_min_v"],
                 note="rated minimum", fields=("supply_min_v",))
    return worse(high, low)


def stock(p: Parts, s: Spec) -> CheckResult:
    """Channels on hand (packages x channels) against channels needed.

    With the channel count unknown each package counts as one channel: enough packages
    pass; too few are unknown, not failed.
    """
    qty, ch = p["qty"], p["channels"]
    no_ch = np.isnan(ch)
    lower = qty * np.where(no_ch, 1.0, ch)
    has = np.where(no_ch & (lower < s.requirement.qty), np.nan, lower)
    r = result("stock", "count", ">=", float(s.requirement.qty), has,
               {"channels_on_hand": lambda: qty * ch}, fields=("qty", "channels"))
    return r


__all__ = ["common_mode", "output_current", "slew", "stock", "supply", "swing"]
