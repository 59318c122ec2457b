"""One linear circuit solver: modified nodal analysis with complex admittances.

A netlist holds resistors, capacitors, ideal voltage sources and at most one op-amp
macromodel (the part being checked). Modified nodal analysis (C.-W. Ho, A. E. Ruehli,
P. A. Brennan, "The modified nodal approach to network analysis", IEEE Trans. Circuits
and Systems CAS-22(6), 1975, from memory) writes one unknown per node voltage (ground
``"0"`` excluded) and one per branch current of every element that fixes a voltage,
and solves ``M·x = b`` at a complex frequency ``s``:

- a resistor R between a and b adds the conductance 1/R to the node rows (``+G`` on the
  diagonals, ``-G`` off them); R = 0 is a wire, written as a 0 V source; R = ∞ is open;
- a capacitor C adds the admittance ``s·C`` the same way;
- a voltage source V from plus to minus adds a branch current ``i`` (+1 in the KCL row
  of plus, -1 in that of minus) and the row ``v_plus - v_minus = V``. Sources are given
  per volt of the stage's input, so the solution is the transfer function itself;
- the op-amp: the admittance ``Yin = 1/Rin + s·Cin`` between its inputs, the
  common-mode input admittance ``Ycm = s·Ccm`` from each input to ground (two
  variables, ``ycp`` at the non-inverting input and ``ycn`` at the inverting one, each
  rank one, so the determinant stays multilinear; a part has ycp = ycn = Ycm), and at
  its output a branch current ``i`` (leaving the output node) with the row
  ``v_out - A·(v_p - v_n) - Ro·i = 0`` (a source A·(vp - vn) behind Ro).

Each op-amp quantity x in (Yin, Ro, A, Ycp, Ycn) enters M as a rank-one stamp ``x·u·vᵀ``
(Yin: u = v = e_p - e_n; A: u = e_k, v = e_n - e_p; Ro: u = e_k, v = -e_k, k the
op-amp's branch row; Ycp: u = v = e_p; Ycn: u = v = e_n). The determinant of ``M = M0 + Σ x_i·u_i·v_iᵀ`` is therefore
multilinear (affine in each x), and the coefficient of the product of the x_i in a
subset S is the bordered determinant (the generalised matrix determinant lemma)

    c_S = det [[M0, U_S], [-V_Sᵀ, 0]]

with M0 the matrix at x = 0. By Cramer's rule the output voltage is N/D with D = det M
and N the same determinant with the output's column replaced by b (so each v_i loses
its output entry), both multilinear with coefficients computed the same way: exact
determinants, no differences of nearby numbers. A coefficient whose U_S or V_S columns
are linearly dependent is zero exactly (two equal or opposite rows or columns); it is
set to 0 rather than left as rounding noise. Before the determinants are taken the
system is written in units of a reference resistance R0 (the geometric mean of the
netlist's resistors): conductances as G·R0, branch currents as i·R0, Ro as Ro/R0, so
the entries are of order one; the coefficients are converted back to SI afterwards.

The 32 coefficients of N and of D at one frequency come from small scalar
determinants; picker.circuit.opamp then evaluates every part with whole-array
operations (one array element per part).

Coefficients as polynomials in s (``polynomials``): every entry of M (and of the
bordered matrices) is affine in s, and only the capacitors' entries depend on s, so
each coefficient (before the normalisation of ``coefficients``, which depends on s) is
a polynomial in s of degree at most the number of capacitors n (a determinant is
linear in each capacitor's rank-one stamp). Sampled at the n + 1 points
``s_k = ω0·exp(2πjk/(n+1))`` on a circle, its coefficients are the discrete Fourier
transform of the samples (exact interpolation; on the circle the transform is
perfectly conditioned), ω0 = 1/(R0·C0) with C0 the geometric mean of the capacitors.
A per-part frequency (a crossover) is then evaluated with whole-array Horner steps.

"""

from __future__ import annotations

import functools
import itertools
import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

Complex = npt.NDArray[np.complex128]

GROUND = "0"
#: The op-amp quantities the coefficients are multilinear in.
VARIABLES: tuple[str, ...] = ("yin", "ro", "a", "ycp", "ycn")


@dataclass(frozen=True)
class Resistor:
    """A resistor of ``ohm`` between nodes a and b (0 = a wire, inf = open)."""

    a: str
    b: str
    ohm: float


