"""A stage type defined here, registered through picker.stages, solved through the library.

An inverting stage with a capacitor across rf (a first-order low-pass integrator-limited
gain stage) is one StageType subclass; registered, it is built from a Requirement like
the built-in stages, and its closed-loop response (picker.design.response.simulate and
picker.circuit.closed_loop_gain) is compared with ngspice `.ac` on the same circuit
written out element by element (tests/design/reference.py).
"""

from __future__ import annotations

import math
from collections.abc import Iterator, Mapping
from pathlib import Path

import numpy as np
import numpy.typing as npt
import pytest
from numpy.testing import assert_allclose

from picker.circuit import Capacitor, Netlist, OpAmp, Resistor, Source, closed_loop_gain
from picker.design.loopstate import loop_state
from picker.design.requirement import Requirement
from picker.design.response import simulate
from picker.errors import PickerError
from picker.stages import StageType, kinds, register, stage, unregister
from tests.design.reference import Circuit, ngspice_gains
from tests.design.reference import OpAmp as RefOpAmp


class InvertingRC(StageType):
    """Inverting stage, cf across rf: G(s) = -(rf/(Rs + rg))/(1 + s·rf·cf), ideal op-amp."""

    name = "inverting-rc"
    network_names = ("rf", "rg", "cf")
    required = ("rf", "rg", "cf")

    def ideal_network(self, gain: float, rs: float, rf: float) -> dict[str, float]:
        raise PickerError("give the network (rf, rg, cf)")

    def reduce(self, res: Mapping[str, float], rs: float) -> tuple[float, float, float, float, float]:
        return 0.0, 0.0, 1.0, rs + res["rg"], res["rf"]  # at DC cf is open

    def netlist(self, res: Mapping[str, float], rs: float, load: float) -> Netlist:
        return Netlist((Source("s", "0", 1.0), Resistor("s", "a", rs),
                        Resistor("a", "n", res["rg"]), Resistor("n", "o", res["rf"]),
                        Capacitor("n", "o", res["cf"]), Resistor("p", "0", 0.0),
                        Resistor("o", "0", load), OpAmp("p", "n", "o")))

    def ideal_gain(self, rs: float, res: Mapping[str, npt.ArrayLike]) -> npt.NDArray[np.float64]:
        return np.asarray(res["rf"], float) / (rs + np.asarray(res["rg"], float))  # type: ignore[no-any-return]


NET = {"rf": 47e3, "rg": 4.7e3, "cf": 100e-12}  # pole of rf·cf near 33.9 kHz
RS, LOAD = 600.0, 2e3
AMPS = {  # two parameter sets (invented): a slow bipolar-like and a fast low-gain one
    "slow": RefOpAmp(2e5, 1e6, 2e6, 75.0),
    "fast": RefOpAmp(1e4, 10e6, 1e5, 200.0),
}
FREQS = [100.0, 10e3, 33e3, 200e3, 1e6, 5e6]


@pytest.fixture
def registered() -> Iterator[StageType]:
    kind = register(InvertingRC())
    yield kind
    unregister(kind.name)


def reference_circuit(name: str, amp: RefOpAmp) -> Circuit:
    e = (("V", "s", "0", 1.0), ("R", "s", "a", RS), ("R", "a", "n", NET["rg"]),
         ("R", "n", "o", NET["rf"]), ("C", "n", "o", NET["cf"]), ("R", "p", "0", 0.0),
         ("R", "o", "0", LOAD), ("OPA", "p", "n", "o", amp))
    return Circuit(name, e)


def requirement() -> Requirement:
    return Requirement("inverting-rc", 10.0, 15.0, -15.0, 10e3, vin_pk=0.1,  # type: ignore[arg-type]
                       source_ohm=RS, load_ohm=LOAD, network=NET)


def test_registered_stage_matches_ngspice_ac(registered: StageType, tmp_path: Path) -> None:
    assert "inverting-rc" in kinds()
    st = stage(requirement())
    assert st.reactive and st.topology == "inverting-rc"
    parts = {k: np.array([getattr(a, f) for a in AMPS.values()], dtype=float)
             for k, f in (("aol_v_per_v", "a0"), ("gbw_hz", "gbw"), ("rin_ohm", "rin"),
                          ("rout_ohm", "ro"))}
    resp = simulate(st, parts, 10e3, labels=tuple(AMPS), freqs=FREQS)
    circuits = [reference_circuit(n, a) for n, a in AMPS.items()]
    # the -3 dB frequencies picker finds, for ngspice to confirm below
    f3 = [float(resp.f3db[i]) for i in range(len(AMPS))]
    spice = ngspice_gains(circuits, FREQS + f3, tmp_path)
    for i, (name, amp) in enumerate(AMPS.items()):
        ref = np.array(spice[name][1:len(FREQS) + 1])
        lib = closed_loop_gain(st, [amp.a0], [amp.gbw], [amp.rin], [amp.ro], 0.0)
        direct = np.array([complex(closed_loop_gain(st, [amp.a0], [amp.gbw], [amp.rin],
                                                    [amp.ro], f)[0]) for f in FREQS])
        # ngspice .op and .ac of the same circuit: magnitude to 1e-4, phase to 0.01°
        assert_allclose(abs(lib[0]), abs(spice[name][0]), rtol=1e-4)
        assert_allclose(np.abs(direct), np.abs(ref), rtol=1e-4)
        assert_allclose(10 ** (resp.gain_db[i] / 20), np.abs(ref), rtol=1e-4)
        assert np.max(np.abs(np.degrees(np.angle(direct / ref)))) < 0.01
        # the response states the phase from the ideal stage (an inversion's 180° out)
        sign = 1.0 if st.ideal_gain >= 0 else -1.0
        assert np.max(np.abs(np.degrees(np.angle(np.exp(1j * np.radians(resp.phase_deg[i]))
                                                 / (ref * sign))))) < 0.01
        # ngspice .ac at picker's -3 dB frequency: |G| = |G(0)|/√2 to 1e-4
        at_f3 = spice[name][len(FREQS) + 1 + i]
        assert_allclose(abs(at_f3), abs(spice[name][0]) / math.sqrt(2), rtol=1e-4)


def test_registered_stage_with_input_capacitance_matches_ngspice(registered: StageType,
                                                                 tmp_path: Path) -> None:
    amp = RefOpAmp(1e5, 5e6, 1e6, 50.0, cin=20e-12)
    st = stage(requirement())
    ref = ngspice_gains([reference_circuit("cin", amp)], FREQS, tmp_path)["cin"][1:]
    got = np.array([complex(closed_loop_gain(st, [amp.a0], [amp.gbw], [amp.rin], [amp.ro], f,
                                             cin=[amp.cin])[0]) for f in FREQS])
    # ngspice .ac with Cin between the inputs: magnitude to 1e-4, phase to 0.01°
    assert_allclose(np.abs(got), np.abs(np.array(ref)), rtol=1e-4)
    assert np.max(np.abs(np.degrees(np.angle(got / np.array(ref))))) < 0.01


def test_waveform_refuses_a_stage_with_capacitors(registered: StageType) -> None:
    st = stage(requirement())
    with pytest.raises(PickerError, match="capacitors"):
        loop_state(st, [1e5], [1e6], [1e6], [50.0])


def test_unknown_topology_names_the_registered_ones() -> None:
    with pytest.raises(PickerError, match="use one of inverting, non-inverting"):
        Requirement("inverting-rc", 10.0, 15.0, -15.0, 10e3, vin_pk=0.1)  # type: ignore[arg-type]
