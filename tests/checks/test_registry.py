"""The check registry: every check appears in spec --explain and in why, and the numbers
printed beside its formula reproduce the need printed for it.

The recomputation is arithmetic on the printed text (engineering notation read with
quantiphy, an outside parser), so a formula whose numbers drift from the check's own
need cannot pass unnoticed.
"""

from __future__ import annotations

import math
import re
from pathlib import Path

import pytest
from quantiphy import Quantity

from picker.checks import applicable, registered
from picker.design.requirement import requirement_from
from picker.design.spec import minimum_specs
from tests.cli.clirun import run

STAGES = [
    ["--topology", "inverting", "--gain", "10", "--vin", "0.5V", "--freq", "20kHz",
     "--rails", "±12", "--load", "2k", "--offset-max", "20mV", "--noise-max", "1mV"],
    ["--topology", "non-inverting", "--gain", "4.7", "--vin", "0.3V", "--freq", "50kHz",
     "--rails", "+5/0", "--load", "10k", "--source", "600", "--temp", "-40..85C",
     "--offset-max", "5mV", "--qty", "3"],
    ["--topology", "follower", "--vin", "1V", "--freq", "100kHz", "--rails", "±5",
     "--noise-max", "100uV", "--margin", "1.5"],
    ["--topology", "difference", "--gain", "2", "--vin", "1V", "--freq", "1kHz",
     "--rails", "±15", "--gain-error", "0.5%"],
    ["--topology", "difference", "--gain", "10", "--vin", "0.2V", "--freq", "1kHz",
     "--rails", "±15", "--gain-error", "2%", "--tolerance", "0.1%", "--vcm", "-3..6V",
     "--cmrr", "50dB", "--offset-max", "200mV", "--source", "50"],
]
PARTS = ["bip-gp-a", "bip-ss-b"]  # one fully described, one with blanks


def _si(token: str) -> float:
    """One printed value with its unit, in SI (V/µs -> V/s, % -> ratio)."""
    token = token.strip()
    if token.endswith("%"):
        return float(token[:-1]) / 100
    if token.endswith("V/µs"):
        return float(token[:-4]) * 1e6
    return float(Quantity(token.replace("µ", "u")))


_VALUE = re.compile(r"(\d+(?:\.\d+)?(?:e[-+]?\d+)?)(?:\s?([kMGmunpµ]?(?:Hz|V/µs|V|A|Ω|dB)|%))?")


def evaluate(expr: str) -> float:
    """A printed arithmetic expression ('2π × 20 kHz × 5 V × 1.25') evaluated in SI."""
    def value(m: re.Match[str]) -> str:
        number, unit = m.group(1), m.group(2)
        return repr(_si(number + (" " + unit if unit and unit != "%" else unit or "")))

    text = expr.replace("∞", "inf").replace("√", "sqrt").replace("²", "**2").replace("×", "*")
    text = text.replace("log10(", "lg(")
    text = re.sub(r"(\d)π", r"\1*pi", text)
    text = _VALUE.sub(value, text)
    return float(eval(text, {"__builtins__": {}}, {"pi": math.pi, "sqrt": math.sqrt,
                                                  "lg": math.log10, "inf": math.inf}))


def _need_and_numbers(numbers: str) -> tuple[float, float]:
    lhs, rhs = numbers.split(" = ", 1)
    rhs = rhs.split(" (", 1)[0]
    return evaluate(lhs), _si(rhs)


@pytest.mark.parametrize("stage", STAGES, ids=lambda s: s[1])
def test_every_check_explains_its_need_and_the_numbers_add_up(stage: list[str]) -> None:
    out = run("spec", *stage, "--explain").stdout
    req = requirement_from({k.lstrip("-"): v for k, v in zip(stage[::2], stage[1::2],
                                                              strict=True)})
    names = [c.name for c in applicable(minimum_specs(req))]
    assert len(names) >= 7
    for name in names:
        m = re.search(rf"\[{name}\]: (.+)\n    formula: (.+)\n    numbers: (.+)", out)
        assert m, f"{name} missing from spec --explain"
        shown, numbers = m.group(1), m.group(3)
        computed, result = _need_and_numbers(numbers)
        # the printed operands carry 4 significant digits: agree to rounding
        assert math.isclose(computed, result, rel_tol=2e-3, abs_tol=1e-12), (name, numbers)
        if name != "stock":
            assert math.isclose(_si(shown.split(" (")[0]), result, rel_tol=6e-3), (name, shown)


@pytest.mark.parametrize("part", PARTS)
@pytest.mark.parametrize("stage", STAGES, ids=lambda s: s[1])
def test_why_prints_every_check_with_its_formula_and_the_need_it_reports(
        stage: list[str], part: str, demo_db: str) -> None:
    out = run("why", part, *stage, "--db", demo_db).stdout
    formulas = {c.name: c.formula for c in registered()}
    blocks = re.findall(r"\[(PASS|FAIL|UNKNOWN)\] (\w+): (?:unknown, )?needs ([<>]=) ([^,;]+)"
                        r".*\n    formula: (.+)\n    need: (.+)\n    part: (.+)", out)
    assert len(blocks) >= 7
    for _status, name, _sense, need_text, formula, numbers, _part in blocks:
        assert formula == formulas[name]
        computed, result = _need_and_numbers(numbers)
        assert math.isclose(computed, result, rel_tol=2e-3, abs_tol=1e-12), (name, numbers)
        if name != "stock":
            assert math.isclose(_si(need_text), result, rel_tol=6e-3), (name, need_text)


def test_no_formula_is_written_twice() -> None:
    """Each check's formula text lives in its definition only."""
    source = "\n".join(p.read_text(encoding="utf-8")
                       for p in Path(__file__).parents[2].joinpath("picker").rglob("*.py"))
    for check in registered():
        head = check.formula[:30]
        assert source.count(head) == 1, (check.name, head)
