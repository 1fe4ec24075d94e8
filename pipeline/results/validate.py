"""The result of ``validate``: how well the learned graph predicts held-out experiments.

`ValidationResult` carries, per held-out regime, the observed movers (with the effect
sizes and p-values behind them) and the scores of the learned graph and of the two
baselines, and the precision, recall and ROC AUC per regime and pooled ("overall").
It prints them (`print`, `summary`), converts to ``validation.csv`` (`to_frame`: one
row per held-out regime and method, plus the overall rows) and ``validation.json``
(`to_dict`, format ``orienteer.validation/1``), reads itself back (`read`) and renders
its section of the report (`html_section`). The computation is
`pipeline.analyses.validate`.
"""

from __future__ import annotations

import html
import json
import math
from dataclasses import asdict, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from pipeline.errors import InputError
from pipeline.records import record
from pipeline.results.formatting import finite_or_none, format_count
from pipeline.terminal import Table, Terminal, escape, plain_text

__all__ = ["FORMAT", "METHODS", "LABELS", "Prediction", "HeldOutRegime", "ValidationResult"]

FORMAT = "orienteer.validation/1"
#: The predictors scored, in table order.
METHODS = ("graph", "observational", "correlation")
#: How each predictor is named to people.
LABELS = {"graph": "learned graph", "observational": "observational-only graph",
          "correlation": "correlation"}
#: The baselines as named in the verdicts.
BASELINES = {"observational": "the observational-only graph (learned from the reference alone)",
             "correlation": "correlation with the target"}
#: Held-out regimes listed on the terminal (validation.csv has them all).
MAX_REGIMES = 15
#: Names listed per cell of the report's movers table.
MAX_NAMES = 12

DEFINITIONS = (
    "Each held-out regime was left out of learning; the graph learned from the other "
    "regimes predicts that it moves the descendants of its targets. Score: the share of "
    "the DAGs of the learned class in which the variable descends from a target; a "
    "predicted mover has a score of at least {threshold:g}. Observed mover: invariance "
    "test against the reference with Benjamini-Hochberg adjusted p &le; {alpha:g} and a "
    "mean shift of at least {min_shift:g} reference sd (or an sd ratio beyond "
    "1 + {min_shift:g}). Baselines: the graph learned from the reference alone "
    "(observational-only), and |correlation| with a target in the reference (predicted "
    "mover: significant correlation). AUC: the chance that a mover scores above a "
    "non-mover (0.5 is guessing). The targets are not scored.")


@record(frozen=True)
class Prediction:
    """The measures of one predictor on one held-out regime (or all pooled).

    `scope` is ``"regime"`` or ``"overall"`` (then `regime` is ``"overall"``); `scored`
    variables, of which `observed` moved, `predicted` were predicted to, and
    `true_positives` both. A fraction is None when its denominator is 0; `auc` is
    None unless some scored variables moved and some did not.
    """

    scope: str
    regime: str
    method: str
    scored: int
    observed: int
    predicted: int
    true_positives: int
    precision: float | None
    recall: float | None
    auc: float | None


