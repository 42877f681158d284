"""report.html: one self-contained file for a run, a sweep and a sizing search, opened in a
real headless browser (Debian's chromium, driven by playwright).

The browser test fails, never skips, when no browser can be found: CI installs chromium
(.ci/run), and a developer gets it with ``apt-get install -y chromium`` (README set-up).
"""

from __future__ import annotations

import os
import re
import shutil
import tempfile
from pathlib import Path

import pytest

from conftest import TINY_STUDY, write_study
from covergrid import cli
from covergrid.pipeline.run import run_study
from covergrid.study import load_study

#: Launch flags of headless chromium here: no sandbox (root), no GPU, and nothing that
#: reaches the network by itself (QUIC, background and component updates, sync).
CHROMIUM_FLAGS = ["--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                  "--disable-background-networking", "--disable-component-update",
                  "--disable-sync"]

_REQUIREMENT = "requirement: {metric: max_gap, at_most: 3600, area_fraction: 0.5}\n"


def chromium_path() -> str | None:
    """The browser to test with: $COVERGRID_CHROMIUM, else chromium on the PATH."""
    given = os.environ.get("COVERGRID_CHROMIUM")
    if given:
        return given if Path(given).is_file() else None
    for name in ("chromium", "chromium-browser"):
        found = shutil.which(name)
        if found:
            return found
    return "/usr/bin/chromium" if Path("/usr/bin/chromium").is_file() else None


@pytest.fixture(scope="module")
def run_report(tmp_path_factory) -> Path:
    """The report of a tiny study run with its figures and a requirement."""
    folder = tmp_path_factory.mktemp("report_run")
    study = load_study(write_study(folder, TINY_STUDY + _REQUIREMENT
                                   + "compute: {scheduler: synchronous}\n"))
    result = run_study(study, folder / "out")
    assert result.out_dir is not None
    return result.out_dir / "report.html"


def _images(html: str) -> list[str]:
    return re.findall(r'<img src="([^"]+)"', html)


def test_run_report_is_self_contained(run_report):
    html = run_report.read_text(encoding="utf-8")
    folder = run_report.parent
    pngs = sorted(p for p in folder.rglob("*.png"))
    images = _images(html)
    assert len(images) == len(pngs) >= 4  # every figure: maps, ground tracks, profile
    assert all(src.startswith("data:image/png;base64,") for src in images)
    # no address outside the file: no link, script, style sheet or font from anywhere
    assert not re.search(r"(?:src|href)=\"(?!data:)", html)
    assert "http://" not in html and "https://" not in html and "<script" not in html
    # the study, the verdict, the summary, provenance and cautions
    resolved = (folder / "study.resolved.yaml").read_text(encoding="utf-8")
    assert resolved.splitlines()[0] in html
    assert "maximum gap at most 60.0 min over 50 % of the area" in html
    assert "SHA-256" in html and "covergrid version" in html
    assert "not for operations or safety-of-life use" in html
    assert "mean response time" in html  # a summary row


def test_no_report_leaves_it_out(tmp_path):
    study = write_study(tmp_path, TINY_STUDY + "compute: {scheduler: synchronous}\n")
    assert cli.main(["run", str(study), "--out", str(tmp_path / "o"), "--no-maps", "--quiet",
                     "--no-report"]) == 0
    assert not (tmp_path / "o" / "tiny-ring" / "report.html").exists()
    assert cli.main(["run", str(study), "--out", str(tmp_path / "o"), "--no-maps",
                     "--quiet"]) == 0
    html = (tmp_path / "o" / "tiny-ring" / "report.html").read_text(encoding="utf-8")
    assert _images(html) == []  # no figures drawn: none embedded, the rest still there


_SWEEP = TINY_STUDY + _REQUIREMENT + """\
compute: {scheduler: synchronous}
sweep: {total: [4, 6], planes: all, phasing: all}
"""

_SIZING = TINY_STUDY + _REQUIREMENT + """\
compute: {scheduler: synchronous}
sizing: {altitude_km: [1200], inclination_deg: [55], total: {min: 2, max: 6}, prune: false}
"""


@pytest.mark.parametrize(("command", "text", "expected"), [
    ("sweep", _SWEEP, "designs meet the requirement"),
    ("size", _SIZING, "Smallest design per altitude and inclination"),
])
def test_trade_reports(tmp_path, command, text, expected):
    study = write_study(tmp_path, text)
    status = cli.main([command, str(study), "--out", str(tmp_path / "o"), "--quiet"])
    assert status in (0, 1)
    html = (tmp_path / "o" / "tiny-ring" / "report.html").read_text(encoding="utf-8")
    assert expected in html
    pngs = list((tmp_path / "o" / "tiny-ring" / "trades").rglob("*.png"))
    assert len(_images(html)) == len(pngs) >= 2


def test_report_opens_in_a_real_browser(run_report, tmp_path):
    """Headless chromium loads the report: no console error, no request outside the file,
    every image decoded, the verdict shown; a screenshot is kept in the test's folder."""
    browser_path = chromium_path()
    if browser_path is None:
        pytest.fail("no chromium found: install it (apt-get install -y chromium) or set "
                    "COVERGRID_CHROMIUM to a chromium executable; this test never skips")
    from playwright.sync_api import sync_playwright

    problems: list[str] = []
    outside: list[str] = []
    with sync_playwright() as pw, tempfile.TemporaryDirectory() as profile:
        context = pw.chromium.launch_persistent_context(
            profile, executable_path=browser_path, headless=True, args=CHROMIUM_FLAGS,
            viewport={"width": 1280, "height": 900})
        try:
            page = context.new_page()
            page.on("console", lambda m: problems.append(f"console {m.type}: {m.text}")
                    if m.type in ("error", "warning") else None)
            page.on("pageerror", lambda e: problems.append(f"page error: {e}"))

            def refuse(route):
                if not route.request.url.startswith(("file:", "data:")):
                    outside.append(route.request.url)
                    return route.abort()
                return route.continue_()

            page.route("**/*", refuse)
            page.goto(run_report.as_uri(), wait_until="load")
            widths = page.evaluate(
                "Array.from(document.images, i => i.complete ? i.naturalWidth : 0)")
            verdict = page.inner_text("#verdict")
            page.screenshot(path=str(tmp_path / "report.png"), full_page=True)
        finally:
            context.close()
    assert problems == []
    assert outside == []
    assert len(widths) >= 4 and all(w > 0 for w in widths), widths
    assert "MET" in verdict and "margin" in verdict
    from PIL import Image

    with Image.open(tmp_path / "report.png") as shot:
        assert shot.size[0] == 1280 and shot.size[1] > 2000  # the whole page, figures in it
