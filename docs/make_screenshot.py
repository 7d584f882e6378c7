"""Render the demo's HTML report to a PNG with headless Chromium (docs only, not a test).

Run: .venv/bin/python docs/make_screenshot.py   (needs Debian's chromium: apt-get install chromium)
Writes docs/report.html and docs/report.png (the summary and the charts at the top of the page).
"""

from __future__ import annotations

import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent


def main() -> None:
    browser = shutil.which("chromium") or shutil.which("chromium-browser")
    if browser is None:
        sys.exit("chromium not found (apt-get install chromium)")
    html = HERE / "report.html"
    subprocess.run(
        [
            sys.executable,
            "-m",
            "advisor",
            "demo",
            "--keys",
            "50000",
            "--lookups",
            "300000",
            "--html",
            str(html),
            "--force",
        ],
        check=True,
        stdout=subprocess.DEVNULL,
    )
    with tempfile.TemporaryDirectory() as profile:
        subprocess.run(
            [
                browser,
                "--headless",
                "--no-sandbox",
                "--disable-gpu",
                "--disable-quic",
                "--no-first-run",
                "--disable-background-networking",
                "--disable-component-update",
                "--disable-sync",
                f"--user-data-dir={profile}",
                "--hide-scrollbars",
                "--window-size=1240,1900",
                f"--screenshot={HERE / 'report.png'}",
                html.as_uri(),
            ],
            check=True,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
        )
    print(f"wrote {HERE / 'report.png'}")


if __name__ == "__main__":
    main()
