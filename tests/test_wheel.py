"""The built wheel, installed into a fresh virtual environment, runs on its own.

The wheel is built from a copy of the package (pip wheel, setuptools backend), installed
with ``pip install --no-deps`` into a venv made with ``--system-site-packages`` (so numpy
and friends come from the machine, no download), and run from an empty working directory
so that neither the source tree nor the editable install on this machine can stand in for it.
The references are outside picker: the wheel's own file list (a zip archive, PEP 427), the
interpreter's ``picker.__file__``, and the demo stockroom CSV read with the csv module.
About 12 s (build, venv, five runs of the installed program), so not marked slow.
"""

from __future__ import annotations

import csv
import json
import math
import os
import shutil
import subprocess
import sys
import sysconfig
import zipfile
from dataclasses import dataclass
from pathlib import Path

import pytest
from click.testing import CliRunner

from picker.cli import cli

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "picker" / "data" / "demo_stockroom.csv"
# the README's quick-start stage: inverting x10, 0.5 V peak in (5 V peak out) at 20 kHz,
# rails +-12 V, 2 kOhm load
STAGE = ["--topology", "inverting", "--gain", "10", "--vin", "0.5Vpk", "--freq", "20kHz",
         "--rails", "±12", "--load", "2k", "--tolerance", "0.1%"]
VOUT_PEAK_V, FREQ_HZ, RAIL_V, LOAD_OHM = 5.0, 20e3, 12.0, 2e3


@dataclass(frozen=True)
class Installed:
    wheel: Path
    venv: Path
    python: Path
    picker: Path
    site: Path  # the venv's own site-packages
    workdir: Path  # empty, outside the repository
    env: dict[str, str]


def _clean_env() -> dict[str, str]:
    """This process's environment without what could point Python or picker elsewhere."""
    env = {k: v for k, v in os.environ.items()
           if k not in ("PYTHONPATH", "PYTHONHOME", "PYTHONSTARTUP", "PYTHONUSERBASE",
                        "PICKER_DB", "VIRTUAL_ENV")}
    env["PIP_DISABLE_PIP_VERSION_CHECK"] = "1"
    env["PIP_NO_INPUT"] = "1"
    return env


def _run(cmd: list[str | Path], cwd: Path, env: dict[str, str]) -> subprocess.CompletedProcess[str]:
    return subprocess.run([str(c) for c in cmd], cwd=cwd, env=env, capture_output=True,
                          text=True, timeout=300, check=False)


def _ok(result: subprocess.CompletedProcess[str]) -> str:
    assert result.returncode == 0, (result.args, result.stdout, result.stderr)
    return result.stdout


@pytest.fixture(scope="module")
def installed(tmp_path_factory: pytest.TempPathFactory) -> Installed:
    base = tmp_path_factory.mktemp("wheel")
    env = _clean_env()
    # build from a copy holding only what the build reads, so the worktree gets no build/
    src = base / "src"
    src.mkdir()
    shutil.copy2(ROOT / "pyproject.toml", src)
    shutil.copy2(ROOT / "README.md", src)
    shutil.copytree(ROOT / "picker", src / "picker",
                    ignore=shutil.ignore_patterns("__pycache__", "*.pyc"))
    dist = base / "dist"
    _ok(_run([sys.executable, "-m", "pip", "wheel", "--no-deps", "--no-build-isolation",
              "--no-index", "-q", "-w", dist, src], base, env))
    (wheel,) = dist.glob("picker-*.whl")

    venv = base / "venv"
    _ok(_run([sys.executable, "-m", "venv", "--system-site-packages", "--without-pip", venv],
             base, env))
    python = venv / "bin" / "python"
    # the machine's pip, run by the venv's interpreter, installs into the venv; the editable
    # picker in the system site-packages is ignored, not uninstalled
    _ok(_run([python, "-m", "pip", "install", "--no-deps", "--no-index", "--ignore-installed",
              "-q", wheel], base, env))
    site = Path(_ok(_run([python, "-c", "import sysconfig; print(sysconfig.get_path('purelib'))"],
                         base, env)).strip())
    workdir = base / "work"
    workdir.mkdir()
    return Installed(wheel, venv, python, venv / "bin" / "picker", site, workdir, env)


def _demo_rows() -> dict[str, dict[str, str]]:
    with DEMO.open(encoding="utf-8", newline="") as f:
        return {row["label"]: row for row in csv.DictReader(f)}


