"""Progress bars: none for short work, every label once the work lasts.

(The bars themselves are drawn by rich; these checks read rich's task records.)
"""

from __future__ import annotations

import io

import pipeline.progress as progress
from pipeline.progress import Progress


def test_short_work_draws_nothing(monkeypatch):
    monkeypatch.setattr(progress, "DELAY", 60.0)
    stream = io.StringIO()
    with Progress(enabled=True, stream=stream) as bars:
        for done in range(5):
            bars("skeleton, level 0", done, 5)
        assert bars._bars is None
    assert stream.getvalue() == ""


def test_lasting_work_shows_every_label_reported_so_far(monkeypatch):
    monkeypatch.setattr(progress, "DELAY", 1.0)
    monkeypatch.setattr(progress, "_clock", iter([0.0, 0.5, 10.0]).__next__)
    with Progress(enabled=True, stream=io.StringIO()) as bars:
        bars("level 0", 3, 10)  # before the delay: kept
        bars("level 1", 1, 4)  # after it: the bars start, with level 0 as it was
        tasks = {t.description: (t.completed, t.total) for t in bars._bars.tasks}
    assert tasks == {"level 0": (3, 10), "level 1": (1, 4)}


def test_disabled_bars_draw_nothing_whatever_the_time(monkeypatch):
    monkeypatch.setattr(progress, "DELAY", 0.0)
    with Progress(enabled=False, stream=io.StringIO()) as bars:
        bars("level 0", 1, 2)
        assert bars._bars is None
