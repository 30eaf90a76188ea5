"""A PDF of the report, printed by a headless Chromium when one is installed (optional)."""

from __future__ import annotations

import logging
import shutil
import subprocess
import tempfile
from pathlib import Path

from rfmeas.errors import InputError

log = logging.getLogger(__name__)

BROWSERS = ("chromium", "chromium-browser")
HEADLESS_FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                  "--disable-background-networking", "--disable-component-update", "--disable-sync")


def find_browser() -> str | None:
    """Path of a Chromium executable on PATH, or None."""
    for name in BROWSERS:
        found = shutil.which(name)
        if found:
            return found
    return None


def print_pdf(html_path, pdf_path, browser: str | None = None, timeout_s: float = 90.0) -> Path:
    """Print `html_path` to `pdf_path` with headless Chromium; InputError if that is not possible."""
    browser = browser or find_browser()
    if browser is None:
        raise InputError("no PDF renderer: install chromium to print the report to PDF", path=pdf_path)
    html_path, pdf_path = Path(html_path).resolve(), Path(pdf_path).resolve()
    with tempfile.TemporaryDirectory(prefix="rfmeas-pdf-") as profile:
        partial = pdf_path.with_name(f".{pdf_path.name}.partial")
        command = [browser, *HEADLESS_FLAGS, f"--user-data-dir={profile}", "--no-pdf-header-footer",
                   f"--print-to-pdf={partial}", html_path.as_uri()]
        try:
            done = subprocess.run(command, capture_output=True, text=True, timeout=timeout_s)
        except (OSError, subprocess.TimeoutExpired) as exc:
            partial.unlink(missing_ok=True)
            raise InputError(f"printing the report to PDF failed: {exc}", path=pdf_path) from exc
        if done.returncode != 0 or not partial.exists() or partial.stat().st_size == 0:
            partial.unlink(missing_ok=True)
            tail = (done.stderr or "").strip().splitlines()[-1:] or ["no output"]
            raise InputError(f"printing the report to PDF failed (exit {done.returncode}: {tail[0]})",
                             path=pdf_path)
        partial.replace(pdf_path)
    log.info("printed %s to %s", html_path, pdf_path)
    return pdf_path
