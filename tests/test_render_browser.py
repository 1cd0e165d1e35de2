"""A calc page in headless Chromium: the MathML equations are laid out and drawn.

A copy of the page gets a small probe script that records the box of every
`<math>` element; Chromium's --dump-dom returns the page after the script ran.
A screenshot then shows ink inside the box of the first display equation.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess
from pathlib import Path

import pytest

from calcsheaf.render import site
from calcsheaf.render.html import site_static
from test_render_fixtures import THEME_ONLY_ROOT, project, standard_page

CHROMIUM = shutil.which("chromium")
pytestmark = pytest.mark.skipif(CHROMIUM is None, reason="chromium is not installed")
WIDTH, HEIGHT = 1000, 5000

PROBE = """<script>
addEventListener("load", () => {
  const boxes = [...document.querySelectorAll("math")].map(m => {
    const r = m.getBoundingClientRect();
    const frac = m.querySelector("mfrac");
    const fracHeight = frac ? frac.getBoundingClientRect().height : 0;
    return {display: m.getAttribute("display"), x: r.x, y: r.y, w: r.width, h: r.height,
            frac: fracHeight};
  });
  const lineHeight = parseFloat(getComputedStyle(document.body).fontSize);
  const out = document.createElement("pre");
  out.id = "probe";
  out.textContent = JSON.stringify({boxes, lineHeight});
  document.body.appendChild(out);
});
</script>"""


def _chromium(tmp_path: Path, *args: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
         "--no-first-run", "--disable-background-networking", "--disable-component-update",
         "--disable-sync", "--hide-scrollbars", f"--user-data-dir={tmp_path / 'profile'}",
         f"--window-size={WIDTH},{HEIGHT}", *args],
        capture_output=True, timeout=120, check=True)


@pytest.fixture(scope="module")
def site_dir(tmp_path_factory):
    out = tmp_path_factory.mktemp("site")
    page = standard_page()
    for path, data in {**page.assets, **site_static(project(THEME_ONLY_ROOT))}.items():
        (out / path).parent.mkdir(parents=True, exist_ok=True)
        (out / path).write_bytes(data)
    probed = page.html.replace("</body>", PROBE + "</body>")
    (out / site.calc_page_path(page.number)).write_text(probed, encoding="utf-8")
    return out, out / site.calc_page_path(page.number)


@pytest.fixture(scope="module")
def boxes(site_dir, tmp_path_factory):
    _, page = site_dir
    dom = _chromium(tmp_path_factory.mktemp("chromium"), "--dump-dom", page.as_uri())
    match = re.search(r'<pre id="probe">(.*?)</pre>', dom.stdout.decode(), re.S)
    assert match, "probe script did not run"
    return json.loads(match[1].replace("&quot;", '"'))


def test_every_equation_has_layout(boxes):
    assert len(boxes["boxes"]) >= 10
    for box in boxes["boxes"]:
        assert box["w"] > 5 and box["h"] > 5, box


def test_fractions_are_stacked_not_inline_text(boxes):
    # With MathML layout an <mfrac> is about two lines tall; as plain inline text it
    # would be one line at most.
    fractions = [b["frac"] for b in boxes["boxes"] if b["frac"]]
    assert fractions and max(fractions) > 1.5 * boxes["lineHeight"]


def test_screenshot_shows_ink_in_the_equation_region(site_dir, boxes, tmp_path):
    from PIL import Image
    _, page = site_dir
    shot = tmp_path / "page.png"
    _chromium(tmp_path, f"--screenshot={shot}", page.as_uri())
    image = Image.open(shot).convert("L")
    first = next(b for b in boxes["boxes"] if b["display"] == "block" and b["y"] + b["h"] < HEIGHT)
    region = image.crop((int(first["x"]), int(first["y"]),
                         int(first["x"] + first["w"]), int(first["y"] + first["h"])))
    dark = sum(1 for value in region.getdata() if value < 128)
    assert dark > 0.01 * region.width * region.height
