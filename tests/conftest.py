"""Shared test helpers.

``chromium`` fixture: renders a local HTML file with headless Chromium (Debian package
``chromium``, installed by ``.ci/run``) to a PNG or dumps its DOM after the page's scripts ran.
"""

from __future__ import annotations

import subprocess
from pathlib import Path

import pytest

CHROMIUM = Path("/usr/bin/chromium")

_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
          "--disable-background-networking", "--disable-component-update", "--disable-sync",
          "--hide-scrollbars", "--virtual-time-budget=5000"]


class Chromium:
    """Headless Chromium driven through its command line (one process per call)."""

    def __init__(self, tmp: Path):
        self.tmp = tmp
        self._n = 0

    def _run(self, args: list[str], timeout: float = 90.0) -> subprocess.CompletedProcess:
        self._n += 1
        profile = self.tmp / f"chromium-profile-{self._n}"
        cmd = [str(CHROMIUM), *_FLAGS, f"--user-data-dir={profile}", *args]
        return subprocess.run(cmd, capture_output=True, timeout=timeout, check=False)

    def screenshot(self, html: Path, png: Path, size: tuple[int, int] = (1200, 900),
                   fragment: str = "") -> Path:
        """Render *html* (optionally with ``#fragment``) to *png* at the window *size*."""
        url = Path(html).resolve().as_uri() + (f"#{fragment}" if fragment else "")
        res = self._run([f"--window-size={size[0]},{size[1]}", f"--screenshot={png}", url])
        if not Path(png).exists():
            raise AssertionError(f"chromium wrote no screenshot (exit {res.returncode}): "
                                 f"{res.stderr.decode(errors='replace')[-2000:]}")
        return Path(png)

    def dump_dom(self, html: Path, fragment: str = "", size: tuple[int, int] = (1200, 900)) -> str:
        """Return the page's DOM as HTML after its scripts ran."""
        url = Path(html).resolve().as_uri() + (f"#{fragment}" if fragment else "")
        res = self._run([f"--window-size={size[0]},{size[1]}", "--dump-dom", url])
        if res.returncode != 0:
            raise AssertionError(f"chromium --dump-dom failed (exit {res.returncode}): "
                                 f"{res.stderr.decode(errors='replace')[-2000:]}")
        return res.stdout.decode("utf-8", errors="replace")


@pytest.fixture
def chromium(tmp_path: Path) -> Chromium:
    """Headless Chromium, or skip when ``/usr/bin/chromium`` is not installed."""
    if not CHROMIUM.exists():
        pytest.skip("headless Chromium not installed at /usr/bin/chromium (Debian package 'chromium'; "
                    ".ci/run installs it)")
    return Chromium(tmp_path)
