"""The closed loop of a stage reduced to one state: the op-amp's internal voltage.

Macromodel (the same as picker.circuit.opamp, written in the time domain): an
internal node ``x`` driven by a single-pole gain stage,

    dx/dt = ωu·vd − ωp·x,       ωu = 2π·GBW,  ωp = ωu/A0,   vd = vp − vn

(A0 unknown: ωp = 0, an ideal integrator), and an output that is the voltage source
``x`` behind the open-loop output resistance ``Ro``. Written this way the slew limit
is a clamp on dx/dt and the swing limit a clamp on x (the slew-limited integrator of
G. R. Boyle, B. M. Cohn, D. O. Pederson, J. E. Solomon, "Macromodeling of integrated
circuit operational amplifiers", IEEE J. Solid-State Circuits SC-9(6), 1974, from
memory; there the limit is the current into the compensation capacitor).

The rest of the stage is resistive (picker.stages: ``kp``/``zp`` at the
non-inverting input, ``kg``/``rg`` and ``rf`` at the inverting input, ``RL`` at the
output; signals from the reference level, input ``u``), so for a given output voltage
``vo`` and input ``u`` the input nodes follow from two node equations (each scaled by a
resistance so a wire, zp = 0 or rf = 0, stays finite; G = 1/R, 0 for an open element):

    p:  (1 + zp·Gin)·vp − zp·Gin·vn               = kp·u
    n:  −rf·Gin·vp + (1 + rf·Gg + rf·Gin)·vn − vo  = rf·Gg·kg·u

With D = (1 + zp·Gin)(1 + rf·Gg + rf·Gin) − zp·Gin·rf·Gin (Cramer's rule):

    vd = −vo/D + e·u,   e = (kp·(1 + rf·Gg) − rf·Gg·kg)/D

and the current the op-amp drives into the network (KCL at the output, the current in
rf taken from KCL at the inverting input) is

    io = GL·vo + Gg·(vn − kg·u) + Gin·(vn − vp) = Y·vo − J·u,
    Y  = GL + (Gg·(1 + zp·Gin) + Gin)/D,
    J  = Gg·kg − Gg·nu + Gin·(pu − nu)   (pu, nu: the u-coefficients of vp and vn).

Linear output (|io| below the current limit): io = (x − vo)/Ro gives

    vo = (x + Ro·J·u)/(1 + Ro·Y),   io = (Y·x − J·u)/(1 + Ro·Y),
    dx/dt = −λ·x + μ·u,   λ = ωp + ωu·β,  μ = ωu·(e − β·Ro·J),  β = 1/(D·(1 + Ro·Y)).

Current-limited output (io = s·Iout, s = ±1): vo = (s·Iout + J·u)/Y and

    dx/dt = −ωp·x + ωu·(e − J/(D·Y))·u − s·ωu·Iout/(D·Y).

λ is the closed loop's single pole, ωp·(1 + A0·β); β·A0 is the loop gain (checked in
tests/design/test_waveform.py against picker.circuit.opamp's exact nodal solution and
against ngspice). Every quantity is an array with one element per part.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from picker.errors import BadRequirement
from picker.stages import Stage

Array = npt.NDArray[np.float64]


def _g(r: float) -> float:
    return 0.0 if np.isinf(r) else 1.0 / r


@dataclass(frozen=True)
class LoopState:
    """Per-part coefficients of the one-state loop (see the module docstring)."""

    wu: Array  # 2π·GBW, rad/s
    wp: Array  # open-loop pole ωu/A0 (0 for an unknown A0), rad/s
    ro: Array  # open-loop output resistance, Ω (unknown: 0)
    d: Array  # D
    e: Array  # input-to-vd coefficient
    y: Array  # admittance the output drives, S
    j: Array  # input-to-output-current coefficient, S

    @property
    def beta(self) -> Array:
        """Loop gain per unit of open-loop gain (1/noise gain with loading)."""
        return 1.0 / (self.d * (1.0 + self.ro * self.y))  # type: ignore[no-any-return]

    @property
    def lam(self) -> Array:
        """Closed-loop pole λ in rad/s (linear output)."""
        return self.wp + self.wu * self.beta  # type: ignore[no-any-return]

    @property
    def mu(self) -> Array:
        """Input coefficient μ of dx/dt (linear output)."""
        return self.wu * (self.e - self.beta * self.ro * self.j)  # type: ignore[no-any-return]

    def column(self) -> LoopState:
        """The same coefficients shaped (parts, 1), to broadcast over time samples."""
        return LoopState(*(np.asarray(getattr(self, f))[:, None]
                           for f in ("wu", "wp", "ro", "d", "e", "y", "j")))

    def vo_linear(self, x: npt.ArrayLike, u: npt.ArrayLike) -> Array:
        """Output voltage with the output below its current limit."""
        return (np.asarray(x) + self.ro * self.j * np.asarray(u)) / (1.0 + self.ro * self.y)  # type: ignore[no-any-return]

    def io_linear(self, x: npt.ArrayLike, u: npt.ArrayLike) -> Array:
        """Output current the network would draw with the output unlimited, A."""
        return (self.y * np.asarray(x) - self.j * np.asarray(u)) / (1.0 + self.ro * self.y)  # type: ignore[no-any-return]

    def vo_limited(self, io: npt.ArrayLike, u: npt.ArrayLike) -> Array:
        """Output voltage when the output is a current source io (Y > 0)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return (np.asarray(io) + self.j * np.asarray(u)) / self.y  # type: ignore[no-any-return]

    def limited_coeffs(self, iout: Array) -> tuple[Array, Array, Array]:
        """(λc, μc, νc) of dx/dt = −λc·x + μc·u + s·νc while the current is limited."""
        with np.errstate(divide="ignore", invalid="ignore"):
            dy = self.d * self.y
            mu_c = np.where(dy > 0, self.wu * (self.e - self.j / dy), 0.0)
            nu_c = np.where(dy > 0, -self.wu * iout / dy, 0.0)
        return self.wp, mu_c, nu_c

    def gain(self, freq_hz: npt.ArrayLike) -> npt.NDArray[np.complex128]:
        """Small-signal closed-loop gain vo/u of this model at the given frequencies.

        X = μ/(jω + λ)·U and vo = (X + Ro·J·U)/(1 + Ro·Y); shape parts × frequencies.
        """
        s = 2j * np.pi * np.atleast_1d(np.asarray(freq_hz, dtype=float))[None, :]
        col = lambda a: np.asarray(a)[:, None]  # noqa: E731
        x = col(self.mu) / (s + col(self.lam))
        return (x + col(self.ro * self.j)) / col(1.0 + self.ro * self.y)  # type: ignore[no-any-return]


