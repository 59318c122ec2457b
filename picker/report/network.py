"""A designed resistor network for people: one line per position, then the numbers."""

from __future__ import annotations

from picker.design.network import Network
from picker.design.tolerance import MC_SAMPLES, MC_SEED
from picker.quantities import fmt
from picker.report.coupling import coupling_lines

_ROLE = {
    "inverting": {"rf": "feedback, output to inverting input",
                  "rg": "input, source to inverting input",
                  "rp": "bias-current compensation, non-inverting input to reference"},
    "non-inverting": {"rf": "feedback, output to inverting input",
                      "rg": "ground leg, inverting input to reference",
                      "rp": "bias-current compensation, in series with the non-inverting input"},
    "follower": {"rf": "feedback, output to inverting input (balances the source)"},
    "difference": {"r1": "negative input to inverting input",
                   "r2": "feedback, output to inverting input",
                   "r3": "positive input to non-inverting input",
                   "r4": "non-inverting input to reference"},
}


def position_line(net: Network, name: str) -> str:
    """``Rf 47 kΩ (E24)``, with how a two-resistor position is made (``as given`` for a
    value kept exactly)."""
    slot = next(s for s in net.slots if s.name == name)
    where = "as given" if name in net.given else net.series
    text = f"{name.capitalize()} {fmt(slot.ohms, 'resistance', 4)} ({where})"
    if slot.how != "single":
        parts = " + ".join(fmt(p, "resistance") for p in slot.parts)
        text = (f"{name.capitalize()} {fmt(slot.ohms, 'resistance', 4)}: {parts} in "
                f"{slot.how} ({net.series})")
    return text


def render(net: Network, *, part: str | None = None,
           exact: tuple[complex, complex] | None = None, freq_hz: float | None = None,
           cautions: list[str] | None = None) -> str:
    """The whole report of ``picker net``."""
    tol = fmt(net.tolerance, "ratio")
    built = set(net.given) >= {s.name for s in net.slots} and net.slots
    lines = [f"{net.topology} stage, gain {net.target_gain:.6g} V/V, "
             + ("network as built" if built else f"{net.series} resistors")
             + f", ±{tol}" + (f", limits from {part}" if part else "")]
    lines += [f"!! {c}" for c in cautions or []]  # first, where a person looks
    if net.why:
        lines.append(("as built: " if built else "chosen: ") + net.why)
    for slot in net.slots:
        role = _ROLE.get(net.topology, {}).get(slot.name, "")
        lines.append(f"  {position_line(net, slot.name)}" + (f"   {role}" if role else ""))
    if not net.slots:
        lines.append("  (no resistors)")
    if net.coupling is not None:  # its input impedance is the coupling network's
        lines += coupling_lines(net.coupling)
    elif net.input_ohm is not None:
        lines.append(f"input impedance {fmt(net.input_ohm, 'resistance')}"
                     + ("" if net.source_share is None else
                        f"; the source is {net.source_share:.2%} of the input leg (its own "
                        "accuracy moves the gain by that share)"))
    else:
        lines.append("input impedance: the op-amp's own input")
    if net.power_w:
        lines.append(f"network load {fmt(net.network_current_a, 'current')} at the peak; power "
                     "at the peak: " + ", ".join(f"{k.capitalize()} {fmt(w, 'power')}"
                                                  for k, w in net.power_w.items()))
    lo, hi = net.worst_case
    lines += [
        f"gain {net.gain:.6g} V/V with an ideal op-amp, error {net.gain_error:+.4%}",
        f"worst case at ±{tol}: {lo:.6g} .. {hi:.6g} V/V "
        f"(error up to {net.worst_case_error:.3%})",
        f"Monte Carlo, {MC_SAMPLES} builds (seed {MC_SEED}), uniform within ±{tol}: "
        f"99% within {net.mc_p99_error:.3%}",
    ]
    if exact is not None and part:
        dc, top = exact
        at = f" at {fmt(freq_hz, 'frequency')}" if freq_hz else " at the top frequency"
        lines.append(f"with {part} (exact model): gain error {abs(dc) / net.target_gain - 1:+.4%}"
                     f" at DC, {abs(top) / net.target_gain - 1:+.4%}{at}")
    lines.append("limits:")
    lines += [f"  - {x}" for x in net.limits]
    if net.notes:
        lines.append("notes:")
        lines += [f"  - {x}" for x in net.notes]
    return "\n".join(lines)


__all__ = ["position_line", "render"]
