"""How far the op-amp's output reaches under load: one model for the swing check and the
waveform prediction, so the two never disagree.

Datasheet form (the output-swing table "within X V of the rail at light load, and Y V at
a stated current"): the headroom to a rail grows linearly with the current the output
drives toward that rail,

    head+(I) = head+ + Rsat+·I   (I sourced, toward V+),
    head-(I) = head- + Rsat-·|I| (I sunk, toward V-),

with ``Rsat = (head at I - head at light load)/I``, the output stage's saturation
resistance. The saturated output is then the source ``V+ - head+`` (or ``V- + head-``)
behind Rsat: the same straight line as a rail-to-rail output stage's saturated
transistor plus its emitter (or source) resistor, e.g. Horowitz and Hill, The Art of
Electronics, 3rd ed., ch. 4 (output swing into a load), from memory.

A stage's network draws ``io = Y·vo - J·u`` from the output (vo from the reference,
u the input signal; picker.design.loopstate). The level the saturated output settles
at solves ``vo = V - Rsat·(Y·vo - J·u)`` (V the light-load limit, from the reference):

    vo = (V + Rsat·J·u)/(1 + Rsat·Y),

where that current flows toward the rail (sourced at the top, sunk at the bottom);
otherwise the light-load limit V holds. The swing check uses ``J·u = 0`` and ``Y`` the
stage's output current per volt at the peak (picker.stages.Stage.amps_per_volt_out);
the waveform uses the exact Y and J of its loop.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

Array = npt.NDArray[np.float64]


def reach(level: npt.ArrayLike, rsat: npt.ArrayLike, y: npt.ArrayLike,
          ju: npt.ArrayLike = 0.0) -> Array:
    """The output level reached toward one rail while driving a network (module docstring).

    Parameters
    ----------
    level : array_like
        The light-load limit from the reference, V: ``V+ - head+ - ref`` toward V+
        (positive), ``V- + head- - ref`` toward V- (negative).
    rsat : array_like
        The saturation resistance toward that rail, Ω (NaN: light-load figures, 0).
    y : array_like
        The admittance the output drives, S (current per volt of output).
    ju : array_like
        ``J·u``: the current the input pushes out of the output's node, A (0 for the check).

    Returns
    -------
    ndarray
        The level reached, V from the reference (same sign convention as ``level``).
    """
    v = np.asarray(level, dtype=float)
    if np.ndim(y) == 0 and np.ndim(ju) == 0 and float(ju) == 0:  # type: ignore[arg-type]
        # one admittance for all, no input current (the check): the current flows toward
        # the rail wherever y > 0, so the formula below reduces to v/(1 + r·y)
        if float(y) <= 0:  # type: ignore[arg-type]
            return v
        den = np.multiply(rsat, float(y))  # type: ignore[arg-type]
        np.fmax(den, 0.0, out=den)  # NaN (light-load figures) -> 0
        den += 1.0
        return np.divide(v, den, out=den)  # type: ignore[no-any-return]
    r = np.nan_to_num(np.asarray(rsat, dtype=float), nan=0.0)
    y_a, ju_a = np.asarray(y, dtype=float), np.asarray(ju, dtype=float)
    loaded = (y_a * v - ju_a) * np.sign(v) > 0  # the current flows toward that rail
    with np.errstate(invalid="ignore"):
        return np.where(loaded, (v + r * ju_a) / (1.0 + r * y_a), v)  # type: ignore[no-any-return]


__all__ = ["reach"]