@record
class HeldOutRegime:
    """One held-out regime: its targets, the scored variables and every number per variable.

    Arrays follow `variables` (every variable but the targets). `scores` and `predicted`
    are by method (`METHODS`); `scoring` says how the class scores were obtained (exact
    listing, sampling, or reachability for a graph that is not a valid essential graph);
    `graph` holds the size of the graph learned without the regime.
    """

    regime: str
    targets: tuple[str, ...]
    variables: tuple[str, ...]
    shift: np.ndarray
    sd_ratio: np.ndarray
    pvalue: np.ndarray
    adjusted: np.ndarray
    moved: np.ndarray
    scores: dict[str, np.ndarray]
    predicted: dict[str, np.ndarray]
    scoring: dict[str, str] = field(default_factory=dict)
    graph: dict[str, Any] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        rows = []
        for i, v in enumerate(self.variables):
            row = {"variable": v, "moved": bool(self.moved[i]),
                   "shift": finite_or_none(self.shift[i]),
                   "sd_ratio": finite_or_none(self.sd_ratio[i]),
                   "pvalue": finite_or_none(self.pvalue[i]),
                   "adjusted": finite_or_none(self.adjusted[i])}
            for m in METHODS:
                row[m] = finite_or_none(self.scores[m][i])
                row[f"{m}_predicted"] = bool(self.predicted[m][i])
            rows.append(row)
        return {"regime": self.regime, "targets": list(self.targets),
                "scoring": dict(self.scoring), "graph": dict(self.graph), "variables": rows}

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> HeldOutRegime:
        rows = d["variables"]

        def col(key: str) -> np.ndarray:
            return np.array([np.nan if r.get(key) is None else r[key] for r in rows], dtype=float)

        return cls(regime=d["regime"], targets=tuple(d["targets"]),
                   variables=tuple(r["variable"] for r in rows), shift=col("shift"),
                   sd_ratio=col("sd_ratio"), pvalue=col("pvalue"), adjusted=col("adjusted"),
                   moved=np.array([bool(r["moved"]) for r in rows], dtype=bool),
                   scores={m: col(m) for m in METHODS},
                   predicted={m: np.array([bool(r[f"{m}_predicted"]) for r in rows],
                                          dtype=bool) for m in METHODS},
                   scoring=dict(d.get("scoring", {})), graph=dict(d.get("graph", {})))

    def names(self, mask: np.ndarray) -> list[str]:
        return [v for v, m in zip(self.variables, mask, strict=True) if m]


