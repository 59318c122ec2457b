"""The filter stages' phase margin and output noise against ngspice.

Reference: each filter written out element by element from its stage description
(tests/design/test_filter_spice.py ``spice_circuit``, independent of picker's netlists),
with a two-pole op-amp macromodel written here: Rin, the differential and common-mode
input capacitances, a transconductance into Rx ‖ Cx (the first pole GBW/A0), a buffer,
an RC second pole at picker's ωp2 (``second_pole``: what is compared is the loop, not
the derivation, which tests/checks/test_stability_spice.py checks), a buffer and Ro.

- phase margin: ngspice .ac with the loop opened between the second pole and the output
  buffer (1 MH closes it at DC, 1 MF injects the test source), T = -v(x2)/v(xb);
- noise: ngspice .noise (its own resistor thermal noise 4kTR at the circuit
  temperature); the op-amp's en is a CCVS in series with the non-inverting input, each
  in a CCCS into its input, both driven by the thermal-noise current of a 1 Ω resistor
  shorted by a 0 V source (density √(4kT/1 Ω), scaled by the source's gain to en or in);
  the macromodel's own resistors are noiseless (``noisy=0``). ngspice's output spectrum
  over picker's band (f0/10⁴ .. 10·GBW, 200 points a decade), integrated here by the
  trapezoid rule in f (picker's own rule is in ln f) and closed at both ends the way
  picker closes its integral (flat below, f⁻² above: y·f at each end point of ngspice's
  spectrum), must match picker's within 1%. Where ngspice's own ``onoise_total`` is a
  number (it gives NaN when a stretch of the spectrum is flat) it must agree with that
  trapezoid within 1% in power.
"""

from __future__ import annotations

import math
import subprocess
from pathlib import Path

import numpy as np
import pytest

from picker import api
from picker.checks import Parts, run_checks
from picker.checks.filternoise import DECADES, TOP, output_noise
from picker.checks.stability import stage_margins
from picker.circuit.opamp import second_pole
from picker.data import demo_stockroom
from picker.stages import stage
from picker.stages.filterbase import FilterStage
from tests.design.reference import OpAmp, need_ngspice
from tests.design.test_filter_spice import CASES, LOAD, RS, spice_circuit

K_B = 1.380649e-23  # J/K, exact (SI 2019; CODATA 2018)
FIELDS = ("aol_v_per_v", "gbw_hz", "pm_unity_deg", "rin_ohm", "rout_ohm", "cin_diff_f",
          "cin_cm_f", "en_v_per_rthz", "in_a_per_rthz", "slew_v_per_s", "iout_a")


def demo(label: str) -> dict[str, float]:
    import pandas as pd

    rows = pd.read_csv(demo_stockroom(), index_col="label")
    return {k: float(rows.loc[label, k]) for k in FIELDS}


def built(topology: str, **extra: str) -> tuple[object, FilterStage]:
    req = api.built(api.requirement(
        topology=topology, vin="1V", rails="±15", load=LOAD, noise_max="1mV", temp="0..70C",
        source=RS if topology != "vcvs-highpass" else 0, **CASES[topology], **extra))
    st = stage(req)
    assert isinstance(st, FilterStage)
    return req, st


def _v(x: float) -> str:
    return repr(float(x))


