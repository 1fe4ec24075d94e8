"""Make docs/report.png: the demo report as headless Chromium shows it (1400 x 2000 window).

Run from the repository root: ``.venv/bin/python docs/make_screenshot.py`` (needs Debian's
``chromium``).
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))

from browser import screenshot  # noqa: E402

from pipeline.workflow import learn  # noqa: E402


def main() -> None:
    import os

    os.chdir(ROOT)  # the report's provenance then names the inputs as a user types them
    demo = Path("data") / "demo"
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "orienteer-demo"
        learn([demo / "measurements.csv"], demo / "regimes.csv", out=out)
        png = screenshot(out / "report.html", ROOT / "docs" / "report.png", 1400, 2000)
    print(f"wrote {png}")


if __name__ == "__main__":
    main()
