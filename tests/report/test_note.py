"""The design note: every section's numbers are the library's own (read back from the
cells' data-si values), the page is self-contained, and headless Chromium renders it
with every image loaded and something on screen."""

from __future__ import annotations

import os
import shutil
import subprocess
from html.parser import HTMLParser
from pathlib import Path

import pytest

from picker import api
from picker.report.note import SECTIONS
from picker.store import Store
from tests.cli.clirun import fails, run

STAGE = ["--topology", "inverting", "--gain", "10", "--vout", "5V", "--freq", "20kHz",
         "--rails", "±12", "--load", "2k", "--tolerance", "0.1%"]
OPTIONS = dict(topology="inverting", gain=10, vout="5V", freq="20kHz", rails="±12",
               load="2k", tolerance="0.1%")


class Sections(HTMLParser):
    """Each section's table rows as lists of (text, data-si) cells, and every img src."""

    def __init__(self) -> None:
        super().__init__()
        self.rows: dict[str, list[list[tuple[str, str]]]] = {}
        self.ids: list[str] = []
        self.images: list[str] = []
        self._section = ""
        self._cell: tuple[list[str], str] | None = None

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = dict(attrs)
        if tag == "section":
            self._section = a.get("id") or ""
            self.ids.append(self._section)
            self.rows[self._section] = []
        elif tag == "tr":
            self.rows.setdefault(self._section, []).append([])
        elif tag == "td":
            self._cell = ([], a.get("data-si") or "")
        elif tag == "img":
            self.images.append(a.get("src") or "")

    def handle_data(self, data: str) -> None:
        if self._cell is not None:
            self._cell[0].append(data)

    def handle_endtag(self, tag: str) -> None:
        if tag == "td" and self._cell is not None:
            self.rows[self._section][-1].append(("".join(self._cell[0]), self._cell[1]))
            self._cell = None

    def table(self, section: str) -> dict[str, list[tuple[str, str]]]:
        return {r[0][0]: r[1:] for r in self.rows[section] if r}


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> str:
    db = str(tmp_path_factory.mktemp("note") / "demo.db")
    run("init", "--demo", "--db", db)
    return db


@pytest.fixture(scope="module")
def page(demo: str, tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Sections]:
    out = tmp_path_factory.mktemp("html") / "amp.html"
    run("note", *STAGE, "--db", demo, "--out", str(out))
    parsed = Sections()
    parsed.feed(out.read_text(encoding="utf-8"))
    return out, parsed


def test_every_section_in_order(page: tuple[Path, Sections]) -> None:
    _, p = page
    assert p.ids == [sid for sid, _ in SECTIONS]


def test_numbers_are_the_librarys(demo: str, page: tuple[Path, Sections]) -> None:
    _, p = page
    store = Store.open(demo)
    try:
        req = api.requirement(**OPTIONS)
        sel = api.pick(req, store)
        best = sel.accepted[0].part
        report = api.why(req, best, store)
        spec = api.spec(req)
        minimums = p.table("minimums")
        for row in spec.explain:
            if row.value is not None:
                assert float(minimums[row.name][1][1]) == row.value, row.name
        chosen = p.table("chosen")
        for name, record in report.to_json()["checks"].items():
            assert float(chosen[name][1][1]) == record["need"], name
            if record["has"] is not None:
                assert float(chosen[name][2][1]) == record["has"], name
        net = api.design_network(api.built(req), store.get(best))
        network = p.table("network")
        for leg, ohms in net.resistors.items():
            assert float(network[leg][0][1]) == ohms
        wave = api.waveform(req, store, best).summary(0)
        waveform = p.table("waveform")
        assert float(waveform["peak +"][0][1]) == wave["peak_pos"]
        assert float(waveform["peak -"][0][1]) == wave["peak_neg"]
        resp = api.response(req, store, best).summary(0)
        assert float(p.table("response")["-3 dB frequency"][0][1]) == resp["f3db"]
        stock = p.table("stock")
        row = store.get(best)
        assert stock["label"][0][0] == best and int(stock["qty"][0][0]) == row["qty"]
    finally:
        store.dispose()
    assert f"Chosen part: {best} (accepted, best by margin)" in page[0].read_text(
        encoding="utf-8")


