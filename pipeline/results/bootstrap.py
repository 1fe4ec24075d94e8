"""The bootstrap frequencies of a learn run: numbers, ``bootstrap.csv``, report section.

`BootstrapResult` holds, for every pair of variables adjacent in at least one resample or
in the result, how many of the B resamples had it adjacent, directed each way, or
undirected (`pipeline.analyses.bootstrap` computes it). It gives each edge of the result
its ``bootstrap_adjacency`` and ``bootstrap_orientation`` (`frequencies`), writes
``bootstrap.csv`` (`to_csv`; `read` reads it back) and renders its report section
(`html_section`).
"""

from __future__ import annotations

import html
import io
from collections.abc import Sequence
from dataclasses import field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from pipeline.errors import InputError
from pipeline.records import record

__all__ = ["BootstrapResult", "COLUMNS"]

#: Columns of ``bootstrap.csv``.
COLUMNS = ("x", "y", "result", "resamples", "seed", "adjacency", "x_to_y", "y_to_x",
           "undirected")
#: Pairs listed in the report section under each heading, at most.
MAX_LISTED = 50


def _edge_text(source: str, target: str, orientation: str) -> str:
    return f"{source} {'->' if orientation == 'directed' else '--'} {target}"


@record
class BootstrapResult:
    """Adjacency and orientation frequencies over B bootstrap resamples.

    Attributes
    ----------
    resamples : int
        B.
    seed : int
        The seed of the draws (the same seed gives the same frequencies).
    pairs : DataFrame
        One row per pair adjacent in a resample or in the result, ``x`` before ``y`` in
        variable order: ``result`` (the pair's edge in the result, e.g. ``"A -> B"``, or
        empty), then the shares of resamples in which the pair was adjacent
        (``adjacency``), directed ``x -> y``, directed ``y -> x``, undirected.
    cpu_seconds : float or None
        CPU time the relearning took, over all processes (not kept in the file).
    """

    resamples: int
    seed: int
    pairs: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=list(COLUMNS)))
    cpu_seconds: float | None = None

    @classmethod
    def from_counts(cls, variables: Sequence[str], counts: np.ndarray, *, resamples: int,
                    seed: int, edges: Sequence[Any] = ()) -> BootstrapResult:
        """From counts (4, p, p) over ``i < j``: adjacent, i -> j, j -> i, undirected."""
        variables = list(variables)
        pos = {v: i for i, v in enumerate(variables)}
        in_result: dict[tuple[int, int], str] = {}
        for e in edges:
            i, j = sorted((pos[e.source], pos[e.target]))
            in_result[(i, j)] = _edge_text(e.source, e.target, e.orientation)
        ii, jj = np.nonzero(counts[0])
        keys = sorted(set(zip(ii.tolist(), jj.tolist(), strict=True)) | set(in_result))
        rows = [{"x": variables[i], "y": variables[j], "result": in_result.get((i, j), ""),
                 "resamples": resamples, "seed": seed,
                 "adjacency": counts[0, i, j] / resamples, "x_to_y": counts[1, i, j] / resamples,
                 "y_to_x": counts[2, i, j] / resamples,
                 "undirected": counts[3, i, j] / resamples} for i, j in keys]
        return cls(resamples, seed, pd.DataFrame(rows, columns=list(COLUMNS)))

    # -- numbers ------------------------------------------------------------------------------
    def frequencies(self, source: str, target: str, orientation: str
                    ) -> tuple[float, float]:
        """``(bootstrap_adjacency, bootstrap_orientation)`` of an edge of the result.

        For ``source -> target``: the share directed that way; for an undirected edge,
        the share present and undirected. A pair no resample had gives ``(0.0, 0.0)``.
        """
        row = self._row(source, target)
        if row is None:
            return 0.0, 0.0
        if orientation != "directed":
            return float(row["adjacency"]), float(row["undirected"])
        forward = row["x"] == source
        return float(row["adjacency"]), float(row["x_to_y"] if forward else row["y_to_x"])

    def _row(self, a: str, b: str) -> pd.Series | None:
        index = self._index()
        k = index.get((a, b), index.get((b, a)))
        return None if k is None else self.pairs.iloc[k]

    def _index(self) -> dict[tuple[str, str], int]:
        cached = getattr(self, "_cache", None)
        if cached is None or cached[0] is not self.pairs:
            cached = (self.pairs, {(x, y): k for k, (x, y) in
                                   enumerate(zip(self.pairs["x"], self.pairs["y"],
                                                 strict=True))})
            self._cache = cached
        return cached[1]

    def to_frame(self) -> pd.DataFrame:
        """The pair table (a copy)."""
        return self.pairs.copy()

    def to_dict(self) -> dict[str, Any]:
        return {"resamples": self.resamples, "seed": self.seed,
                "pairs": self.pairs.to_dict(orient="records")}

    # -- files ----------------------------------------------------------------------------------
    def to_csv(self) -> str:
        """``bootstrap.csv`` text (frequencies in their shortest exact form)."""
        return self.pairs.to_csv(index=False, lineterminator="\n")

    @classmethod
    def read(cls, path: str | Path) -> BootstrapResult:
        """Read ``bootstrap.csv``.

        Raises
        ------
        InputError
            If the file is missing or lacks a column.
        """
        path = Path(path)
        if not path.is_file():
            raise InputError(f"{path}: no such file")
        frame = pd.read_csv(path, dtype={"x": str, "y": str, "result": str},
                            keep_default_na=False)
        missing = [c for c in COLUMNS if c not in frame.columns]
        if missing:
            raise InputError(f"{path}: not a bootstrap table (missing column(s) "
                             f"{', '.join(missing)})")
        b = int(frame["resamples"].iloc[0]) if len(frame) else 0
        seed = int(frame["seed"].iloc[0]) if len(frame) else 0
        return cls(b, seed, frame[list(COLUMNS)])

    # -- text -----------------------------------------------------------------------------------
    def unstable(self, threshold: float = 0.5) -> tuple[pd.DataFrame, pd.DataFrame]:
        """Edges of the result found in fewer than `threshold` of the resamples, and pairs
        not in the result found adjacent in at least `threshold` of them."""
        p = self.pairs
        weak = p[(p["result"] != "") & (p["adjacency"] < threshold)]
        strong = p[(p["result"] == "") & (p["adjacency"] >= threshold)]
        return (weak.sort_values("adjacency", kind="stable"),
                strong.sort_values("adjacency", ascending=False, kind="stable"))

    def summary(self) -> str:
        weak, strong = self.unstable()
        lines = [f"bootstrap: {self.resamples} resamples of the rows within each regime "
                 f"(seed {self.seed})",
                 f"edges of the result adjacent in fewer than half the resamples: {len(weak)}",
                 f"pairs not in the result adjacent in at least half of them: {len(strong)}"]
        return "\n".join(lines)

    def print(self, console: Any) -> None:
        from pipeline.terminal import escape

        console.print(escape(self.summary()))

    def html_section(self) -> str:
        """The report section: what was resampled, and the pairs whose evidence is weak."""
        e = lambda v: html.escape(str(v), quote=True)  # noqa: E731
        weak, strong = self.unstable()
        out = io.StringIO()
        out.write(f"<p>{self.resamples} bootstrap resamples of the rows within each regime "
                  f"(seed {e(self.seed)}), each relearned with the settings of this run. The "
                  "edge table gives every edge the share of resamples in which the pair was "
                  "adjacent and the share in which it had the same orientation (for an "
                  "undirected edge: present and undirected). All pairs are in "
                  "bootstrap.csv.</p>")
        for title, frame in (("Edges of the result adjacent in fewer than half the "
                              "resamples", weak),
                             ("Pairs not in the result adjacent in at least half the "
                              "resamples", strong)):
            out.write(f"<p>{e(title)}: {len(frame)}</p>")
            if len(frame):
                rows = "".join(
                    f"<tr><td class=\"edge\">{e(r.x)} &ndash; {e(r.y)}</td>"
                    f"<td>{e(r.result) or '&ndash;'}</td>"
                    f"<td class=\"num\">{r.adjacency:.2f}</td>"
                    f"<td class=\"num\">{r.x_to_y:.2f}</td><td class=\"num\">{r.y_to_x:.2f}"
                    f"</td><td class=\"num\">{r.undirected:.2f}</td></tr>"
                    for r in frame.head(MAX_LISTED).itertuples(index=False))
                out.write("<div class=\"scroll\"><table><thead><tr><th>pair (x &ndash; y)</th>"
                          "<th>in the result</th><th>adjacent</th><th>x &rarr; y</th>"
                          "<th>y &rarr; x</th><th>undirected</th></tr></thead><tbody>"
                          f"{rows}</tbody></table></div>")
                if len(frame) > MAX_LISTED:
                    out.write(f"<p class=\"small\">first {MAX_LISTED} of {len(frame)}; all in "
                              "bootstrap.csv</p>")
        return out.getvalue()
