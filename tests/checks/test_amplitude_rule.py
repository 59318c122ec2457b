"""Each check's declared dependence on the signal amplitude (``Check.amplitude``, which
the operating envelope relies on) is what the check does: run at an amplitude and at
1.7 times it, a ``proportional`` check's margin × amplitude and an ``independent``
check's margin stay the same for every demo part. Pure arithmetic on the checks' own
results: the property, not a value, is checked (common practice, no source)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from picker import api
from picker.checks import Parts, applicable, run_checks
from picker.data import demo_stockroom
from picker.design.spec import minimum_specs

STAGES = [
    dict(topology="inverting", gain=10, vout="2V", freq="20kHz", rails="±12", load="2k",
         offset_max="20mV", noise_max="1mV", tolerance="0.1%"),
    dict(topology="non-inverting", gain=4.7, vout="1V", freq="50kHz", rails="+5/0",
         load="10k", source="600", temp="-40..85C", offset_max="5mV", qty=3),
    dict(topology="follower", vout="0.5V", freq="100kHz", rails="±5", noise_max="100uV",
         phase_error="5deg"),
    dict(topology="difference", gain=2, vout="1V", freq="1kHz", rails="±15",
         gain_error="0.5%"),
    dict(topology="difference", gain=10, vout="1V", freq="1kHz", rails="±15",
         cmrr="60dB", tolerance="0.1%", offset_max="10mV"),
]


@pytest.fixture(scope="module")
def parts() -> Parts:
    with demo_stockroom().open("r", encoding="utf-8") as f:
        frame = pd.read_csv(f).set_index("label")
    frame["available"] = frame["qty"]
    return Parts(frame)


@pytest.mark.parametrize("options", STAGES, ids=[s["topology"] for s in STAGES])
def test_declared_amplitude_rule_holds(options: dict[str, object], parts: Parts) -> None:
    req = api.built(api.requirement(**options))
    louder = req.with_changes(vout_pk=req.vout * 1.7, vin_pk=None)
    a, b = minimum_specs(req), minimum_specs(louder)
    ta, tb = run_checks(parts, a), run_checks(parts, b)
    seen = set()
    for check in applicable(a):
        rule = check.amplitude_rule(a)
        ma, mb = ta.results[check.name].margin, tb.results[check.name].margin
        both = np.isfinite(ma) & np.isfinite(mb)
        if rule == "proportional":
            assert_allclose(req.vout * ma[both], louder.vout * mb[both], rtol=1e-9,
                            err_msg=check.name)
        elif rule in ("independent", "none"):
            assert_allclose(ma[both], mb[both], rtol=1e-12, err_msg=check.name)
        seen.add(rule)
    assert "proportional" in seen and "independent" in seen