@dataclass(frozen=True)
class Capacitor:
    """A capacitor of ``farad`` between nodes a and b."""

    a: str
    b: str
    farad: float


@dataclass(frozen=True)
class Source:
    """An ideal voltage source: v(plus) - v(minus) = ``volt`` per volt of input."""

    plus: str
    minus: str
    volt: float


@dataclass(frozen=True)
class OpAmp:
    """The part's macromodel: inputs p (non-inverting) and n, output ``out``.

    Its values (A, Rin, Cin, Ro) are not in the netlist: they are the variables the
    solution is multilinear in, evaluated per part.
    """

    p: str
    n: str
    out: str


Element = Resistor | Capacitor | Source | OpAmp


@dataclass(frozen=True)
class Netlist:
    """A linear circuit and the node whose voltage is the output."""

    elements: tuple[Element, ...]
    out: str = "o"

    @property
    def reactive(self) -> bool:
        """True when an element's admittance depends on frequency (a capacitor)."""
        return any(isinstance(e, Capacitor) for e in self.elements)

    @property
    def opamp(self) -> OpAmp | None:
        amps = [e for e in self.elements if isinstance(e, OpAmp)]
        return amps[0] if amps else None


@dataclass(frozen=True)
class Coefficients:
    """N and D of the output voltage, multilinear in (Yin, Ro, A, Ycp, Ycn), at one frequency.

    ``num[S]`` and ``den[S]`` are the coefficients of the product of the variables in
    S (a tuple in the order of VARIABLES; ``()`` is the constant term), in SI units
    (Yin in S, Ro in Ω), all divided by the same factor (so only ratios have meaning).
    """

    num: Mapping[tuple[str, ...], complex]
    den: Mapping[tuple[str, ...], complex]

    def evaluate(self, yin: npt.ArrayLike = 0.0, ro: npt.ArrayLike = 0.0,
                 a: npt.ArrayLike = 0.0, ycm: npt.ArrayLike = 0.0) -> Complex:
        """vo = N/D for the given values (arrays broadcast; one element per part);
        ``ycm`` is the common-mode admittance of each input (ycp = ycn = ycm)."""
        val = {"yin": np.asarray(yin), "ro": np.asarray(ro), "a": np.asarray(a),
               "ycp": np.asarray(ycm), "ycn": np.asarray(ycm)}

        def poly(c: Mapping[tuple[str, ...], complex]) -> Complex:
            total: Complex = np.asarray(0j)
            for s, coef in c.items():
                if coef:
                    term: Complex = np.asarray(coef)
                    for v in s:
                        term = term * val[v]
                    total = total + term
            return total

        with np.errstate(invalid="ignore", divide="ignore"):
            return poly(self.num) / poly(self.den)  # type: ignore[no-any-return]

    def split(self, var: str) -> tuple[Coefficients, Coefficients]:
        """(part without ``var``, coefficient of ``var``): N = N0 + var·N1, same for D."""
        def part(c: Mapping[tuple[str, ...], complex], with_var: bool) -> dict[tuple[str, ...], complex]:
            return {tuple(v for v in s if v != var): x for s, x in c.items()
                    if (var in s) == with_var}
        return (Coefficients(part(self.num, False), part(self.den, False)),
                Coefficients(part(self.num, True), part(self.den, True)))


def _reference_ohm(net: Netlist) -> float:
    rs = [e.ohm for e in net.elements
          if isinstance(e, Resistor) and 0 < e.ohm < math.inf]
    return math.exp(sum(map(math.log, rs)) / len(rs)) if rs else 1.0


def _nodes(net: Netlist) -> list[str]:
    seen: dict[str, None] = {}
    for e in net.elements:
        if isinstance(e, Resistor) and math.isinf(e.ohm):
            continue
        ends: Iterable[str]
        if isinstance(e, (Resistor, Capacitor)):
            ends = (e.a, e.b)
        elif isinstance(e, Source):
            ends = (e.plus, e.minus)
        else:
            ends = (e.p, e.n, e.out)
        for nd in ends:
            if nd != GROUND:
                seen.setdefault(nd)
    return list(seen)