def deck(st: FilterStage, part: dict[str, float], control: list[str], *, temp_c: float,
         broken: bool = False, cload: float = 0.0) -> str:
    """The filter with the two-pole macromodel (module docstring)."""
    elements = spice_circuit("f", st.topology, dict(st.resistors), OpAmp(1, 1, None, None)).elements
    lines = ["* filter loop and noise reference", f".options temp={_v(temp_c)} tnom={_v(temp_c)}"]
    for i, e in enumerate(elements):
        if e[0] == "V":
            lines.append(f"Vs {e[1]} {e[2]} DC 0 AC {0 if broken else 1}")
        elif e[0] == "R" and e[3] == 0:
            lines.append(f"VW{i} {e[1]} {e[2]} DC 0")
        elif e[0] in ("R", "C"):
            lines.append(f"{e[0]}{i} {e[1]} {e[2]} {_v(e[3])}")
        else:
            p, n, o = e[1], e[2], e[3]
    if cload:
        lines.append(f"CL {o} 0 {_v(cload)}")
    four_kt = 4 * K_B * (temp_c + 273.15)
    rx = 1e-3
    cx = part["aol_v_per_v"] / (2 * math.pi * part["gbw_hz"] * rx)
    wp2 = float(second_pole(part["pm_unity_deg"], part["gbw_hz"], part["aol_v_per_v"]))
    lines += [
        # en in series with the non-inverting input, in into each input
        "Vsen z1 0 DC 0", "Rsen z1 0 1", f"Hen pp {p} Vsen {_v(part['en_v_per_rthz'] / math.sqrt(four_kt))}",
        "Vsip z2 0 DC 0", "Rsip z2 0 1", f"Fip 0 pp Vsip {_v(part['in_a_per_rthz'] / math.sqrt(four_kt))}",
        "Vsin z3 0 DC 0", "Rsin z3 0 1", f"Fin 0 {n} Vsin {_v(part['in_a_per_rthz'] / math.sqrt(four_kt))}",
        f"Rin pp {n} {_v(part['rin_ohm'])} noisy=0", f"Cind pp {n} {_v(part['cin_diff_f'])}",
        f"Ccmp pp 0 {_v(part['cin_cm_f'])}", f"Ccmn {n} 0 {_v(part['cin_cm_f'])}",
        f"G1 0 x pp {n} {_v(part['aol_v_per_v'] / rx)}", f"Rx x 0 {_v(rx)} noisy=0",
        f"Cx x 0 {_v(cx)}", "E2 y 0 x 0 1", "R2p y x2 1 noisy=0",
        f"C2p x2 0 {_v(1 / wp2)}",
    ]
    reads = "x2"
    if broken:
        lines += ["Lbrk x2 xb 1e6", "Cinj xb tst 1e6", "Vtst tst 0 DC 0 AC 1"]
        reads = "xb"
    lines += [f"Eo yo 0 {reads} 0 1", f"Ro yo {o} {_v(part['rout_ohm'])} noisy=0",
              ".control", *control, ".endc", ".end", ""]
    return "\n".join(lines)


def run(text: str, tmp_path: Path, name: str, outputs: int) -> list[np.ndarray]:
    exe = need_ngspice()
    files = [tmp_path / f"{name}.{k}.txt" for k in range(outputs)]
    for k, path in enumerate(files):
        text = text.replace(f"@OUT{k}@", str(path))
    (tmp_path / f"{name}.cir").write_text(text)
    done = subprocess.run([exe, "-b", f"{name}.cir"], cwd=tmp_path, capture_output=True,
                          text=True, timeout=300)
    for path in files:
        assert path.exists(), done.stdout[-3000:] + done.stderr[-3000:]
    return [np.loadtxt(path, ndmin=2) for path in files]


def spice_pm(st: FilterStage, part: dict[str, float], tmp_path: Path, name: str,
             temp_c: float, cload: float = 0.0) -> float:
    lo, hi = part["gbw_hz"] * 1e-5, part["gbw_hz"] * 30
    control = [f"ac dec 400 {_v(lo)} {_v(hi)}", "wrdata @OUT0@ -v(x2)/v(xb)"]
    (data,) = run(deck(st, part, control, temp_c=temp_c, broken=True, cload=cload), tmp_path,
                  name, 1)
    f, t = data[:, 0], data[:, 1] + 1j * data[:, 2]
    mag = np.abs(t)
    k = int(np.flatnonzero(mag >= 1)[-1])
    x, y = np.log(f[k:k + 2]), np.log(mag[k:k + 2])
    lf = x[0] - y[0] * (x[1] - x[0]) / (y[1] - y[0])
    phase = np.unwrap(np.angle(t))
    return 180 + math.degrees(float(np.interp(lf, x, phase[k:k + 2])))


