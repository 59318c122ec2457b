"""Boundary parts 2% either side of the filter stages' loop and noise limits.

The figures themselves (phase margin of the filter's own loop, integrated output noise)
are checked against ngspice in tests/checks/test_filter_loop_spice.py; here the limit is
set 2% either side of a demo part's figure and the verdict must flip (common practice, no
source: a limit is a promise at its boundary).
"""

from __future__ import annotations

import pandas as pd
import pytest

from picker import api
from picker.checks import Parts, run_checks
from picker.design.spec import minimum_specs
from tests.checks.test_filter_loop_spice import CASES, demo

STAGES = {k: dict(v) for k, v in CASES.items()}


def _table(topology: str, label: str, **extra: str):  # type: ignore[no-untyped-def]
    s = minimum_specs(api.built(api.requirement(topology=topology, vin="1V", rails="±15",
                                                **STAGES[topology], **extra)))
    frame = pd.DataFrame([demo(label)], index=pd.Index([label], name="label"))
    return s, run_checks(Parts(frame), s)


@pytest.mark.parametrize("topology", list(STAGES))
def test_phase_margin_limit_flips_2_percent_either_side(topology: str) -> None:
    _, t = _table(topology, "jfet-gp-a", phase_margin="10deg")
    pm = float(t.results["filter_stability"].has[0])
    assert 10 < pm < 89
    for factor, want in ((1 / 1.02, "pass"), (1.02, "fail")):
        _, t = _table(topology, "jfet-gp-a", phase_margin=f"{pm * factor!r}deg")
        assert t.results["filter_stability"].status(0) == want, (topology, pm, factor)


@pytest.mark.parametrize("topology", list(STAGES))
def test_noise_limit_flips_2_percent_either_side(topology: str) -> None:
    s, t = _table(topology, "jfet-gp-a", noise_max="1V")
    v = float(t.results["filter_noise"].has[0])
    assert 0 < v < 1e-3
    for factor, want in ((1.02, "pass"), (1 / 1.02, "fail")):
        _, t = _table(topology, "jfet-gp-a", noise_max=f"{v * factor * s.margin!r}V")
        assert t.results["filter_noise"].status(0) == want, (topology, v, factor)
