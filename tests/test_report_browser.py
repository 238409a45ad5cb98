"""The HTML report in a real browser (Debian's Chromium, headless).

Checks that the page renders: every image decodes, the sections are present, no console
errors; and keeps a screenshot for a person to look at.  Skips, with the reason, where
Chromium is not installed (``.ci/run`` installs it with apt-get).
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
from pathlib import Path

import pytest

from tfhrv.dataset.build import scan
from tfhrv.signal.clean import clean
from tfhrv.synth import simulate_recording
from tfhrv.viz.report import SECTIONS, build_report

SCREENSHOT_DIR = Path(os.environ.get("TFHRV_SCREENSHOT_DIR", "/nonexistent"))
CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--hide-scrollbars"]

CHECK = """
<script>
window.addEventListener("load", function () {
  var imgs = Array.from(document.images);
  var broken = imgs.filter(function (i) { return !(i.complete && i.naturalWidth > 0); });
  var ids = Array.from(document.querySelectorAll("[id]")).map(function (e) { return e.id; });
  var out = document.createElement("pre");
  out.id = "browser-check";
  out.textContent = "IMAGES=" + imgs.length + " BROKEN=" + broken.length +
    " SECTIONS=" + ids.join(",");
  document.body.appendChild(out);
});
</script>
"""


@pytest.fixture(scope="module")
def report_html() -> str:
    sim = simulate_recording(days=0.375, rng=3)
    return build_report(scan(clean(sim.recording)))


def _run(args, tmp_path):
    return subprocess.run([CHROMIUM, *FLAGS, f"--user-data-dir={tmp_path / 'profile'}", *args],
                          capture_output=True, text=True, timeout=180, check=False)


@pytest.mark.skipif(CHROMIUM is None, reason="Chromium is not installed on this machine")
def test_report_renders_in_chromium(report_html, tmp_path):
    assert "<script" not in report_html.lower()  # the report itself runs no code
    page = tmp_path / "report.html"
    page.write_text(report_html.replace("</body>", CHECK + "</body>"), encoding="utf-8")
    dom = _run(["--enable-logging=stderr", "--v=0", "--virtual-time-budget=10000",
                "--dump-dom", page.as_uri()], tmp_path)
    assert dom.returncode == 0, dom.stderr[-2000:]
    m = re.search(r"IMAGES=(\d+) BROKEN=(\d+) SECTIONS=([\w,-]*)", dom.stdout)
    assert m, dom.stdout[-2000:]
    n_images, n_broken, sections = int(m.group(1)), int(m.group(2)), m.group(3).split(",")
    assert n_images >= 5 and n_broken == 0
    for sec in SECTIONS:
        assert sec in sections, sec
    console_errors = [ln for ln in dom.stderr.splitlines()
                      if "CONSOLE" in ln and ("Error" in ln or "Uncaught" in ln)]
    assert not console_errors, console_errors
    shot = SCREENSHOT_DIR / "report.png" if SCREENSHOT_DIR.is_dir() else tmp_path / "report.png"
    proc = _run(["--window-size=1280,2400", f"--screenshot={shot}", page.as_uri()], tmp_path)
    assert proc.returncode == 0 and shot.stat().st_size > 10_000
    assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
