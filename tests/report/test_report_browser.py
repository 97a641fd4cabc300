"""The report as a browser shows it: headless Chromium (the Debian package; `.ci/run` installs it).

Checks: every figure renders (natural width > 0) and no request leaves the page. A copy of the report
gets a Content-Security-Policy that allows only what is inside the file (``data:`` images, inline
styles), so any attempt to load something from elsewhere is reported by the browser as a violation;
a small script writes the images' widths and the violations into the page, read back with
``--dump-dom``.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess

import pytest

BROWSER = shutil.which("chromium") or shutil.which("chromium-browser")

PROBE = """<meta http-equiv="Content-Security-Policy"
 content="default-src 'none'; img-src data:; style-src 'unsafe-inline'; script-src 'unsafe-inline'">
<script>
var blocked = [];
document.addEventListener('securitypolicyviolation', function (e) { blocked.push(e.blockedURI); });
window.addEventListener('load', function () {
  var widths = Array.prototype.map.call(document.images, function (i) { return i.naturalWidth; });
  var out = document.createElement('pre');
  out.id = 'probe';
  out.textContent = JSON.stringify({widths: widths, blocked: blocked});
  document.body.appendChild(out);
});
</script>
"""


@pytest.mark.skipif(BROWSER is None, reason="chromium is not installed (.ci/run installs it)")
def test_report_renders_every_figure_offline(demo_run, tmp_path):
    page = demo_run.report.read_text(encoding="utf-8")
    n_images = len(re.findall(r"<img\b", page))
    assert n_images >= 10
    probe = tmp_path / "probe.html"
    probe.write_text(page.replace("<head>", "<head>" + PROBE, 1), encoding="utf-8")
    cmd = [BROWSER, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
           "--disable-background-networking", "--disable-component-update", "--disable-sync",
           f"--user-data-dir={tmp_path / 'profile'}", "--virtual-time-budget=10000", "--dump-dom",
           probe.as_uri()]
    dom = subprocess.run(cmd, capture_output=True, text=True, timeout=120).stdout
    found = re.search(r'<pre id="probe">(.*?)</pre>', dom, re.S)
    assert found, dom[-2000:]
    result = json.loads(found.group(1).replace("&quot;", '"'))
    assert len(result["widths"]) == n_images and min(result["widths"]) > 0
    assert result["blocked"] == []
