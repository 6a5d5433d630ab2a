"""Render a page in headless Chromium and read back how its images were laid out."""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")

# A probe appended to a copy of the page writes each image's decoded and laid-out size
# into the DOM once the page has loaded; the pages themselves have no script.
_PROBE = (
    "<script>window.addEventListener('load', () => { document.body.setAttribute("
    "'data-sizes', [...document.images].map(i => i.naturalWidth + 'x' + "
    "i.naturalHeight + ':' + Math.round(i.getBoundingClientRect().width)).join(' ')); "
    "});</script>"
)


def image_layout(page: str, tmp_path: Path) -> tuple[list[tuple[int, int, int]], list[str]]:
    """(natural width, natural height, laid-out width) of every image of ``page``, and
    the lines Chromium logged to its console."""
    assert CHROMIUM is not None
    probed = tmp_path / "probed.html"
    probed.write_text(page.replace("</body>", _PROBE + "</body>"), encoding="utf-8")
    result = subprocess.run(
        [
            CHROMIUM,
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            f"--user-data-dir={tmp_path / 'profile'}",
            "--enable-logging=stderr",
            "--v=0",
            "--virtual-time-budget=5000",
            "--window-size=1200,3000",
            "--dump-dom",
            probed.as_uri(),
        ],
        capture_output=True,
        text=True,
        timeout=120,
        check=False,
    )
    assert result.returncode == 0, result.stderr[-2000:]
    console = [line for line in result.stderr.splitlines() if ":CONSOLE" in line]
    m = re.search(r'data-sizes="([^"]*)"', result.stdout)
    assert m, "the page did not finish loading"
    sizes = []
    for item in m.group(1).split():
        natural, shown = item.split(":")
        w, h = (int(v) for v in natural.split("x"))
        sizes.append((w, h, int(shown)))
    return sizes, console
