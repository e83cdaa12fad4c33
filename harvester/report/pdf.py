"""Print the design note's HTML to PDF with a headless Chromium, where one is installed.

No Python dependency: the browser lays the page out exactly as it does on screen and applies the
note's print stylesheet (page size, headers kept with their rows).  Without a browser the HTML
prints the same from any browser's print dialogue.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import tempfile
from pathlib import Path

BROWSERS = ("chromium", "chromium-browser", "google-chrome", "google-chrome-stable")
PRINT_TIMEOUT_S = 120.0  # a large note prints in a few seconds; a hung browser is killed
# a closed network: no background fetches, no first-run pages, no sync
QUIET_FLAGS = ("--headless", "--disable-gpu", "--no-first-run", "--disable-background-networking",
               "--disable-component-update", "--disable-sync", "--disable-quic",
               "--no-pdf-header-footer")
NO_BROWSER = ("no headless Chromium found (looked for " + ", ".join(BROWSERS) + "): open "
              "note.html in a browser and print it to PDF; it carries its own print layout")


def find_browser() -> str | None:
    """The first Chromium-family browser on PATH, or None."""
    return next((found for name in BROWSERS if (found := shutil.which(name))), None)


def print_pdf(html: Path, pdf: Path) -> str | None:
    """Print `html` to `pdf`; return None when done, or a one-line reason when it cannot be."""
    browser = find_browser()
    if browser is None:
        return NO_BROWSER
    with tempfile.TemporaryDirectory(prefix="harvester-print-") as profile:
        command = [browser, *QUIET_FLAGS, f"--user-data-dir={profile}",
                   f"--print-to-pdf={pdf}", html.absolute().as_uri()]
        if hasattr(os, "geteuid") and os.geteuid() == 0:
            command.insert(1, "--no-sandbox")  # Chromium refuses to run as root with it
        try:
            done = subprocess.run(command, capture_output=True, text=True,
                                  timeout=PRINT_TIMEOUT_S)
        except subprocess.TimeoutExpired:
            return f"{browser} did not finish printing within {PRINT_TIMEOUT_S:g} s"
    if done.returncode != 0 or not pdf.is_file():
        last = (done.stderr.strip().splitlines() or ["no message"])[-1]
        return f"{browser} could not print the note ({last})"
    return None