@functools.lru_cache(maxsize=256)
def coefficients(net: Netlist, s: complex = 0j) -> Coefficients:
    """The multilinear coefficients of N and D at the complex frequency ``s`` (rad/s).

    Parameters
    ----------
    net : Netlist
        The circuit; its op-amp (if any) supplies the variables Yin, Ro, A, Ycp, Ycn.
    s : complex
        Laplace variable, rad/s (``2j·π·f`` for a sinusoid of f Hz; 0 for DC).

    Returns
    -------
    Coefficients
        See the module docstring; a netlist without an op-amp has the constant term only.
    """
    num, den = _raw(net, s)
    norm = max(abs(x) for x in den.values()) or 1.0
    return Coefficients({k: complex(v / norm) for k, v in num.items()},
                        {k: complex(v / norm) for k, v in den.items()})


Terms = dict[tuple[str, ...], complex]


def _raw(net: Netlist, s: complex) -> tuple[Terms, Terms]:
    """The coefficients in SI units, not normalised (polynomials in s)."""
    r0 = _reference_ohm(net)
    nodes = _nodes(net)
    if net.out not in nodes:
        raise ValueError(f"output node {net.out!r} is not connected to any element")
    idx = {nd: i for i, nd in enumerate(nodes)}
    branches = [e for e in net.elements
                if isinstance(e, (Source, OpAmp)) or (isinstance(e, Resistor) and e.ohm == 0)]
    size = len(nodes) + len(branches)
    m = np.zeros((size, size), dtype=complex)
    b = np.zeros(size, dtype=complex)

    def vec(*pairs: tuple[str, float]) -> npt.NDArray[np.float64]:
        v = np.zeros(size)
        for nd, x in pairs:
            if nd != GROUND:
                v[idx[nd]] += x
        return v

    def admittance(a: str, c: str, y: complex) -> None:
        u = vec((a, 1.0), (c, -1.0))
        m[:, :] += y * np.outer(u, u)

    stamps: dict[str, tuple[npt.NDArray[np.float64], npt.NDArray[np.float64]]] = {}
    row = len(nodes)
    for e in net.elements:
        if isinstance(e, Resistor) and e.ohm != 0:
            if math.isfinite(e.ohm):
                admittance(e.a, e.b, r0 / e.ohm)
            continue
        if isinstance(e, Capacitor):
            admittance(e.a, e.b, s * e.farad * r0)
            continue
        k = np.zeros(size)
        k[row] = 1.0
        if isinstance(e, OpAmp):
            u = vec((e.p, 1.0), (e.n, -1.0))
            stamps["yin"] = (u, u)  # Yin·R0 between the inputs
            out = vec((e.out, 1.0))
            m[:, row] += out  # the branch current leaves the output node
            m[row, :] += out  # v_out - A·(vp - vn) - (Ro/R0)·(i·R0) = 0
            stamps["a"] = (k, -u)
            stamps["ro"] = (k, -k)
            stamps["ycp"] = (vec((e.p, 1.0)), vec((e.p, 1.0)))  # Ycp·R0 from p to ground
            stamps["ycn"] = (vec((e.n, 1.0)), vec((e.n, 1.0)))
        else:  # a source, or a wire (a 0 V source)
            plus, minus, volt = (e.plus, e.minus, e.volt) if isinstance(e, Source) else (e.a, e.b, 0.0)
            d = vec((plus, 1.0), (minus, -1.0))
            m[:, row] += d
            m[row, :] += d
            b[row] = volt
        row += 1
    j = idx[net.out]
    m_num = m.copy()
    m_num[:, j] = b
    names = [v for v in VARIABLES if v in stamps]
    num: dict[tuple[str, ...], complex] = {}
    den: dict[tuple[str, ...], complex] = {}
    for n_vars in range(len(names) + 1):
        for subset in itertools.combinations(names, n_vars):
            us = np.array([stamps[v][0] for v in subset]).reshape(len(subset), size).T
            vs = np.array([stamps[v][1] for v in subset]).reshape(len(subset), size).T
            vs_num = vs.copy()
            vs_num[j, :] = 0.0
            den[subset] = _bordered(m, us, vs)
            num[subset] = _bordered(m_num, us, vs_num)
    # back to SI: an admittance Y was Y·R0 and Ro was Ro/R0 in the scaled system
    unit = {"yin": r0, "ro": 1.0 / r0, "a": 1.0, "ycp": r0, "ycn": r0}
    scale = {sub: math.prod(unit[v] for v in sub) for sub in den}
    return ({k: v * scale[k] for k, v in num.items()},
            {k: v * scale[k] for k, v in den.items()})