def test_the_wheel_holds_every_file_of_the_package(installed: Installed) -> None:
    # a wheel is a zip archive whose member names are the installed paths (PEP 427)
    with zipfile.ZipFile(installed.wheel) as whl:
        members = {n for n in whl.namelist() if n.startswith("picker/")}
    source = {p.relative_to(ROOT).as_posix() for p in (ROOT / "picker").rglob("*")
              if p.is_file() and "__pycache__" not in p.parts and p.suffix != ".pyc"}
    assert source - members == set(), "files of the package missing from the wheel"
    assert members - source == set(), "files in the wheel that the package does not have"
    assert "picker/data/demo_stockroom.csv" in members
    assert any(m.startswith("picker/store/migrations/versions/0001") for m in members)


def test_the_venv_imports_its_own_install(installed: Installed) -> None:
    # this machine also has an editable picker in the system site-packages; the venv's
    # site-packages comes first on sys.path, so its own copy must win
    out = _ok(_run([installed.python, "-c", "import picker, sys; print(picker.__file__)"],
                   installed.workdir, installed.env))
    where = Path(out.strip()).resolve()
    assert where.is_relative_to(installed.site.resolve()), where
    assert not where.is_relative_to(ROOT), where
    shebang = installed.picker.read_text(encoding="utf-8").splitlines()[0]
    assert shebang == f"#!{installed.python}", shebang


def test_help_init_demo_and_pick_run_from_the_wheel(installed: Installed) -> None:
    def run(*args: str) -> subprocess.CompletedProcess[str]:
        return _run([installed.picker, *args], installed.workdir, installed.env)

    help_text = _ok(run("--help"))
    assert "init" in help_text and "pick" in help_text
    _ok(run("init", "--demo", "--db", "X.db"))
    assert (installed.workdir / "X.db").is_file()
    text = _ok(run("pick", *STAGE, "--db", "X.db"))
    selection = json.loads(_ok(run("pick", *STAGE, "--json", "--db", "X.db")))
    accepted = [row["part"] for row in selection["accepted"]]
    rows = _demo_rows()
    assert accepted, "no demo part accepted for the README's quick-start stage"
    assert set(accepted) <= set(rows)
    for label in accepted:
        assert label in text, label
        row = rows[label]
        # every accepted part meets, with a known value (an empty cell is unknown), the
        # plain necessary conditions of the stage (common practice, no source):
        # rated total supply covers the +-12 V rails
        assert float(row["supply_max_v"]) >= 2 * RAIL_V, label
        # full-power bandwidth: a sine of peak Vp at f needs slew >= 2 pi f Vp
        # (Sedra & Smith, Microelectronic Circuits, 7th ed., sec. 2.8, from memory)
        assert float(row["slew_v_per_s"]) >= 2 * math.pi * FREQ_HZ * VOUT_PEAK_V, label
        # the output reaches 5 V peak within the rails, and drives at least the load
        # current Vp / RL (Ohm's law; the feedback network draws more)
        assert RAIL_V - float(row["out_head_pos_v"]) >= VOUT_PEAK_V, label
        assert RAIL_V - float(row["out_head_neg_v"]) >= VOUT_PEAK_V, label
        assert float(row["iout_a"]) >= VOUT_PEAK_V / LOAD_OHM, label
        assert int(row["qty"]) >= 1, label
    # the installed program and the source tree give the same selection on the same file
    here = CliRunner().invoke(cli, ["pick", *STAGE, "--json", "--db",
                                    str(installed.workdir / "X.db")], catch_exceptions=False)
    assert here.exit_code == 0, here.output
    assert json.loads(here.stdout) == selection


def test_the_wheel_needs_no_import_done_by_a_site_hook(installed: Installed) -> None:
    # .pth files in the system site-packages (the editable install's finder among them)
    # import modules such as importlib.util at start-up and so can hide a missing import.
    # Run the installed script with -S (no site hooks), the venv's and the machine's
    # site-packages on PYTHONPATH (directories only, no .pth processing).
    machine_site = sysconfig.get_path("purelib")
    env = dict(installed.env,
               PYTHONPATH=os.pathsep.join([str(installed.site), machine_site]))
    probe = _ok(_run([installed.python, "-S", "-c",
                      "import sys, picker; print('importlib.util' in sys.modules, "
                      "picker.__file__)"], installed.workdir, env))
    preloaded, where = probe.split()
    assert preloaded == "False"
    assert Path(where).resolve().is_relative_to(installed.site.resolve())
    for args in (["--help"], ["init", "--demo", "--db", "S.db"],
                 ["pick", *STAGE, "--db", "S.db"]):
        _ok(_run([installed.python, "-S", installed.picker, *args], installed.workdir, env))
