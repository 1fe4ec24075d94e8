"""The result of ``check``: did the perturbations do what was declared?

`CheckResult` carries every number of the input check (samples per regime, the target
check, the response matrix, the control batches, the shape of the distributions, the
warnings), prints them as terminal tables (`print`; `summary` is the same as text), and
converts to ``check.json`` (format ``orienteer.check/1``) and ``response.csv``. The
computation is `pipeline.analyses.check`.
"""

from __future__ import annotations

from dataclasses import field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from pipeline.design import Design, Regime
from pipeline.errors import InputError
from pipeline.independence.response import ResponseMatrix
from pipeline.records import record
from pipeline.results.formatting import (
    finite_or_none,
    format_p,
    format_shift,
    json_matrix,
    short_shift,
)
from pipeline.terminal import Table, Terminal, escape, plain_text

if TYPE_CHECKING:  # pandas is imported where a table is made (a faster start)
    import pandas as pd

__all__ = ["FORMAT", "MOVED", "MOVED_GIVEN", "NOT_MOVED", "TargetCheck", "ControlAgreement",
           "DistributionShape", "CheckResult"]

FORMAT = "orienteer.check/1"
#: Verdicts of the target check.
MOVED, MOVED_GIVEN, NOT_MOVED = "moved", "moved given its neighbours", "did not move"
#: Response-matrix columns shown in the terminal; response.csv has them all.
MAX_COLUMNS = 60