def spice_noise(st: FilterStage, part: dict[str, float], tmp_path: Path, name: str,
                temp_c: float) -> float:
    assert st.ideal is not None
    lo = st.ideal.f0_hz / 10**DECADES
    hi = TOP * max(part["gbw_hz"], st.ideal.f0_hz)
    control = [f"noise v({st.circuit.out}) Vs dec 200 {_v(lo)} {_v(hi)}", "setplot noise1",
               "wrdata @OUT0@ onoise_spectrum", "setplot noise2", "wrdata @OUT1@ onoise_total"]
    spectrum, total = run(deck(st, part, control, temp_c=temp_c), tmp_path, name, 2)
    f, density = spectrum[:, 0], spectrum[:, 1]
    closure = density[0] ** 2 * f[0] + density[-1] ** 2 * f[-1]
    band = float(np.sum(0.5 * (density[1:] ** 2 + density[:-1] ** 2) * np.diff(f)))
    ngspice_total = float(total[0, 1])
    if math.isfinite(ngspice_total):  # ngspice's own integral (NaN where a stretch is flat)
        np.testing.assert_allclose(ngspice_total ** 2, band, rtol=0.01)
    return math.sqrt(band + closure)


@pytest.mark.parametrize("label", ["jfet-gp-a", "bip-audio-a"])
@pytest.mark.parametrize("topology", list(CASES))
def test_filter_phase_margin_matches_ngspice(topology: str, label: str, tmp_path: Path) -> None:
    req, st = built(topology)
    part = demo(label)
    parts = Parts.from_columns([label], {k: [v] for k, v in part.items()})
    pm = float(stage_margins(parts, st).pm_deg[0])
    ref = spice_pm(st, part, tmp_path, f"pm-{label}", 70.0)
    # ngspice .ac, loop opened at the second pole's output: phase margin within 1°
    assert abs(pm - ref) < 1.0, (topology, label, pm, ref)
    res = run_checks(parts, api.spec(req)).results["filter_stability"]
    assert float(res.has[0]) == pytest.approx(pm)


def test_filter_phase_margin_with_load_capacitance_matches_ngspice(tmp_path: Path) -> None:
    req, st = built("vcvs-lowpass", cload="10nF")
    assert st.cload == 10e-9
    part = demo("bip-gp-a")
    parts = Parts.from_columns(["bip-gp-a"], {k: [v] for k, v in part.items()})
    pm = float(stage_margins(parts, st).pm_deg[0])
    without = float(stage_margins(parts, built("vcvs-lowpass")[1]).pm_deg[0])
    ref = spice_pm(st, part, tmp_path, "pm-cload", 70.0, cload=10e-9)
    # ngspice .ac with the 10 nF load behind the part's Ro: within 1°
    assert abs(pm - ref) < 1.0, (pm, ref)
    assert pm < without - 5  # the load capacitance costs margin (the fact the test rests on)


@pytest.mark.parametrize("label", ["jfet-gp-a", "bip-audio-a"])
@pytest.mark.parametrize("topology", list(CASES))
def test_filter_output_noise_matches_ngspice(topology: str, label: str, tmp_path: Path) -> None:
    req, st = built(topology)
    part = demo(label)
    parts = Parts.from_columns([label], {k: [v] for k, v in part.items()})
    spec = api.spec(req)
    ours = float(output_noise(parts, spec)[0])
    ref = spice_noise(st, part, tmp_path, f"noise-{label}", spec.requirement.temp_max_c)
    # ngspice .noise, integrated over the same band and closed the same way: within 1%
    np.testing.assert_allclose(ours, ref, rtol=0.01)
    res = run_checks(parts, spec).results["filter_noise"]
    assert float(res.has[0]) == pytest.approx(ours)
