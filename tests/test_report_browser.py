"""The report in a real browser: headless Chromium renders report.html of the demo; the
verdict must be the first text after the title, above the figures, and every image must
load (decoded, non-zero size).  The page itself has no scripts: a probe script is added to a
copy here only.  Skipped, with the reason, where no Chromium is installed."""

import json
import os
import re
import shutil
import subprocess
import tempfile
from pathlib import Path

import pytest

import heatsight

ROOT = Path(__file__).resolve().parents[1]
BROWSER = next((shutil.which(b) for b in ("chromium", "chromium-browser", "google-chrome") if shutil.which(b)), None)
#: flags for a headless, offline, sandbox-free run in a fresh profile
FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--virtual-time-budget=10000", "--window-size=1100,1400")

PROBE = """<script>
window.addEventListener('load', function () {
  var imgs = Array.prototype.slice.call(document.images);
  var broken = imgs.filter(function (i) { return !(i.complete && i.naturalWidth > 0 && i.naturalHeight > 0); })
                   .map(function (i) { return i.alt; });
  var h1 = document.querySelector('h1');
  var walk = document.createTreeWalker(document.body, NodeFilter.SHOW_TEXT);
  var seen = false, first = null;
  while (walk.nextNode()) {
    var n = walk.currentNode;
    if (!n.textContent.trim()) continue;
    if (h1.contains(n)) { seen = true; continue; }
    if (seen) { first = n; break; }
  }
  var el = first ? first.parentElement : null;
  var fig = document.querySelector('figure');
  var out = document.createElement('pre');
  out.id = 'probe';
  out.textContent = 'PROBE' + JSON.stringify({
    images: imgs.length, broken: broken,
    first: first ? first.textContent.trim().slice(0, 300) : null,
    first_in_verdict: !!(el && el.closest('#verdict')),
    first_height: el ? el.getBoundingClientRect().height : 0,
    verdict_top: document.querySelector('#verdict').getBoundingClientRect().top,
    figure_top: fig ? fig.getBoundingClientRect().top : null,
    widths: imgs.map(function (i) { return i.naturalWidth; })
  }) + 'PROBE';
  document.body.appendChild(out);
});
</script>"""


@pytest.fixture(scope="module")
def rendered(tmp_path_factory):
    if BROWSER is None:
        pytest.skip("no Chromium installed (Debian package 'chromium'): the report was not rendered in a browser")
    folder = tmp_path_factory.mktemp("browser")
    out = heatsight.fit(ROOT / "demo_data" / "platen.toml").write_report(folder / "demo")
    html = (out / "report.html").read_text(encoding="utf-8")
    page = folder / "probe.html"
    page.write_text(html.replace("</body>", PROBE + "</body>"), encoding="utf-8")
    with tempfile.TemporaryDirectory() as profile:
        proc = subprocess.run([BROWSER, *FLAGS, f"--user-data-dir={profile}", "--dump-dom", page.as_uri()],
                              capture_output=True, text=True, timeout=120,
                              env={**os.environ, "HOME": profile})
    found = re.search(r"PROBE(\{.*?\})PROBE", proc.stdout, flags=re.S)
    assert found, f"the browser gave no probe result (exit {proc.returncode}): {proc.stderr[-500:]}"
    return html, json.loads(found.group(1))


def test_verdict_is_first_after_the_title(rendered):
    _, probe = rendered
    assert probe["first_in_verdict"], probe["first"]
    assert probe["first"].startswith("The weakest zone is outer 60-180")   # demo truth (scikit-fem): truth.json
    assert probe["first_height"] > 0                                         # shown, not hidden
    assert probe["figure_top"] is not None and probe["verdict_top"] < probe["figure_top"]


def test_every_image_loads(rendered):
    html, probe = rendered
    assert probe["images"] == html.count("<img ") == 5
    assert probe["broken"] == []
    assert min(probe["widths"]) > 300
