"""Read ngspice's ASCII raw file (``SPICE_ASCIIRAWFILE=1 ngspice -b -r FILE``): every plot
(analysis) with its vectors. The format is ngspice's own (ngspice manual, "rawfile
format"): a header of ``Key: value`` lines, the variables, then ``Values:`` with one
block per point (index and first value on one line, the others indented; complex
values as ``re,im``)."""

from __future__ import annotations

import os
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest


def read_raw(path: Path) -> dict[str, dict[str, np.ndarray]]:
    """Plot name -> {vector name (lower case): values} (complex for complex plots)."""
    lines = path.read_text().splitlines()
    plots: dict[str, dict[str, np.ndarray]] = {}
    i = 0
    while i < len(lines):
        if not lines[i].startswith("Plotname:"):
            i += 1
            continue
        name = lines[i].split(":", 1)[1].strip()
        head: dict[str, str] = {}
        while not lines[i].startswith("Variables:"):
            key, _, value = lines[i].partition(":")
            head[key.strip()] = value.strip()
            i += 1
        nvar, npts = int(head["No. Variables"]), int(head["No. Points"])
        names = [lines[i + 1 + k].split()[1].lower() for k in range(nvar)]
        i += 1 + nvar
        assert lines[i].startswith("Values:")
        i += 1
        cplx = "complex" in head["Flags"]
        data = np.zeros((npts, nvar), dtype=complex if cplx else float)
        for p in range(npts):
            for k in range(nvar):
                text = lines[i].split()[-1]
                if cplx:
                    re, im = text.split(",")
                    data[p, k] = complex(float(re), float(im))
                else:
                    data[p, k] = float(text)
                i += 1
        plots[name] = {v: data[:, k] for k, v in enumerate(names)}
    return plots


def run_deck(deck: str, tmp_path: Path, name: str) -> dict[str, dict[str, np.ndarray]]:
    """Run a deck as written with ngspice in batch mode; its plots from the raw file."""
    if shutil.which("ngspice") is None:
        if os.environ.get("CI"):
            pytest.fail("ngspice is not installed; scripts/test installs it")
        pytest.skip("ngspice is not installed (scripts/test installs it)")
    cir, raw = tmp_path / f"{name}.cir", tmp_path / f"{name}.raw"
    cir.write_text(deck)
    done = subprocess.run(["ngspice", "-b", "-r", str(raw), str(cir)], capture_output=True,
                          text=True, timeout=300, cwd=tmp_path,
                          env={**os.environ, "SPICE_ASCIIRAWFILE": "1"})
    failed = [ln for ln in (done.stdout + done.stderr).splitlines() if ln.lower().startswith("error")]
    assert raw.exists() and not failed, done.stdout[-3000:] + done.stderr[-3000:]
    return read_raw(raw)
