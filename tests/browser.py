"""Headless Chromium for the report tests: the DOM after the page ran, console errors, PNGs.

Debian's ``chromium`` package (``.ci/run`` installs it when absent); nothing is downloaded.
"""

from __future__ import annotations

import shutil
import subprocess
import tempfile
from pathlib import Path

__all__ = ["chromium", "dump_dom", "screenshot"]

_FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
          "--disable-component-update", "--disable-sync", "--no-first-run",
          "--disable-default-apps", "--mute-audio")


def chromium() -> str | None:
    """The path of the chromium binary, or None."""
    return shutil.which("chromium") or ("/usr/bin/chromium"
                                        if Path("/usr/bin/chromium").is_file() else None)


def _run(page: Path, *extra: str, timeout: float = 120) -> subprocess.CompletedProcess:
    binary = chromium()
    if binary is None:
        raise FileNotFoundError("chromium is not installed")
    with tempfile.TemporaryDirectory(prefix="orienteer-chromium-") as profile:
        return subprocess.run([binary, *_FLAGS, f"--user-data-dir={profile}", *extra,
                               Path(page).resolve().as_uri()],
                              capture_output=True, text=True, timeout=timeout, check=False)


def dump_dom(page: Path, *extra: str) -> tuple[str, list[str]]:
    """The serialized DOM of `page` after its scripts ran, and the console messages that
    report an error (uncaught exceptions, failed loads)."""
    done = _run(page, "--enable-logging=stderr", "--v=0", "--virtual-time-budget=5000",
                "--dump-dom", *extra)
    if done.returncode != 0 or "<html" not in done.stdout:
        raise RuntimeError(f"chromium failed ({done.returncode}): {done.stderr[-2000:]}")
    errors = [line for line in done.stderr.splitlines()
              if ":CONSOLE" in line and ("Uncaught" in line or "Error" in line
                                         or "Failed" in line)]
    return done.stdout, errors


def screenshot(page: Path, png: Path, width: int = 1400, height: int = 2000) -> Path:
    """A PNG of `page` as a window of `width` x `height` CSS pixels shows it."""
    done = _run(page, f"--screenshot={Path(png).resolve()}",
                f"--window-size={width},{height}", "--hide-scrollbars")
    if done.returncode != 0 or not Path(png).is_file():
        raise RuntimeError(f"chromium failed ({done.returncode}): {done.stderr[-2000:]}")
    return Path(png)
