"""A stage type that cannot run a check says so: the spec names every applicable check
its model leaves out (a verdict must not be read as covering them)."""

from __future__ import annotations

from picker import api


def test_filter_stage_names_the_checks_it_leaves_out() -> None:
    s = api.spec(api.requirement(topology="vcvs-lowpass", f0="10kHz", vin="1V", rails="±12",
                                 noise_max="1mV"))
    (note,) = [n for n in s.notes if n.startswith("not checked for this stage type")]
    assert "dissipation" in note
    assert "noise" not in note and "stability" not in note  # filter_noise, filter_stability
    assert "slew" not in note  # replaced by filter_slew, not left out


def test_resistive_stage_leaves_nothing_out() -> None:
    s = api.spec(api.requirement(topology="inverting", gain=10, vin="0.1V", freq="1kHz",
                                 rails="±12", noise_max="1mV"))
    assert not any(n.startswith("not checked for this stage type") for n in s.notes)