@dataclass(frozen=True)
class Polynomials:
    """The coefficients of N and D as polynomials in s (module docstring).

    ``num[S]`` and ``den[S]`` hold the coefficients of powers of ``s/w0`` (ascending),
    all divided by one factor; ``w0`` in rad/s.
    """

    num: Mapping[tuple[str, ...], npt.NDArray[np.complex128]]
    den: Mapping[tuple[str, ...], npt.NDArray[np.complex128]]
    w0: float

    def at(self, s: npt.ArrayLike) -> tuple[dict[tuple[str, ...], Complex],
                                            dict[tuple[str, ...], Complex]]:
        """Every coefficient at ``s`` (rad/s; an array, one element per part), Horner."""
        x = np.asarray(s, dtype=complex) / self.w0

        def horner(c: npt.NDArray[np.complex128]) -> Complex:
            out: Complex = np.full(x.shape, c[-1], dtype=complex)
            for k in range(len(c) - 2, -1, -1):
                out = out * x + c[k]
            return out

        return ({k: horner(c) for k, c in self.num.items() if c.any()},
                {k: horner(c) for k, c in self.den.items() if c.any()})


@functools.lru_cache(maxsize=64)
def polynomials(net: Netlist) -> Polynomials:
    """N and D's multilinear coefficients as exact polynomials in s (module docstring).

    Parameters
    ----------
    net : Netlist
        The circuit.

    Returns
    -------
    Polynomials
        Degree at most the number of capacitors.
    """
    caps = [e.farad for e in net.elements if isinstance(e, Capacitor) and e.farad > 0]
    n = len(caps)
    r0 = _reference_ohm(net)
    w0 = 1.0 / (r0 * math.exp(sum(map(math.log, caps)) / n)) if n else 1.0
    points = w0 * np.exp(2j * np.pi * np.arange(n + 1) / (n + 1))
    samples = [_raw(net, complex(s)) for s in points]
    norm = max(abs(x) for num, den in samples for x in den.values()) or 1.0

    def fit(which: int) -> dict[tuple[str, ...], npt.NDArray[np.complex128]]:
        out = {}
        for key in samples[0][which]:
            values = np.array([smp[which][key] for smp in samples]) / norm
            c = np.fft.fft(values) / (n + 1)  # c_m = Σ_k P(s_k)·e^(-2πjkm/(n+1)) / (n+1)
            out[key] = c
        return out

    return Polynomials(fit(0), fit(1), w0)


def _bordered(m: Complex, us: npt.NDArray[np.float64], vs: npt.NDArray[np.float64]) -> complex:
    """det [[M, U], [-Vᵀ, 0]]: zero exactly when U or V has dependent columns."""
    k = us.shape[1]
    if k and (np.linalg.matrix_rank(us) < k or np.linalg.matrix_rank(vs) < k):
        return 0j
    n = m.shape[0]
    big = np.zeros((n + k, n + k), dtype=complex)
    big[:n, :n] = m
    big[:n, n:] = us
    big[n:, :n] = -vs.T
    return complex(np.linalg.det(big))


def solve(net: Netlist, s: complex = 0j, *, a: complex = 0.0, yin: complex = 0.0,
          ro: float = 0.0, ycm: complex = 0.0) -> complex:
    """The output voltage of ``net`` at ``s`` for one op-amp (scalars; see coefficients).

    Parameters
    ----------
    net : Netlist
        The circuit.
    s : complex
        Laplace variable, rad/s.
    a, yin, ro : complex, complex, float
        The op-amp's open-loop gain A(s) (V/V), input admittance Yin(s) (S) and output
        resistance Ro (Ω).
    ycm : complex
        The common-mode input admittance from each input to ground (S).

    Returns
    -------
    complex
        v(out) per volt of input.
    """
    return complex(coefficients(net, complex(s)).evaluate(yin, ro, a, ycm))


__all__ = ["Capacitor", "Coefficients", "Element", "GROUND", "Netlist", "OpAmp", "Polynomials",
           "Resistor", "Source", "VARIABLES", "coefficients", "polynomials", "solve"]
