"""Start-up stays light: help and commands that do not need them import no heavy library."""

from __future__ import annotations

import re
import subprocess
import sys

import pytest

HEAVY = ("numpy", "pandas", "sqlalchemy", "matplotlib")


def imported(*args: str) -> set[str]:
    """Top-level modules a fresh `python -m picker ARGS` imports (-X importtime lists them)."""
    r = subprocess.run([sys.executable, "-X", "importtime", "-m", "picker", *args],
                       capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr[-2000:]
    names = re.findall(r"^import time:\s+\d+ \|\s+\d+ \|\s*([\w.]+)$", r.stderr, re.M)
    assert names, "no -X importtime lines"
    return {n.split(".")[0] for n in names}


@pytest.mark.parametrize("args", [("--help",), ("pick", "--help"), ("parts", "--help"),
                                  ("stock", "--help"), ("parts", "fields")])
def test_help_imports_no_heavy_library(args: tuple[str, ...]) -> None:
    loaded = imported(*args)
    assert "click" in loaded
    assert not loaded & set(HEAVY), sorted(loaded & set(HEAVY))