def loop_state(
    stage: Stage,
    aol: npt.ArrayLike,
    gbw_hz: npt.ArrayLike,
    rin_ohm: npt.ArrayLike,
    rout_ohm: npt.ArrayLike,
) -> LoopState:
    """The one-state loop of ``stage`` for every part (NaN Rin = ∞, NaN Ro = 0, NaN A0 = ∞).

    Only a resistive stage reduces to one state; a stage with capacitors is refused
    (BadRequirement) rather than predicted wrongly.
    """
    if stage.reactive:
        raise BadRequirement(
            f"the {stage.topology} stage has capacitors; the waveform prediction models "
            "resistive stages only (one state, the op-amp's); use the frequency response "
            "(picker bode) for this stage")
    a0 = np.asarray(aol, dtype=float)
    wu = 2 * np.pi * np.asarray(gbw_hz, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        wp = np.where(np.isfinite(a0) & (a0 > 0), wu / a0, 0.0)
        rin = np.asarray(rin_ohm, dtype=float)
        gin = np.where(np.isfinite(rin) & (rin > 0), 1.0 / rin, 0.0)
    ro = np.nan_to_num(np.asarray(rout_ohm, dtype=float), nan=0.0)
    gin, wu, wp, ro = np.broadcast_arrays(gin, wu, wp, ro)
    kp, zp, kg, rf = stage.kp, stage.zp, stage.kg, stage.rf
    gg, gl = _g(stage.rg), _g(stage.load)
    a = 1 + zp * gin  # p row: a·vp − b·vn = kp·u
    b = zp * gin
    c = rf * gin  # n row: −c·vp + dn·vn − vo = rf·gg·kg·u
    dn = 1 + rf * gg + rf * gin
    d = a * dn - b * c
    # vp = pv·vo + pu·u, vn = nv·vo + nu·u (Cramer's rule on the two rows)
    pu = (kp * dn + b * rf * gg * kg) / d
    nu = (a * rf * gg * kg + c * kp) / d
    nv = a / d
    pv = b / d
    e = pu - nu
    y = gl + gg * nv + gin * (nv - pv)
    j = gg * kg - gg * nu + gin * (pu - nu)
    return LoopState(wu=wu, wp=wp, ro=ro, d=d, e=e, y=np.asarray(y + 0 * d), j=np.asarray(j + 0 * d))


__all__ = ["LoopState", "loop_state"]
