"""Second-order filter sections: the response shapes' poles, and f0, Q read from a response.

A second-order section has the denominator ``s² + (ωn/Q)·s + ωn²``; its kind sets the
numerator: low-pass ``K·ωn²``, high-pass ``K·s²``, band-pass ``K·(ωn/Q)·s`` (K the
pass-band gain: at DC, at infinite frequency, at the centre).

The corner ``--f0`` of a low- or high-pass means, per response shape (the conventions
of the analog prototypes in scipy.signal, which the tests use as the outside reference):

- butterworth: the -3 dB frequency; ωn = ωc, Q = 1/√2;
- bessel: the -3 dB frequency of the prototype 3/(s² + 3s + 3) (maximally flat delay;
  e.g. Van Valkenburg, Analog Filter Design, 1982, ch. 10, from memory), whose -3 dB
  point is at ω² = (√45 - 3)/2: ωn = √3/ω3dB·ωc, Q = 1/√3;
- chebyshev (type I, ripple r dB): the edge of the ripple band; ε = √(10^(r/10) - 1),
  v = asinh(1/ε)/2, poles -sinh(v)·sin(π/4) ± j·cosh(v)·cos(π/4) (same text, ch. 9,
  from memory): ωn = ωc·√((sinh²v + cosh²v)/2), Q = ωn/(2·sinh(v)·sin(π/4)).

A high-pass is the low-pass prototype under s -> ωc/s: the same Q, ωn = ωc²/ωn,lp. A
band-pass section's centre is ``--f0`` and its Q is f0/bandwidth (a second-order band-pass
comes from a first-order low-pass prototype, the same for every response shape).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal, get_args

import numpy as np
import numpy.typing as npt

Response = Literal["butterworth", "bessel", "chebyshev"]
RESPONSES: tuple[Response, ...] = get_args(Response)
Kind = Literal["lowpass", "highpass", "bandpass"]

Complex = npt.NDArray[np.complex128]


@dataclass(frozen=True)
class Section:
    """A second-order section: natural frequency (Hz), Q, and pass-band gain (V/V, signed)."""

    kind: Kind
    f0_hz: float
    q: float
    gain: float

    def at(self, freqs_hz: npt.ArrayLike) -> Complex:
        """H(j2πf) of the section."""
        s = 2j * np.pi * np.asarray(freqs_hz, dtype=float)
        wn = 2 * math.pi * self.f0_hz
        den = s * s + wn / self.q * s + wn * wn
        num: Complex = {"lowpass": np.full_like(s, wn * wn), "highpass": s * s,
                        "bandpass": wn / self.q * s}[self.kind]
        return self.gain * num / den  # type: ignore[no-any-return]


def lowpass_prototype(response: Response, ripple_db: float | None = None) -> tuple[float, float]:
    """(ωn/ωc, Q) of the second-order low-pass prototype (module docstring)."""
    if response == "butterworth":
        return 1.0, 1 / math.sqrt(2)
    if response == "bessel":
        w3 = math.sqrt((math.sqrt(45.0) - 3.0) / 2.0)
        return math.sqrt(3.0) / w3, 1 / math.sqrt(3.0)
    if ripple_db is None or not ripple_db > 0:
        raise ValueError("a chebyshev response needs its pass-band ripple in dB")
    eps = math.sqrt(10 ** (ripple_db / 10) - 1)
    v = math.asinh(1 / eps) / 2
    sigma = math.sinh(v) * math.sin(math.pi / 4)
    omega = math.cosh(v) * math.cos(math.pi / 4)
    wn = math.hypot(sigma, omega)
    return wn, wn / (2 * sigma)


def section(kind: Kind, f0_hz: float, gain: float, response: str | None = None,
            ripple_db: float | None = None, bandwidth_hz: float | None = None) -> Section:
    """The section a requirement asks for (module docstring).

    Parameters
    ----------
    kind : {"lowpass", "highpass", "bandpass"}
    f0_hz : float
        Corner (low-, high-pass) or centre (band-pass), Hz.
    gain : float
        Pass-band gain, V/V (signed: negative for an inverting section).
    response : str, optional
        Response shape of a low- or high-pass.
    ripple_db : float, optional
        Pass-band ripple of a chebyshev response, dB.
    bandwidth_hz : float, optional
        -3 dB bandwidth of a band-pass, Hz.
    """
    if kind == "bandpass":
        assert bandwidth_hz is not None
        return Section(kind, f0_hz, f0_hz / bandwidth_hz, gain)
    shape: Response = response if response in RESPONSES else "butterworth"  # type: ignore[assignment]
    ratio, q = lowpass_prototype(shape, ripple_db)
    fn = f0_hz * ratio if kind == "lowpass" else f0_hz / ratio
    return Section(kind, fn, q, gain)


def fit_many(kind: Kind, freqs_hz: npt.ArrayLike, h: npt.ArrayLike
             ) -> tuple[npt.NDArray[np.float64], npt.NDArray[np.float64], npt.NDArray[np.float64]]:
    """The second-order section nearest each measured response (least squares), per row.

    Levy's linearised fit (E. C. Levy, "Complex-curve fitting", IRE Trans. Automatic
    Control AC-4, 1959, from memory): with D(s) = 1 + a1·s + a2·s², solve
    ``H·D(s) = N(s)`` in the least-squares sense for (N's coefficient, a1, a2), real and
    imaginary parts stacked and each point weighted by 1/|H| (relative errors); N is b0
    (low-pass), b2·s² (high-pass) or b1·s (band-pass). Exact for a second-order response;
    for a real op-amp's (third order and up) it gives the section that best matches the
    points, taken around f0 (``fit_grid``: f0/2 to 2·f0) for picker and ngspice alike.
    s is scaled by the grid's middle frequency so the normal equations stay well
    conditioned; each row (part) is solved at once with batched 3×3 systems.

    Parameters
    ----------
    kind : {"lowpass", "highpass", "bandpass"}
    freqs_hz : array_like, shape (F,)
    h : array_like, shape (P, F) or (F,)
        The measured H(j2πf); a row with a NaN gives NaN.

    Returns
    -------
    (f0_hz, q, gain) : arrays of shape (P,)
        f0 = 1/(2π·√a2), Q = √a2/a1, gain b0, b2/a2 or b1/a1 (signed).
    """
    f = np.asarray(freqs_hz, dtype=float)
    hh = np.atleast_2d(np.asarray(h, dtype=complex))
    w0 = 2 * math.pi * math.sqrt(f[0] * f[-1])
    s = 2j * math.pi * f / w0  # scaled Laplace variable
    basis = {"lowpass": np.ones_like(s), "highpass": s * s, "bandpass": s}[kind]
    bad = ~np.all(np.isfinite(hh), axis=1)
    hh = np.where(bad[:, None], 1.0, hh)
    cols = np.stack([np.broadcast_to(basis, hh.shape), -hh * s, -hh * s * s], axis=2)
    w = 1.0 / np.maximum(np.abs(hh), 1e-300)
    cw = cols * w[:, :, None]
    a = np.concatenate([cw.real, cw.imag], axis=1)  # (P, 2F, 3)
    rhs = np.concatenate([(hh * w).real, (hh * w).imag], axis=1)  # (P, 2F)
    ata = np.einsum("pki,pkj->pij", a, a)
    atb = np.einsum("pki,pk->pi", a, rhs)
    x = np.linalg.solve(ata, atb[..., None])[..., 0]
    b, a1, a2 = x[:, 0], x[:, 1] / w0, x[:, 2] / w0**2
    if kind == "highpass":
        b = b / w0**2
    elif kind == "bandpass":
        b = b / w0
    with np.errstate(invalid="ignore", divide="ignore"):
        f0 = 1 / (2 * math.pi * np.sqrt(a2))
        q = np.sqrt(a2) / a1
        gain = {"lowpass": b, "highpass": b / a2, "bandpass": b / a1}[kind]
    nan = np.where(bad, np.nan, 0.0)
    return f0 + nan, q + nan, gain + nan


def fit(kind: Kind, freqs_hz: npt.ArrayLike, h: npt.ArrayLike) -> Section:
    """The section nearest one measured response (``fit_many`` for one row)."""
    f0, q, gain = fit_many(kind, freqs_hz, np.asarray(h)[None, :])
    return Section(kind, float(f0[0]), float(q[0]), float(gain[0]))


def fit_grid(f0_hz: float, points: int = 41) -> npt.NDArray[np.float64]:
    """The frequencies a fit reads: log-spaced from f0/2 to 2·f0."""
    return np.logspace(math.log10(f0_hz / 2), math.log10(f0_hz * 2), points)


__all__ = ["RESPONSES", "Kind", "Response", "Section", "fit", "fit_grid", "fit_many", "lowpass_prototype",
           "section"]
