"""The files of a run folder: writing a learn result, archiving the previous run, the report.

``learn --out DIR`` writes `RESULT_FILES` into DIR. Before writing, the result files of an
earlier run in DIR are moved into ``DIR/history/<time of that run>/``: nothing is
overwritten or deleted, and each file is written atomically (`pipeline.fileio`).
``tests.sqlite`` stays. Commands that add to a run (``sweep``, ``plan``, ``validate``)
write their own files beside it and render ``report.html`` again from the folder
(`refresh_report`), so the report always shows everything the folder holds.
"""

from __future__ import annotations

import os
import time
from pathlib import Path
from typing import TYPE_CHECKING

from pipeline.errors import InputError
from pipeline.fileio import atomic_write, json_text, read_json, write_text
from pipeline.results.check import CheckResult
from pipeline.results.drawing import MAX_DRAWN
from pipeline.results.report import render_report
from pipeline.results.schema import ResultRecord
from pipeline.results.tables import edges_csv, removed_csv

if TYPE_CHECKING:  # pragma: no cover
    from pipeline.results.learn import LearnResult

__all__ = ["RESULT_FILES", "RUN_FILES", "BOOTSTRAP_FILE", "PICTURE_FILE", "archive_previous",
           "save_learn", "report_sections", "refresh_report"]

#: The files `save_learn` writes (bootstrap.csv with ``--bootstrap``, see `BOOTSTRAP_FILE`;
#: graph.png on request, see `PICTURE_FILE`).
RESULT_FILES = ("result.json", "edges.csv", "removed.csv", "graph.graphml", "check.json",
                "response.csv", "report.html")
#: The picture of the graph for slides (``learn --picture``; matplotlib, up to `MAX_DRAWN`
#: variables). Drawing it costs about as much as a rerun from the store, so it is asked for.
PICTURE_FILE = "graph.png"
#: The pair table of the bootstrap, written by `save_learn` when resamples were run.
BOOTSTRAP_FILE = "bootstrap.csv"
_BOOTSTRAP_TITLE = "Bootstrap: edge stability under resampling"
#: Files of an earlier run that go to history/ with them (other commands add them to DIR).
RUN_FILES = RESULT_FILES + (PICTURE_FILE, BOOTSTRAP_FILE, "sweep.csv", "sweep.json",
                            "validation.csv", "validation.json", "plan.json")


def save_learn(result: LearnResult, folder: str | Path, picture: bool = False
               ) -> dict[str, Path]:
    """Write the files of a learn result into `folder`; earlier ones go to ``history/``.

    With `picture`, also ``graph.png`` (up to `MAX_DRAWN` variables). Returns the paths
    written, by file name.
    """
    folder = Path(folder)
    # 1. render everything first: a failure here leaves the folder untouched
    record = result.record()
    texts = {"result.json": record.to_json(),
             "edges.csv": edges_csv(result.edge_records),
             "removed.csv": removed_csv(result.learned),
             "graph.graphml": result.graphml()}
    if result.check is not None:
        texts["check.json"] = json_text(result.check.to_dict())
        texts["response.csv"] = result.check.response_csv()
    sections = []
    if result.bootstrap is not None:
        texts[BOOTSTRAP_FILE] = result.bootstrap.to_csv()
        sections.append((_BOOTSTRAP_TITLE, result.bootstrap.html_section()))
    png = None
    if picture and len(record.nodes) <= MAX_DRAWN:
        from pipeline.results.picture import graph_png

        png = graph_png(record.nodes, record.edges)
    texts["report.html"] = render_report(record, result.check, sections,
                                         picture=png is not None)
    # 2. move the files of the earlier run aside, 3. write each file atomically
    archive_previous(folder)
    written = {name: write_text(folder / name, text) for name, text in texts.items()}
    if png is not None:
        written[PICTURE_FILE] = atomic_write(folder / PICTURE_FILE,
                                             lambda fh: fh.write(png), binary=True)
    return written


def archive_previous(folder: str | Path, names: tuple[str, ...] = RUN_FILES) -> Path | None:
    """Move result files of an earlier run into ``folder/history/<time>/``; return that folder.

    The time is that of the earlier ``result.json`` (its modification time), so each
    history entry is named after the run that made it. Returns None if nothing was moved.
    """
    folder = Path(folder)
    present = [folder / n for n in names if (folder / n).is_file()]
    if not present:
        return None
    anchor = folder / "result.json"
    stamp = (anchor if anchor.is_file() else present[0]).stat().st_mtime
    base = folder / "history" / time.strftime("%Y-%m-%dT%H-%M-%S", time.localtime(stamp))
    target, n = base, 1
    while target.exists():
        n += 1
        target = base.with_name(f"{base.name}-{n}")
    target.mkdir(parents=True)
    for path in present:
        os.replace(path, target / path.name)
    return target


def report_sections(folder: str | Path) -> list[tuple[str, str]]:
    """The report sections that later commands left in `folder`, as ``(title, html)``."""
    folder = Path(folder)
    sections: list[tuple[str, str]] = []
    for name, title, module, cls in _SECTIONS:
        path = folder / name
        if path.is_file():
            import importlib

            result_type = getattr(importlib.import_module(module), cls)
            sections.append((title, result_type.read(path).html_section()))
    return sections


#: File, section title, module and type that reads it (``.read(path).html_section()``).
_SECTIONS: tuple[tuple[str, str, str, str], ...] = (
    (BOOTSTRAP_FILE, _BOOTSTRAP_TITLE, "pipeline.results.bootstrap", "BootstrapResult"),
    ("sweep.json", "Stability across significance levels", "pipeline.results.sweep",
     "SweepResult"),
    ("validation.json", "Held-out validation", "pipeline.results.validate", "ValidationResult"),
    ("plan.json", "Which experiment next", "pipeline.results.plan", "PlanResult"),
)


def refresh_report(folder: str | Path) -> Path:
    """Render ``folder/report.html`` again from the folder's files (atomically).

    Raises
    ------
    InputError
        If the folder holds no ``result.json`` of a learn run.
    """
    folder = Path(folder)
    path = folder / "result.json"
    if not path.is_file():
        raise InputError(f"{folder}: no result.json; run `orienteer learn ... --out {folder}` "
                         "first")
    record = ResultRecord.read(path)
    check = None
    if (folder / "check.json").is_file():
        check = CheckResult.from_dict(read_json(folder / "check.json"),
                                      where=str(folder / "check.json"))
    html = render_report(record, check, report_sections(folder),
                         picture=(folder / PICTURE_FILE).is_file())
    return write_text(folder / "report.html", html)
