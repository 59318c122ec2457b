"""One linear circuit solver and the op-amp macromodel.

- mna: modified nodal analysis with complex admittances (resistors, capacitors, ideal
  sources, one op-amp macromodel), multilinear in the op-amp's Yin, Ro and A;
- opamp: the closed-loop gain of a stage per part (Loop), A(s), poles, transfer.
"""

from picker.circuit.mna import Capacitor, Netlist, OpAmp, Resistor, Source, coefficients, solve
from picker.circuit.opamp import (
    Loop,
    closed_loop_gain,
    closed_loop_pole_hz,
    loop,
    open_loop,
    transfer,
)

__all__ = ["Capacitor", "Loop", "Netlist", "OpAmp", "Resistor", "Source", "closed_loop_gain",
           "closed_loop_pole_hz", "coefficients", "loop", "open_loop", "solve", "transfer"]