def test_self_contained(page: tuple[Path, Sections]) -> None:
    path, p = page
    text = path.read_text(encoding="utf-8")
    assert len(p.images) == 3 and all(s.startswith("data:image/png;base64,") for s in p.images)
    assert "http://" not in text and "https://" not in text and "<script" not in text


def _chromium() -> str:
    exe = shutil.which("chromium") or shutil.which("chromium-browser")
    if exe is None:
        if os.environ.get("CI"):
            pytest.fail("chromium is not installed; scripts/test installs it")
        pytest.skip("chromium is not installed (scripts/test installs it)")
    return exe


def _headless(exe: str, *args: str, cwd: Path) -> subprocess.CompletedProcess[str]:
    return subprocess.run([exe, "--headless", "--no-sandbox", "--disable-gpu",
                           "--hide-scrollbars", f"--user-data-dir={cwd / 'profile'}", *args],
                          capture_output=True, text=True, timeout=120, cwd=cwd)


def test_chromium_renders_it(page: tuple[Path, Sections], tmp_path: Path) -> None:
    """Headless Chromium (Debian's chromium package): the screenshot is not blank and
    every image in the DOM has loaded (a probe script in a copy of the page counts the
    broken ones after the load event)."""
    import numpy as np
    from matplotlib.image import imread

    exe = _chromium()
    path, _ = page
    shot = tmp_path / "shot.png"
    done = _headless(exe, f"--screenshot={shot}", "--window-size=1000,2400",
                     path.as_uri(), cwd=tmp_path)
    assert shot.exists(), done.stderr[-2000:]
    pixels = imread(shot)
    assert pixels.shape[0] == 2400 and float(np.std(pixels[..., :3])) > 0.05
    probe = tmp_path / "probe.html"
    probe.write_text(path.read_text(encoding="utf-8").replace(
        "</body>", "<script>window.addEventListener('load', () => {"
        "const bad = [...document.images].filter(i => !(i.complete && i.naturalWidth > 0));"
        "document.body.setAttribute('data-images', document.images.length + '/' + bad.length);"
        "});</script></body>"), encoding="utf-8")
    dom = _headless(exe, "--dump-dom", "--virtual-time-budget=5000", probe.as_uri(),
                    cwd=tmp_path).stdout
    assert 'data-images="3/0"' in dom, dom[:300]


def test_markdown_with_pngs_beside_it(demo: str, tmp_path: Path) -> None:
    out = tmp_path / "amp.md"
    msg = run("note", *STAGE, "--db", demo, "--out", str(out), "--part", "jfet-gp-a").stdout
    assert "3 PNG files" in msg
    text = out.read_text(encoding="utf-8")
    for _, heading in SECTIONS:
        assert f"## {heading}" in text
    for sid in ("waveform", "response", "envelope"):
        png = tmp_path / f"amp.{sid}.png"
        assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        assert f"](amp.{sid}.png)" in text
    assert "jfet-gp-a (chosen by --part)" in text


@pytest.mark.postgres
def test_the_database_is_named_without_its_password(pg_url: str, tmp_path: Path) -> None:
    secret = "s3cret-Pw"
    user, rest = pg_url.split("://", 1)[1].split("@", 1)
    url = f"{pg_url.split('://', 1)[0]}://{user}:{secret}@{rest}"  # trust auth ignores it
    run("init", "--demo", "--db", url)
    out = tmp_path / "amp.html"
    run("note", *STAGE, "--db", url, "--out", str(out))
    text = out.read_text(encoding="utf-8")
    assert secret not in text and "***" in text


def test_bad_out_and_the_database_itself_are_refused(demo: str, tmp_path: Path) -> None:
    assert "--out" in fails("note", *STAGE, "--db", demo, "--out", str(tmp_path / "n.pdf")).stderr
    odd = tmp_path / "stock.html"  # a careless name: the stockroom itself ends in .html
    run("init", "--demo", "--db", str(odd))
    before = odd.read_bytes()
    assert "--out" in fails("note", *STAGE, "--db", str(odd), "--out", str(odd)).stderr
    assert odd.read_bytes() == before
    assert "part(s)" in run("parts", "list", "--db", str(odd)).stderr
