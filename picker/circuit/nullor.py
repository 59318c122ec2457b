"""Every node voltage of a netlist with an ideal op-amp, over many frequencies at once.

The ideal op-amp is a nullor: no current into its inputs, ``v_p = v_n``, and whatever
output current keeps them equal (the limit A -> ∞, Rin -> ∞, Ro -> 0 of the macromodel
in picker.circuit.mna). Modified nodal analysis (C.-W. Ho, A. E. Ruehli, P. A. Brennan,
IEEE Trans. Circuits and Systems CAS-22(6), 1975, from memory) with the op-amp's output
branch current as an unknown and its row ``v_p - v_n = 0``; one stacked complex system
per frequency, solved with ``numpy.linalg.solve`` over the whole frequency axis.

The filter stages read from it what an ideal op-amp must deliver: the output voltage
(the ideal transfer function), the voltage at the inputs (common mode) and the output
current into the load and the network.
"""

from __future__ import annotations

import math

import numpy as np
import numpy.typing as npt

from picker.circuit.mna import GROUND, Capacitor, Netlist, OpAmp, Resistor, Source

Complex = npt.NDArray[np.complex128]


def node_voltages(net: Netlist, freqs_hz: npt.ArrayLike) -> dict[str, Complex]:
    """Each node's voltage per volt of input, ideal op-amp, shape (F,) per node.

    Parameters
    ----------
    net : Netlist
        The circuit (sources per volt of input; one op-amp).
    freqs_hz : array_like
        Frequencies, Hz (0 = DC).

    Returns
    -------
    dict of str to ndarray of complex
        Node name -> V(node) at each frequency; ground is ``"0"`` (always 0).
    """
    f = np.atleast_1d(np.asarray(freqs_hz, dtype=float))
    s = 2j * np.pi * f
    nodes: dict[str, None] = {}
    for e in net.elements:
        if isinstance(e, Resistor) and math.isinf(e.ohm):
            continue
        ends = ((e.a, e.b) if isinstance(e, Resistor | Capacitor) else
                (e.plus, e.minus) if isinstance(e, Source) else (e.p, e.n, e.out))
        for nd in ends:
            if nd != GROUND:
                nodes.setdefault(nd)
    idx = {nd: i for i, nd in enumerate(nodes)}
    branches = [e for e in net.elements if isinstance(e, Source | OpAmp)
                or (isinstance(e, Resistor) and e.ohm == 0)]
    n = len(nodes) + len(branches)
    m = np.zeros((len(f), n, n), dtype=complex)
    b = np.zeros((len(f), n), dtype=complex)

    def stamp(a: str, c: str, y: Complex | float) -> None:
        for p, q, sign in ((a, a, 1), (c, c, 1), (a, c, -1), (c, a, -1)):
            if p != GROUND and q != GROUND:
                m[:, idx[p], idx[q]] += sign * y

    row = len(nodes)
    for e in net.elements:
        if isinstance(e, Resistor) and e.ohm != 0:
            if math.isfinite(e.ohm):
                stamp(e.a, e.b, 1.0 / e.ohm)
            continue
        if isinstance(e, Capacitor):
            stamp(e.a, e.b, s * e.farad)
            continue
        if isinstance(e, OpAmp):
            if e.out != GROUND:
                m[:, idx[e.out], row] += 1.0  # the output current leaves the output node
            for nd, sign in ((e.p, 1.0), (e.n, -1.0)):
                if nd != GROUND:
                    m[:, row, idx[nd]] += sign  # v_p - v_n = 0
        else:
            plus, minus, volt = (e.plus, e.minus, e.volt) if isinstance(e, Source) else (
                e.a, e.b, 0.0)  # type: ignore[union-attr]
            for nd, sign in ((plus, 1.0), (minus, -1.0)):
                if nd != GROUND:
                    m[:, idx[nd], row] += sign
                    m[:, row, idx[nd]] += sign
            b[:, row] = volt
        row += 1
    x: Complex = np.linalg.solve(m, b[..., None])[..., 0]  # type: ignore[assignment]
    out: dict[str, Complex] = {nd: x[:, i] for nd, i in idx.items()}
    out[GROUND] = np.zeros(len(f), dtype=complex)
    return out


def transfer(net: Netlist, freqs_hz: npt.ArrayLike) -> Complex:
    """The ideal-op-amp transfer function v(out)/v(in) at each frequency."""
    return node_voltages(net, freqs_hz)[net.out]


def output_current(net: Netlist, freqs_hz: npt.ArrayLike) -> Complex:
    """Current the op-amp's output pin delivers, per volt of input, at each frequency (A):
    the sum over every resistor and capacitor at the output node of Y·(v_out - v_other),
    the load included (the op-amp's own branch carries exactly this current)."""
    f = np.atleast_1d(np.asarray(freqs_hz, dtype=float))
    v = node_voltages(net, f)
    amp = net.opamp
    if amp is None:
        raise ValueError("the netlist has no op-amp")
    o = amp.out
    total = np.zeros(len(f), dtype=complex)
    for e in net.elements:
        if not isinstance(e, Resistor | Capacitor) or o not in (e.a, e.b) or e.a == e.b:
            continue
        other = e.b if e.a == o else e.a
        if isinstance(e, Resistor):
            if math.isinf(e.ohm) or e.ohm == 0:
                continue
            y: Complex | float = 1.0 / e.ohm
        else:
            y = 2j * np.pi * f * e.farad
        total += y * (v[o] - v[other])
    return total


__all__ = ["node_voltages", "output_current", "transfer"]