@record(frozen=True)
class TargetCheck:
    """Did the intervention of `regime` move its declared `target`?

    `shift` is the standardized mean shift against the reference and `sd_ratio` the ratio
    of standard deviations (regime over reference): the two effect sizes. `pvalue` is
    that of the marginal invariance test, `adjusted` its Benjamini-Hochberg adjustment
    over the targets checked. `conditional_pvalue` is the invariance test of the target
    given `given` (its neighbours), which sees a changed mechanism that keeps the
    marginal mean and sd; None when not run. `verdict` is `MOVED` (marginal p <= alpha),
    `MOVED_GIVEN` (only the conditional law moved) or `NOT_MOVED`. `known` is False for
    the hints of a ``known=no`` regime.
    """

    regime: str
    target: str
    known: bool
    shift: float
    pvalue: float
    verdict: str
    sd_ratio: float = float("nan")
    adjusted: float = float("nan")
    conditional_pvalue: float | None = None
    given: tuple[str, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        return {"regime": self.regime, "target": self.target, "known": self.known,
                "shift": finite_or_none(self.shift), "sd_ratio": finite_or_none(self.sd_ratio),
                "pvalue": finite_or_none(self.pvalue), "adjusted": finite_or_none(self.adjusted),
                "conditional_pvalue": finite_or_none(self.conditional_pvalue),
                "given": list(self.given), "verdict": self.verdict}

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> TargetCheck:
        return cls(regime=d["regime"], target=d["target"], known=bool(d["known"]),
                   shift=_float(d.get("shift")), pvalue=_float(d.get("pvalue")),
                   verdict=d["verdict"], sd_ratio=_float(d.get("sd_ratio")),
                   adjusted=_float(d.get("adjusted")),
                   conditional_pvalue=d.get("conditional_pvalue"),
                   given=tuple(d.get("given", ())))


@record
class ControlAgreement:
    """Each control regime against the pooled other controls, variable by variable.

    Attributes
    ----------
    regimes : tuple of str, the control (reference) regimes, C >= 2
    variables : tuple of str, length p
    shift : array (C, p), standardized mean shift against the other controls
    statistic, pvalue : arrays (C, p), the marginal invariance test (mean and variance)
    adjusted : array (C, p), Bonferroni-adjusted p-values, ``min(1, p * n_variables)``
    alpha : float
    """

    regimes: tuple[str, ...]
    variables: tuple[str, ...]
    shift: np.ndarray
    statistic: np.ndarray
    pvalue: np.ndarray
    adjusted: np.ndarray
    alpha: float

    @property
    def differing(self) -> dict[str, list[str]]:
        """Per control, the variables that differ from the other controls (adjusted p <= alpha)."""
        return {r: [v for v, bad in zip(self.variables, row, strict=True) if bad]
                for r, row in zip(self.regimes, self.adjusted <= self.alpha, strict=True)}

    @property
    def agree(self) -> bool:
        """True when no variable differs in any control."""
        return not bool(np.any(self.adjusted <= self.alpha))

    @property
    def verdict(self) -> str:
        return "agree" if self.agree else "differ"

    def to_frame(self) -> pd.DataFrame:
        """Long format: control, variable, shift, statistic, pvalue, adjusted."""
        import pandas as pd

        c, p = len(self.regimes), len(self.variables)
        return pd.DataFrame({
            "control": np.repeat(np.asarray(self.regimes, dtype=object), p),
            "variable": np.tile(np.asarray(self.variables, dtype=object), c),
            "shift": self.shift.ravel(), "statistic": self.statistic.ravel(),
            "pvalue": self.pvalue.ravel(), "adjusted": self.adjusted.ravel(),
        })


@record
class DistributionShape:
    """Within-regime skewness and excess kurtosis of every variable (pooled over regimes).

    The Gaussian tests assume both near 0; `far` lists the variables beyond the limits.
    """

    variables: tuple[str, ...]
    skewness: np.ndarray
    excess_kurtosis: np.ndarray
    far: tuple[str, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        return {"variables": list(self.variables),
                "skewness": [finite_or_none(v) for v in self.skewness],
                "excess_kurtosis": [finite_or_none(v) for v in self.excess_kurtosis],
                "far_from_gaussian": list(self.far)}


@record
class CheckResult:
    """What `check` found. Carries every number; `print` and `summary` show them.

    Attributes
    ----------
    design : Design, variables and regimes (with sample counts) as read
    samples : dict, regime -> number of samples
    targets : list of TargetCheck, one per declared target of each non-reference regime
    response : ResponseMatrix, regime x variable shift and p-value
    controls : ControlAgreement or None (None with fewer than two control regimes)
    constant : dict, regime -> variables constant within it
    warnings : list of str
    alpha : float
    dropped_rows : int, rows dropped for missing values (``drop_missing``)
    fingerprint : str, of the inputs
    shape : DistributionShape or None
    reference : list of str, the regimes the learner pools as the reference (the
        controls that agree; see `pipeline.analyses.check.settle_reference`)
    demoted : list of str, control batches that differ from the reference and are
        analysed apart (regimes with no declared target)
    """

    design: Design
    samples: dict[str, int]
    targets: list[TargetCheck]
    response: ResponseMatrix
    controls: ControlAgreement | None
    constant: dict[str, list[str]]
    warnings: list[str]
    alpha: float
    dropped_rows: int = 0
    fingerprint: str = ""
    shape: DistributionShape | None = None
    reference: list[str] = field(default_factory=list)
    demoted: list[str] = field(default_factory=list)

    # -- numbers ------------------------------------------------------------------------
    def failed_targets(self) -> dict[str, list[str]]:
        """Per regime, the declared targets that moved neither marginally nor conditionally."""
        out: dict[str, list[str]] = {}
        for t in self.targets:
            if t.known and t.verdict == NOT_MOVED:
                out.setdefault(t.regime, []).append(t.target)
        return out

    def target_frame(self) -> pd.DataFrame:
        """One row per checked target (the fields of `TargetCheck`)."""
        import pandas as pd

        cols = ["regime", "target", "known", "shift", "sd_ratio", "pvalue", "adjusted",
                "conditional_pvalue", "given", "verdict"]
        return pd.DataFrame([[getattr(t, c) for c in cols] for t in self.targets], columns=cols)

    def response_csv(self) -> str:
        """``response.csv``: regime, variable, shift, sd_ratio, pvalue, adjusted (one row per
        pair; floats in their shortest exact form), written without building a table."""
        from pipeline.results.tables import csv_text

        r = self.response
        rows = ((reg, var, float(r.shift[i, j]), float(r.sd_ratio[i, j]),
                 float(r.pvalue[i, j]), float(r.adjusted[i, j]))
                for i, reg in enumerate(r.regimes) for j, var in enumerate(r.variables))
        return csv_text(("regime", "variable", "shift", "sd_ratio", "pvalue", "adjusted"), rows)

    def response_frame(self) -> pd.DataFrame:
        """The response matrix in long format: regime, variable, shift, sd_ratio, p, adjusted."""
        frame = self.response.to_frame()
        return frame[[c for c in ("regime", "variable", "shift", "sd_ratio", "pvalue",
                                  "adjusted") if c in frame.columns]]

    # -- JSON -----------------------------------------------------------------------------
    def to_dict(self) -> dict[str, Any]:
        """Everything as JSON-able values (non-finite numbers become null)."""
        r = self.response
        out: dict[str, Any] = {
            "format": FORMAT,
            "alpha": self.alpha,
            "variables": list(self.design.variables),
            "reference": list(self.reference) or [x.name for x in self.design.reference],
            "demoted_controls": list(self.demoted),
            "regimes": [{"name": x.name, "targets": list(x.targets), "known": x.known,
                         "reference": x.reference, "samples": int(self.samples.get(x.name, 0))}
                        for x in self.design.regimes],
            "dropped_rows": int(self.dropped_rows),
            "fingerprint": self.fingerprint,
            "targets": [t.to_dict() for t in self.targets],
            "response": {"regimes": list(r.regimes), "variables": list(r.variables),
                         "shift": json_matrix(r.shift), "pvalue": json_matrix(r.pvalue),
                         "sd_ratio": json_matrix(r.sd_ratio), "adjusted": json_matrix(r.adjusted),
                         "correction": "benjamini-hochberg over the matrix"},
            "controls": None,
            "shape": self.shape.to_dict() if self.shape is not None else None,
            "constant": {k: list(v) for k, v in self.constant.items()},
            "warnings": list(self.warnings),
        }
        if self.controls is not None:
            c = self.controls
            out["controls"] = {"regimes": list(c.regimes), "verdict": c.verdict,
                               "correction": "bonferroni over variables",
                               "differing": c.differing, "shift": json_matrix(c.shift),
                               "pvalue": json_matrix(c.pvalue),
                               "adjusted": json_matrix(c.adjusted)}
        return out

    @classmethod
    def from_dict(cls, d: dict[str, Any], where: str = "check.json") -> CheckResult:
        """Read back what `to_dict` wrote (for the report of a run folder)."""
        if not isinstance(d, dict) or d.get("format") != FORMAT:
            raise InputError(f"{where}: not an Orienteer check (expected \"format\": "
                             f"\"{FORMAT}\")")
        try:
            regimes = tuple(Regime(x["name"], tuple(x["targets"]), bool(x["known"]),
                                   bool(x["reference"]), int(x["samples"]))
                            for x in d["regimes"])
            design = Design(tuple(d["variables"]), regimes)
            r = d["response"]
            nr, nv = len(r["regimes"]), len(r["variables"])
            response = ResponseMatrix(
                tuple(r["regimes"]), tuple(r["variables"]), _array(r["shift"], nr, nv),
                _array(r["pvalue"], nr, nv), np.full((nr, nv), np.nan),
                sd_ratio=_array(r.get("sd_ratio"), nr, nv),
                adjusted=_array(r.get("adjusted"), nr, nv))
            controls = None
            if d.get("controls"):
                c = d["controls"]
                nc = len(c["regimes"])
                controls = ControlAgreement(
                    tuple(c["regimes"]), tuple(d["variables"]), _array(c["shift"], nc, nv),
                    np.full((nc, nv), np.nan), _array(c["pvalue"], nc, nv),
                    _array(c["adjusted"], nc, nv), float(d["alpha"]))
            shape = None
            if d.get("shape"):
                s = d["shape"]
                shape = DistributionShape(tuple(s["variables"]), _vector(s["skewness"]),
                                          _vector(s["excess_kurtosis"]),
                                          tuple(s.get("far_from_gaussian", ())))
            return cls(design=design, samples={x.name: x.samples for x in regimes},
                       targets=[TargetCheck.from_dict(t) for t in d["targets"]],
                       response=response, controls=controls,
                       constant={k: list(v) for k, v in d.get("constant", {}).items()},
                       warnings=list(d.get("warnings", [])), alpha=float(d["alpha"]),
                       dropped_rows=int(d.get("dropped_rows", 0)),
                       fingerprint=str(d.get("fingerprint", "")), shape=shape,
                       reference=list(d.get("reference", [])),
                       demoted=list(d.get("demoted_controls", [])))
        except (KeyError, TypeError, ValueError) as exc:
            raise InputError(f"{where}: malformed check ({exc})") from None

    def write(self, folder: str | Path) -> dict[str, Path]:
        """Write ``check.json`` and ``response.csv`` into `folder` atomically."""
        from pipeline.fileio import write_json, write_text

        folder = Path(folder)
        csv = self.response_csv()
        return {"check.json": write_json(folder / "check.json", self.to_dict()),
                "response.csv": write_text(folder / "response.csv", csv)}

    # -- text -----------------------------------------------------------------------------
    def summary(self, width: int = 100) -> str:
        """The same tables as `print`, as plain text."""
        return plain_text(self.print, width)

    def print(self, console: Terminal) -> None:
        """Print the check as tables on `console`."""
        d = self.design
        console.print(f"[bold]Input check[/bold]: {sum(self.samples.values())} samples, "
                      f"{len(d.variables)} variables, {len(d.regimes)} regimes; alpha = "
                      f"{self.alpha:g}")
        if self.dropped_rows:
            console.print(f"{self.dropped_rows} rows with missing values dropped")
        t = Table(title="Samples per regime")
        for col in ("regime", "samples", "targets", "known", "role"):
            t.add_column(col, justify="right" if col == "samples" else "left")
        demoted = set(self.demoted)
        for r in d.regimes:
            role = ("reference" if r.reference and r.name not in demoted else
                    "control batch, analysed apart" if r.name in demoted else "intervention")
            t.add_row(escape(r.name), str(self.samples.get(r.name, 0)),
                      escape(";".join(r.targets) or "-"), "yes" if r.known else "no", role)
        console.print(t)
        if self.targets:
            self._print_targets(console)
        self._print_response(console)
        self._print_controls(console)
        if self.shape is not None and self.shape.far:
            console.print(f"Far from Gaussian (|skewness| or excess kurtosis large): "
                          f"{escape(', '.join(self.shape.far))}")
        if self.warnings:
            console.print("\n[bold yellow]Warnings[/bold yellow]")
            for w in self.warnings:
                console.print(f"[yellow]-[/yellow] {escape(w)}")
        else:
            console.print("No warnings.")

    def _print_targets(self, console: Terminal) -> None:
        t = Table(title="Declared targets: did the intervention move them?")
        for col in ("regime", "target", "shift (sd)", "sd ratio", "p", "p adjusted",
                    "p given neighbours", "verdict"):
            t.add_column(col, justify="left" if col in ("regime", "target", "verdict")
                         else "right")
        for c in self.targets:
            colour = ("green" if c.verdict != NOT_MOVED else "red" if c.known else "yellow")
            name = c.target if c.known else f"{c.target} (hint)"
            ratio = "-" if not np.isfinite(c.sd_ratio) else f"{c.sd_ratio:.2f}"
            t.add_row(escape(c.regime), escape(name), format_shift(c.shift), ratio,
                      format_p(c.pvalue), format_p(_none_nan(c.adjusted)),
                      format_p(c.conditional_pvalue), f"[{colour}]{c.verdict}[/{colour}]")
        console.print(t)

    def _print_response(self, console: Terminal) -> None:
        """The response matrix, split into column blocks that fit the console width."""
        resp = self.response
        names = list(resp.variables[:MAX_COLUMNS])
        title = ("Response matrix: standardized shift against the reference "
                 f"(* Benjamini-Hochberg adjusted p <= {self.alpha:g})")
        if len(resp.variables) > MAX_COLUMNS:
            title += (f"; first {MAX_COLUMNS} of {len(resp.variables)} variables "
                      "(all in response.csv)")
        console.print(f"\n[bold]{title}[/bold]")
        first = max([len("regime")] + [len(r) for r in resp.regimes])
        widths = [max(len(v), 5) for v in names]
        room = max(console.width - first - 2, 8)
        blocks, block, used = [], [], 0
        for j, w in enumerate(widths):
            if block and used + w + 3 > room:
                blocks.append(block)
                block, used = [], 0
            block.append(j)
            used += w + 3
        if block:
            blocks.append(block)
        marked = resp.marked(self.alpha)
        for block in blocks:
            t = Table()
            t.add_column("regime", no_wrap=True, min_width=first)
            for j in block:
                t.add_column(escape(names[j]), justify="right", no_wrap=True,
                             min_width=widths[j])
            for i, name in enumerate(resp.regimes):
                cells = []
                for j in block:
                    s = resp.shift[i, j]
                    if marked[i, j]:
                        colour = "blue" if s < 0 else "red"
                        cells.append(f"[{colour}]{short_shift(s)}*[/{colour}]")
                    else:
                        cells.append(f"[dim]{short_shift(s)} [/dim]")
                t.add_row(escape(name), *cells)
            console.print(t)

    def _print_controls(self, console: Terminal) -> None:
        if self.controls is None:
            console.print("Control batches: one control regime, nothing to compare")
            return
        c = self.controls
        t = Table(title="Control batches: each against the pooled others "
                        "(Bonferroni over variables)")
        for col in ("control", "samples", "smallest adjusted p", "differs in"):
            t.add_column(col)
        differing = c.differing
        for i, name in enumerate(c.regimes):
            bad = differing[name]
            t.add_row(escape(name), str(self.samples.get(name, 0)),
                      format_p(float(c.adjusted[i].min())),
                      f"[red]{escape(', '.join(bad))}[/red]" if bad else "[green]-[/green]")
        console.print(t)
        verdict = "[green]agree[/green]" if c.agree else "[red]differ[/red]"
        line = f"Control batches {verdict}"
        if self.demoted:
            line += (f"; reference: {escape(', '.join(self.reference))}; analysed apart: "
                     f"{escape(', '.join(self.demoted))}")
        console.print(line)


def _float(v: Any) -> float:
    return float("nan") if v is None else float(v)


def _none_nan(v: float) -> float | None:
    return None if v is None or not np.isfinite(v) else float(v)


def _vector(v: list) -> np.ndarray:
    return np.array([np.nan if x is None else x for x in v], dtype=float)


def _array(rows: list | None, n: int, m: int) -> np.ndarray:
    if rows is None:
        return np.full((n, m), np.nan)
    out = np.array([[np.nan if x is None else x for x in row] for row in rows], dtype=float)
    return out.reshape(n, m)
