"""report.html opened in a real browser (headless chromium): not blank, images load, fits a phone.

The browser is the reference here: Chromium's own image decoder says whether
each <img> loaded (``naturalWidth > 0``) and its layout engine says whether the
page is wider than a phone screen.  A test-only wrapper page frames the
report and writes those numbers into its DOM, which ``--dump-dom`` prints; the
report itself carries no script (its Content Security Policy forbids scripts).
"""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import pytest

from report_inputs import make_inputs
from roamstat.config import Config
from roamstat.report import write_report

pytestmark = pytest.mark.browser

BROWSER = shutil.which("chromium") or shutil.which("chromium-browser")
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-background-networking",
         "--disable-component-update", "--disable-sync"]

WRAPPER = """<!DOCTYPE html><html><body>
<iframe id="report" src="{src}" width="{width}" height="1600"></iframe><pre id="result">pending</pre>
<script>
document.getElementById("report").addEventListener("load", function () {{
  var out = document.getElementById("result"), doc = this.contentDocument;
  try {{
    var images = Array.prototype.slice.call(doc.images);
    var loaded = images.filter(function (i) {{ return i.complete && i.naturalWidth > 0; }}).length;
    out.textContent = "images=" + images.length + " loaded=" + loaded +
      " scroll_width=" + doc.documentElement.scrollWidth + " view_width=" + doc.documentElement.clientWidth;
  }} catch (e) {{ out.textContent = "error=" + e; }}
}});
</script></body></html>
"""


def run_browser(tmp_path: Path, *args: str) -> subprocess.CompletedProcess:
    profile = tmp_path / f"profile-{len(list(tmp_path.glob('profile-*')))}"
    return subprocess.run([BROWSER, *FLAGS, f"--user-data-dir={profile}", *args], capture_output=True,
                          text=True, timeout=180)


@pytest.fixture(scope="module")
def report_path(tmp_path_factory):
    if BROWSER is None:
        pytest.skip("no chromium or chromium-browser on PATH (Debian: apt-get install -y chromium)")
    out = tmp_path_factory.mktemp("browser") / "out"
    tables, animals, run_info = make_inputs(["ELK-01", "<script>alert(1)</script>", "wolf 2"],
                                            heavy_ids={"wolf 2"})
    return write_report(out, tables, animals, run_info, Config())


def page_numbers(tmp_path: Path, report: Path, width: int) -> dict:
    wrapper = tmp_path / f"wrapper-{width}.html"
    wrapper.write_text(WRAPPER.format(src=report.resolve().as_uri(), width=width), encoding="utf-8")
    done = run_browser(tmp_path, "--allow-file-access-from-files", "--virtual-time-budget=15000", "--dump-dom",
                       wrapper.resolve().as_uri())
    found = re.search(r'<pre id="result">([^<]*)</pre>', done.stdout)
    assert found, f"no result in the browser's DOM (exit {done.returncode}): {done.stderr[-500:]}"
    assert "=" in found.group(1) and "error" not in found.group(1), found.group(1)
    return {k: int(v) for k, v in re.findall(r"(\w+)=(\d+)", found.group(1))}


def test_screenshot_is_not_blank(report_path, tmp_path):
    from matplotlib.image import imread  # general-purpose PNG decoder

    shot = tmp_path / "shot.png"
    done = run_browser(tmp_path, f"--screenshot={shot}", "--window-size=1200,2000", report_path.resolve().as_uri())
    assert shot.is_file(), f"no screenshot (exit {done.returncode}): {done.stderr[-500:]}"
    pixels = imread(str(shot))[..., :3]
    assert pixels.shape[:2] == (2000, 1200)
    assert pixels.std() > 0.05  # a blank page is one colour (std 0)
    not_white = (pixels < 0.9).any(axis=2).mean()
    assert not_white > 0.02, not_white


def test_every_image_loads_in_the_browser(report_path, tmp_path):
    html = report_path.read_text(encoding="utf-8")
    expected = len(re.findall(r"<img\b", html))
    numbers = page_numbers(tmp_path, report_path, 1200)
    assert expected >= 7
    assert numbers["images"] == expected
    assert numbers["loaded"] == expected


def test_page_fits_a_phone_width(report_path, tmp_path):
    # Wide tables scroll inside their own box; the page itself is no wider than the screen.
    numbers = page_numbers(tmp_path, report_path, 400)
    assert numbers["view_width"] <= 400
    assert numbers["scroll_width"] <= numbers["view_width"], numbers


def test_missing_image_is_detected(report_path, tmp_path):
    # The load check can fail: the same report with one figure removed reports it.
    copy = tmp_path / "copy"
    shutil.copytree(report_path.parent, copy)
    victim = sorted((copy / "figures").glob("*.png"))[0]
    victim.unlink()
    numbers = page_numbers(tmp_path, copy / "report.html", 1200)
    assert numbers["loaded"] == numbers["images"] - 1
