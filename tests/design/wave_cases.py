"""Stages and invented parameter sets shared by the waveform, response and CLI tests."""

from __future__ import annotations

import math

from picker.design.requirement import Requirement
from tests.design.macromodel_spice import Part

# A general-purpose bipolar-like parameter set (invented), with a fast variant.
GP = Part(gbw_hz=1e6, slew_v_per_s=0.5e6, aol_v_per_v=2e5, rin_ohm=2e6, rout_ohm=75,
          iout_a=0.025, out_head_pos_v=1.5, out_head_neg_v=1.5)
WIDE = Part(gbw_hz=10e6, slew_v_per_s=0.5e6, aol_v_per_v=2e5, rin_ohm=2e6, rout_ohm=75,
            iout_a=0.025, out_head_pos_v=1.5, out_head_neg_v=1.5)
RR = Part(gbw_hz=3e6, slew_v_per_s=2e6, aol_v_per_v=1e5, rin_ohm=1e12, rout_ohm=150,
          iout_a=0.03, out_head_pos_v=0.08, out_head_neg_v=0.08)
FET = Part(gbw_hz=3e6, slew_v_per_s=13e6, aol_v_per_v=2e5, rin_ohm=1e12, rout_ohm=100,
           iout_a=0.02, out_head_pos_v=1.5, out_head_neg_v=1.5)

# 0.5 V/µs with a 3 V peak sine output: the slew-limit frequency SR/(2π·Vp)
F_SLEW = 0.5e6 / (2 * math.pi * 3.0)
SLEW_STAGE = Requirement(topology="non-inverting", gain=2, rail_pos=15, rail_neg=-15,
                         freq_hz=F_SLEW, vout_pk=3, load_ohm=10e3,
                         network={"rf": 10e3, "rg": 10e3})

# (name, part, requirement, limits the case was built to show)
CASES = [
    ("clip", GP, Requirement(topology="inverting", gain=20, rail_pos=10, rail_neg=-10,
                             freq_hz=1e3, vout_pk=10, load_ohm=10e3,
                             network={"rf": 20e3, "rg": 1e3}), ["clip"]),
    ("current", GP, Requirement(topology="non-inverting", gain=5, rail_pos=15, rail_neg=-15,
                                freq_hz=1e3, vout_pk=5, load_ohm=100,
                                network={"rf": 40e3, "rg": 10e3}), ["current"]),
    ("bandwidth", GP, Requirement(topology="non-inverting", gain=100, rail_pos=15,
                                  rail_neg=-15, freq_hz=10e3, vout_pk=1, load_ohm=2e3,
                                  network={"rf": 99e3, "rg": 1e3}), ["bandwidth"]),
    ("single-supply", RR, Requirement(topology="inverting", gain=4, rail_pos=5, rail_neg=0,
                                      freq_hz=50e3, vin_pk=0.6, load_ohm=1e3, source_ohm=600,
                                      network={"rf": 20e3, "rg": 4.4e3, "rp": 4e3}), ["clip"]),
    ("difference", GP, Requirement(topology="difference", gain=10, rail_pos=12, rail_neg=-12,
                                   freq_hz=20e3, vout_pk=8, load_ohm=2e3, source_ohm=50,
                                   network={"r1": 1e3, "r2": 10e3, "r3": 1e3, "r4": 10e3}),
     ["slew", "bandwidth"]),
    ("follower", FET, Requirement(topology="follower", gain=1, rail_pos=15, rail_neg=-15,
                                  freq_hz=300e3, vout_pk=12, load_ohm=600), ["slew"]),
]