@record
class ValidationResult:
    """Held-out validation of a learned graph against two baselines.

    Attributes
    ----------
    regimes : list of HeldOutRegime, the held-out regimes that were scored
    table : list of Prediction, per regime and method, then the overall rows
    settings : dict, the options of the run
    notes : list of str, regimes skipped and fallbacks used
    observational : dict, size of the graph learned from the reference alone
    warnings : list of str, intake warnings
    run : dict, facts of this run (files written, report)
    """

    regimes: list[HeldOutRegime]
    table: list[Prediction]
    settings: dict[str, Any] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)
    observational: dict[str, Any] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    run: dict[str, Any] = field(default_factory=dict)

    # -- numbers --------------------------------------------------------------------------
    def overall(self, method: str = "graph") -> Prediction:
        """The pooled measures of one method."""
        for row in self.table:
            if row.scope == "overall" and row.method == method:
                return row
        raise KeyError(method)

    def row(self, regime: str, method: str = "graph") -> Prediction:
        """The measures of one held-out regime and method."""
        for r in self.table:
            if r.scope == "regime" and r.regime == regime and r.method == method:
                return r
        raise KeyError((regime, method))

    @property
    def verdicts(self) -> list[str]:
        """Plain sentences: does the graph do better than each baseline (pooled AUC)?"""
        g = self.overall("graph")
        if g.auc is None:
            return ["The ROC AUC is undefined: no held-out regime has both variables that "
                    "moved and variables that did not (with so few movers, try a smaller "
                    "--min-shift or hold out more regimes)."]
        out, better = [], []
        for m in METHODS[1:]:
            b = self.overall(m).auc
            if b is None:
                continue
            if g.auc <= b:
                out.append(f"The learned graph does no better than {BASELINES[m]} at "
                           f"predicting the held-out movers (ROC AUC {g.auc:.2f} against "
                           f"{b:.2f}).")
            else:
                better.append((m, b))
        if better:
            than = " and ".join(f"{BASELINES[m]} ({b:.2f})" for m, b in better)
            out.append(f"{'It' if out else 'The learned graph'} predicts the held-out movers "
                       f"better than {than}: ROC AUC {g.auc:.2f}.")
        if g.observed:
            out.append(f"Of {g.observed} observed movers the graph predicted "
                       f"{g.true_positives} (recall {_f(g.recall)}); of its {g.predicted} "
                       f"predicted movers {g.true_positives} moved (precision "
                       f"{_f(g.precision)}).")
        return out

    # -- conversions ----------------------------------------------------------------------
    def to_frame(self) -> pd.DataFrame:
        """``validation.csv``: one row per held-out regime and method, then the overall rows."""
        targets = {r.regime: ";".join(r.targets) for r in self.regimes}
        rows = [{**asdict(p), "targets": targets.get(p.regime, "") if p.scope == "regime"
                 else ""} for p in self.table]
        cols = ["scope", "regime", "method", "targets", "scored", "observed", "predicted",
                "true_positives", "precision", "recall", "auc"]
        return pd.DataFrame(rows, columns=cols)

    def to_dict(self) -> dict[str, Any]:
        """``validation.json`` (format ``orienteer.validation/1``)."""
        return {"format": FORMAT, "settings": dict(self.settings),
                "summary": [{k: finite_or_none(v) if isinstance(v, float) else v
                             for k, v in asdict(p).items()} for p in self.table],
                "verdicts": self.verdicts, "regimes": [r.to_dict() for r in self.regimes],
                "observational": dict(self.observational), "notes": list(self.notes),
                "warnings": list(self.warnings)}

    @classmethod
    def from_dict(cls, d: dict[str, Any], where: str = "validation.json") -> ValidationResult:
        """Read back what `to_dict` wrote."""
        if not isinstance(d, dict) or d.get("format") != FORMAT:
            raise InputError(f"{where}: not an Orienteer validation (expected \"format\": "
                             f"\"{FORMAT}\")")
        try:
            table = [Prediction(**row) for row in d["summary"]]
            regimes = [HeldOutRegime.from_dict(r) for r in d["regimes"]]
        except (KeyError, TypeError, ValueError) as exc:
            raise InputError(f"{where}: malformed ({type(exc).__name__}: {exc})") from None
        return cls(regimes=regimes, table=table, settings=dict(d.get("settings", {})),
                   notes=list(d.get("notes", [])),
                   observational=dict(d.get("observational", {})),
                   warnings=list(d.get("warnings", [])))

    @classmethod
    def read(cls, path: str | Path) -> ValidationResult:
        """Read a ``validation.json``."""
        from pipeline.fileio import read_json

        return cls.from_dict(read_json(path), where=str(path))

    def save(self, folder: str | Path) -> dict[str, Path]:
        """Write ``validation.csv`` and ``validation.json`` atomically; earlier ones go to
        ``folder/history/``. Returns the paths by file name."""
        from pipeline.fileio import write_json, write_text
        from pipeline.results.files import archive_previous

        folder = Path(folder)
        csv = self.to_frame().to_csv(index=False, lineterminator="\n")
        payload = self.to_dict()
        json.dumps(payload, allow_nan=False)  # fails before anything is moved or written
        archive_previous(folder, ("validation.csv", "validation.json"))
        return {"validation.csv": write_text(folder / "validation.csv", csv),
                "validation.json": write_json(folder / "validation.json", payload)}

    # -- text -----------------------------------------------------------------------------
    def summary(self, width: int = 110) -> str:
        """The same as `print`, as plain text."""
        return plain_text(self.print, width, max_regimes=None)

    def print(self, console: Terminal, max_regimes: int | None = MAX_REGIMES) -> None:
        """The measures as a table, then the verdicts and notes, on `console`."""
        s = self.settings
        console.print(f"[bold]Held-out validation[/bold]: {len(self.regimes)} regimes held "
                      f"out one at a time; observed mover: adjusted p <= {s.get('alpha')} "
                      f"and shift >= {s.get('min_shift')} sd; predicted mover: score >= "
                      f"{s.get('threshold')}")
        shown = self.regimes if max_regimes is None else self.regimes[:max_regimes]
        names = {r.regime for r in shown}
        t = Table(title="Predicted against observed movers"
                  + (f" (first {len(shown)} of {len(self.regimes)} regimes; all in "
                     f"validation.csv)" if len(shown) < len(self.regimes) else ""))
        for col in ("regime", "method", "movers", "predicted", "hits", "precision", "recall",
                    "AUC"):
            t.add_column(col, justify="left" if col in ("regime", "method") else "right")
        for p in self.table:
            if p.scope == "regime" and p.regime not in names:
                continue
            label = escape(p.regime) if p.method == "graph" else ""
            if p.scope == "overall" and p.method == "graph":
                t.add_section()
                label = "[bold]overall[/bold]"
            t.add_row(label, p.method, str(p.observed), str(p.predicted),
                      str(p.true_positives), _f(p.precision), _f(p.recall), _f(p.auc))
        console.print(t)
        console.print("graph: learned without the regime; observational: learned from the "
                      "reference alone; correlation: |corr| with a target in the reference")
        for v in self.verdicts:
            console.print(escape(v))
        for n in self.notes:
            console.print(f"[yellow]note[/yellow]: {escape(n)}")

    def html_section(self) -> str:
        """The report section: verdicts, the measures, the movers of each regime."""
        e = _e
        s = self.settings
        parts = [f"<p><b>{e(v)}</b></p>" for v in self.verdicts]
        head = ["held-out regime", "targets", "method", "movers", "predicted", "hits",
                "precision", "recall", "ROC AUC"]
        rows = []
        targets = {r.regime: ";".join(r.targets) for r in self.regimes}
        ordered = ([p for p in self.table if p.scope == "overall"]
                   + [p for p in self.table if p.scope == "regime"])
        for p in ordered:
            first = p.method == "graph"
            name = "<b>overall</b>" if p.scope == "overall" else e(p.regime)
            rows.append("<tr>" + "".join(
                [f"<td>{name if first else ''}</td>",
                 f"<td>{e(targets.get(p.regime, '')) if first else ''}</td>",
                 f"<td>{e(LABELS[p.method])}</td>"]
                + [f"<td class=\"num\">{v}</td>" for v in
                   (p.observed, p.predicted, p.true_positives, _f(p.precision),
                    _f(p.recall), _f(p.auc))]) + "</tr>")
        parts.append("<table><thead><tr>" + "".join(f"<th>{e(h)}</th>" for h in head)
                     + "</tr></thead><tbody>" + "".join(rows) + "</tbody></table>")
        movers = []
        for r in self.regimes:
            moved, pred = r.moved, r.predicted["graph"]
            movers.append("<tr>" + "".join(f"<td>{c}</td>" for c in (
                e(r.regime), _names(r.names(moved & pred)), _names(r.names(moved & ~pred)),
                _names(r.names(~moved & pred)), e(r.scoring.get("graph", "")))) + "</tr>")
        if movers:
            parts.append("<table><thead><tr><th>held-out regime</th><th>moved, predicted</th>"
                         "<th>moved, missed</th><th>predicted, did not move</th>"
                         "<th>graph scored by</th></tr></thead><tbody>" + "".join(movers)
                         + "</tbody></table>")
        obs = self.observational
        if obs:
            parts.append(f"<p class=\"small\">Observational-only graph (reference regimes "
                         f"alone): {e(obs.get('edges'))} edges, {e(obs.get('directed'))} "
                         f"directed, DAGs in its class: "
                         f"{e(_count(obs.get('class_size')))}.</p>")
        parts.append("<p class=\"small\">" + DEFINITIONS.format(
            threshold=float(s.get("threshold", 0.5)), alpha=float(s.get("alpha", 0.01)),
            min_shift=float(s.get("min_shift", 0.2))) + "</p>")
        parts.extend(f"<div class=\"warn\">{e(n)}</div>" for n in self.notes)
        return "\n".join(parts)

    def __repr__(self) -> str:
        g = self.overall("graph")
        return (f"ValidationResult({len(self.regimes)} held-out regimes, graph AUC "
                f"{_f(g.auc)}, precision {_f(g.precision)}, recall {_f(g.recall)})")


def _f(v: float | None) -> str:
    return "n/a" if v is None or (isinstance(v, float) and not math.isfinite(v)) else f"{v:.2f}"


def _e(v: Any) -> str:
    return html.escape(str(v), quote=True)


def _count(n: Any) -> str:
    return format_count(int(n)) if isinstance(n, int) else "n/a"


def _names(names: list[str]) -> str:
    if not names:
        return "&ndash;"
    more = f" and {len(names) - MAX_NAMES} more" if len(names) > MAX_NAMES else ""
    return _e(", ".join(names[:MAX_NAMES])) + more
