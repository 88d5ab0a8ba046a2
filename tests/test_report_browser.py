"""report.html opened in a real browser (headless chromium): not blank, images load, fits a phone,
no table overflows at 1280 px, every image has alt text, the legend is there, and a paged
deployment's overview links every animal page and its search box filters.

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

import numpy as np
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
    var noalt = images.filter(function (i) {{ return !(i.getAttribute("alt") || "").trim(); }}).length;
    var view = doc.documentElement.clientWidth;
    // A table overflows when it reaches past the window or past the box that holds it.
    var overflow = Array.prototype.slice.call(doc.querySelectorAll("table")).filter(function (t) {{
      return t.getBoundingClientRect().right > view + 0.5 || t.scrollWidth > t.parentElement.clientWidth + 1;
    }}).length;
    var shown = -1, box = doc.getElementById("animal-search");
    if (box && "{query}") {{
      box.value = "{query}";
      box.dispatchEvent(new Event("input"));
      shown = Array.prototype.slice.call(doc.querySelectorAll("#overview-table tbody")).filter(function (b) {{
        return !b.hidden && b.getBoundingClientRect().height > 0; }}).length;
    }}
    out.textContent = "images=" + images.length + " loaded=" + loaded + " noalt=" + noalt +
      " scroll_width=" + doc.documentElement.scrollWidth + " view_width=" + view + " overflow=" + overflow +
      " legend=" + (doc.getElementById("legend") ? 1 : 0) +
      " animal_links=" + doc.querySelectorAll('a[href^="animals/"]').length +
      " back_links=" + doc.querySelectorAll('a[href^="../report.html"]').length + " shown=" + (shown + 1);
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


def page_numbers(tmp_path: Path, report: Path, width: int, query: str = "") -> dict:
    """Numbers the browser measured; ``shown`` is 1 + the animal blocks left visible by ``query``."""
    wrapper = tmp_path / f"wrapper-{width}-{len(list(tmp_path.glob('wrapper-*')))}.html"
    wrapper.write_text(WRAPPER.format(src=report.resolve().as_uri(), width=width, query=query), encoding="utf-8")
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


def test_no_table_overflows_at_1280_and_every_image_has_alt_text(report_path, tmp_path):
    numbers = page_numbers(tmp_path, report_path, 1280)
    assert numbers["overflow"] == 0, numbers
    assert numbers["scroll_width"] <= numbers["view_width"], numbers
    assert numbers["images"] >= 7 and numbers["noalt"] == 0, numbers
    assert numbers["legend"] == 1


def test_overflow_check_can_fail(report_path, tmp_path):
    # The same report with a table forced wider than the window: the check counts it.
    copy = tmp_path / "wide"
    shutil.copytree(report_path.parent, copy)
    html = (copy / "report.html").read_text(encoding="utf-8")
    (copy / "report.html").write_text(html.replace("<table", '<table style="min-width:3000px"', 1), encoding="utf-8")
    assert page_numbers(tmp_path, copy / "report.html", 1280)["overflow"] >= 1


def tiny_deployment(path: Path, n_animals: int, n_fixes: int, seed: int = 3) -> Path:
    """Many short simulated tracks (correlated random walks, hourly fixes), for layout checks only."""
    rng = np.random.default_rng(seed)
    lines = ["animal_id,timestamp,latitude,longitude"]
    start = np.datetime64("2025-05-01T00:00:00")
    for a in range(n_animals):
        heading = np.cumsum(rng.vonmises(0.0, 2.0, n_fixes))
        step = rng.gamma(2.0, 60.0, n_fixes)
        north, east = np.cumsum(step * np.cos(heading)), np.cumsum(step * np.sin(heading))
        for i in range(n_fixes):
            lat = 60.0 + north[i] / 111_320.0
            lon = 10.0 + east[i] / (111_320.0 * np.cos(np.radians(60.0)))
            lines.append(f"T{a:04d},{start + np.timedelta64(i, 'h')}Z,{lat:.6f},{lon:.6f}")
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def paged_report(tmp_path_factory):
    """A deployment over the (lowered) page threshold: overview page plus one page per animal."""
    if BROWSER is None:
        pytest.skip("no chromium or chromium-browser on PATH (Debian: apt-get install -y chromium)")
    from roamstat.manifest import run_info
    from roamstat.outputs import report_tables
    from roamstat.run import run_command

    base = tmp_path_factory.mktemp("paged")
    cfg = Config(replicates=19, report=False, quiet=True, nulls=("crw",))
    result = run_command("run", [tiny_deployment(base / "tiny.csv", 30, 48)], base / "out", cfg)
    path = write_report(result.out_dir, report_tables(result.loaded, result.tables, cfg), result.animals,
                        run_info(result.loaded, cfg, None), cfg, pages_from=10)
    return path, [a.animal_id for a in result.animals]


def test_paged_report_links_every_animal_page(paged_report, tmp_path):
    path, ids = paged_report
    numbers = page_numbers(tmp_path, path, 1280)
    assert numbers["animal_links"] == len(ids) == 30
    assert numbers["overflow"] == 0 and numbers["legend"] == 1, numbers
    html = path.read_text(encoding="utf-8")
    targets = re.findall(r'href="(animals/[^"]+\.html)"', html)
    assert len(set(targets)) == len(ids) and all((path.parent / t).is_file() for t in targets)
    # One animal page in the browser: its figures load, its tables fit, it links back to the overview.
    animal = page_numbers(tmp_path, path.parent / targets[0], 1280)
    assert animal["images"] >= 3 and animal["loaded"] == animal["images"] and animal["noalt"] == 0, animal
    assert animal["overflow"] == 0 and animal["back_links"] >= 1, animal


def test_search_box_filters_the_overview(paged_report, tmp_path):
    path, ids = paged_report
    assert page_numbers(tmp_path, path, 1280, query="t0007")["shown"] - 1 == 1  # one id matches
    assert page_numbers(tmp_path, path, 1280, query="t00")["shown"] - 1 == len(ids)
    assert page_numbers(tmp_path, path, 1280, query="no-such-animal")["shown"] - 1 == 0
