"""The HTML report opened in a real headless browser (Debian's Chromium).

Checked in the browser: every image decodes and has a non-zero natural size,
every section heading for the data present is there, and the page loaded no
resource other than its own embedded data. The report itself holds no script;
the checking script is added to a test copy only, and its findings come back in
the page title of ``--dump-dom``. A screenshot of the report is saved under
``test-artifacts/`` (kept out of git). The study data are invented (kinetics.demo).
"""

from __future__ import annotations

import html
import json
import re
import shutil
import subprocess
from pathlib import Path

import pytest

from kinetics.report.document import SECTION_TITLES

REPO = Path(__file__).resolve().parent.parent
ARTIFACTS = REPO / "test-artifacts"
FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--disable-extensions", "--host-resolver-rules=MAP * ~NOTFOUND")

_CHECK = """<script>
window.addEventListener("load", function () {
  var imgs = Array.prototype.map.call(document.images, function (i) {
    return [i.complete, i.naturalWidth, i.naturalHeight]; });
  var h2 = Array.prototype.map.call(document.querySelectorAll("h2"), function (h) {
    return h.textContent.trim(); });
  var res = performance.getEntriesByType("resource").map(function (e) { return e.name; });
  var refs = [];
  document.querySelectorAll("*").forEach(function (el) {
    ["src", "href", "srcset", "poster", "data", "action", "background"].forEach(function (a) {
      var v = el.getAttribute(a);
      if (v !== null) { refs.push(v.slice(0, 30)); }
    });
    var bg = getComputedStyle(el).backgroundImage;
    if (bg && bg !== "none") { refs.push(bg.slice(0, 30)); }
  });
  document.title = "CHECK:" + JSON.stringify({images: imgs, headings: h2, resources: res,
                                             refs: refs});
});
</script>"""


def _chromium() -> str:
    for name in ("chromium", "chromium-browser"):
        path = shutil.which(name)
        if path:
            return path
    if Path("/usr/bin/chromium").exists():
        return "/usr/bin/chromium"
    pytest.skip("Chromium is not installed (Debian package 'chromium'; .ci/run installs it)")


def _run(args, profile: Path) -> subprocess.CompletedProcess:
    return subprocess.run([_chromium(), *FLAGS, f"--user-data-dir={profile}", *args],
                          capture_output=True, text=True, timeout=120, check=False)


@pytest.fixture(scope="module")
def report():
    from test_report import rich_report

    _chromium()
    return rich_report()


def _expected_headings(rich) -> list[str]:
    """Sections the data call for, decided here from the tables and provenance."""
    t = rich.analysis.tables
    want = ["data"]
    if "isothermal_runs" in t:
        want.append("isothermal")
    if any(k in t for k in ("cooling_runs", "ozawa", "mo", "friedman", "vyazovkin")):
        want.append("cooling")
    if any(k in t for k in ("hoffman_lauritzen", "hoffman_weeks", "secondary")):
        want.append("growth")
    if any(k.startswith("compare_") for k in t):
        want.append("compare")
    if any(k.startswith("global_") for k in t):
        want.append("global")
    want += ["methods", "priors", "diagnostics", "software", "caution", "appendix"]
    return [SECTION_TITLES[k] for k in want]


def test_report_in_a_real_browser(report, tmp_path):
    page = report.html.read_text(encoding="utf-8")
    assert "<script" not in page.lower()
    copy = tmp_path / "report_check.html"
    copy.write_text(page.replace("</body>", _CHECK + "</body>"), encoding="utf-8")
    done = _run(["--virtual-time-budget=5000", "--dump-dom", copy.as_uri()], tmp_path / "p1")
    m = re.search(r"<title>CHECK:(.*?)</title>", done.stdout, flags=re.S)
    assert m, f"no result from Chromium (exit {done.returncode}): {done.stderr[-2000:]}"
    found = json.loads(html.unescape(m.group(1)))
    n_img = page.count("<img ")
    assert n_img >= 15 and len(found["images"]) == n_img
    for complete, w, h in found["images"]:
        assert complete and w > 0 and h > 0
    assert found["headings"] == _expected_headings(report)
    assert not [r for r in found["resources"] if not r.startswith("data:")]
    for ref in found["refs"]:
        assert ref.startswith(("data:", "#", 'url("data:')), ref
        assert "http" not in ref


def test_screenshot_saved_as_artifact(report, tmp_path):
    ARTIFACTS.mkdir(exist_ok=True)
    shot = ARTIFACTS / "report_screenshot.png"
    shot.unlink(missing_ok=True)
    done = _run(["--hide-scrollbars", f"--screenshot={shot}", "--window-size=1200,2000",
                 report.html.as_uri()], tmp_path / "p2")
    assert shot.is_file(), done.stderr[-2000:]
    data = shot.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    width, height = int.from_bytes(data[16:20], "big"), int.from_bytes(data[20:24], "big")
    assert (width, height) == (1200, 2000)
    assert len(data) > 50_000  # a rendered page, not a blank one
