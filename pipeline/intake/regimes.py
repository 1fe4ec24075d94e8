"""The regimes file: which experimental condition acted on which variables.

``regimes.csv`` has one row per regime with the columns ``regime`` (the label used in
the measurements), ``targets`` (the variables acted on, separated by ``;``; empty for a
control) and optionally ``known`` (``yes``, the default, or ``no`` when the targets are
unknown or not trusted). Other columns (notes, dates) are allowed and ignored.

The reference (control) is chosen as follows:

* without ``reference``: every regime with empty targets and ``known=yes`` is a
  reference regime (together they form the reference); a regime with ``known=no`` is
  never a control, even with empty targets (its action is unknown);
* with ``reference=NAME``: exactly the named regime is the reference; other regimes with
  empty targets then count as interventional regimes (their intervention node points at
  the reference's targets, METHODS.md section 1).

Labels and target names are stripped of surrounding spaces.
"""

from __future__ import annotations

import csv
from collections.abc import Sequence
from pathlib import Path

from pipeline.design import Regime
from pipeline.errors import InputError, nearest_names

__all__ = ["read_regimes", "parse_known"]

_YES = {"yes", "y", "true", "1"}
_NO = {"no", "n", "false", "0"}


def parse_known(value: str, *, where: str) -> bool:
    """Parse a ``known`` cell: empty or ``yes`` -> True, ``no`` -> False."""
    v = value.strip().lower()
    if v == "" or v in _YES:
        return True
    if v in _NO:
        return False
    raise InputError(f"{where}: known is '{value}'; expected yes or no (empty means yes)")


def _read_rows(path: Path) -> tuple[list[str], list[tuple[int, list[str]]]]:
    """Header and ``(line number, cells)`` of the non-blank rows of a small CSV file."""
    if not path.exists():
        raise InputError(f"regimes file {path}: no such file; check the path given to --regimes")
    if not path.is_file():
        raise InputError(f"regimes file {path}: is not a file")
    if path.stat().st_size == 0:
        raise InputError(f"regimes file {path}: is empty (0 bytes); it needs a header "
                         f"'regime,targets' and one row per regime")
    try:
        with open(path, encoding="utf-8-sig", newline="") as fh:
            reader = csv.reader(fh)
            rows: list[tuple[int, list[str]]] = []
            header: list[str] | None = None
            start = 1
            for cells in reader:
                if cells and any(c.strip() for c in cells):
                    if header is None:
                        header = [c.strip() for c in cells]
                    else:
                        rows.append((start, cells))
                start = reader.line_num + 1
    except UnicodeDecodeError:
        raise InputError(f"regimes file {path}: is not UTF-8 text; save it as UTF-8 CSV") from None
    except csv.Error as exc:
        raise InputError(f"regimes file {path}: is not valid CSV ({exc})") from None
    if header is None:
        raise InputError(f"regimes file {path}: has no header line; the first line should be "
                         f"'regime,targets' (optionally ',known')")
    return header, rows


def read_regimes(path: str | Path, *, variables: Sequence[str] | None = None,
                 reference: str | None = None) -> list[Regime]:
    """Read and check ``regimes.csv``.

    Parameters
    ----------
    path : str or Path
        The regimes file.
    variables : sequence of str, optional
        The measured variables; when given, every target must be one of them.
    reference : str, optional
        The regime that serves as reference (``--reference``); see the module docstring.

    Returns
    -------
    list of Regime
        In file order, with ``samples`` 0 and ``reference`` set.

    Raises
    ------
    InputError
        Missing file or columns, duplicate regimes, a bad ``known`` value, an unknown
        target, an unknown ``reference``, or no reference at all.
    """
    path = Path(path)
    header, rows = _read_rows(path)
    # 1. columns
    dup = sorted({c for c in header if header.count(c) > 1})
    if dup:
        raise InputError(f"regimes file {path}: column name(s) {', '.join(dup)} appear more "
                         f"than once in the header; keep one of each")
    for needed in ("regime", "targets"):
        if needed not in header:
            raise InputError(f"regimes file {path}: has no '{needed}' column (columns seen: "
                             f"{', '.join(header)}); the header should be 'regime,targets' "
                             f"(optionally ',known')")
    i_reg, i_tgt = header.index("regime"), header.index("targets")
    i_known = header.index("known") if "known" in header else None
    # 2. rows
    regimes: list[Regime] = []
    seen: dict[str, int] = {}
    for line, cells in rows:
        cells = cells + [""] * (len(header) - len(cells))
        if len(cells) > len(header):
            raise InputError(f"regimes file {path}, line {line}: has {len(cells)} cells but the "
                             f"header has {len(header)}; quote targets that contain commas or "
                             f"separate targets with ';'")
        name = cells[i_reg].strip()
        where = f"regimes file {path}, line {line}"
        if not name:
            raise InputError(f"{where}: the regime name is empty; name every regime")
        if name in seen:
            raise InputError(f"{where}: regime '{name}' appears again (first on line "
                             f"{seen[name]}); give each regime one row")
        seen[name] = line
        targets: list[str] = []
        for t in cells[i_tgt].split(";"):
            t = t.strip()
            if t and t not in targets:
                targets.append(t)
        known = True if i_known is None else parse_known(cells[i_known],
                                                         where=f"{where}, regime '{name}'")
        regimes.append(Regime(name=name, targets=tuple(targets), known=known))
    if not regimes:
        raise InputError(f"regimes file {path}: has a header but no regime rows; add one row "
                         f"per regime of the data")
    # 3. targets must be measured variables
    if variables is not None:
        known_vars = list(variables)
        vset = set(known_vars)
        for r in regimes:
            for t in r.targets:
                if t not in vset:
                    raise InputError(
                        f"regimes file {path}: target '{t}' of regime '{r.name}' is not a "
                        f"variable of the data{nearest_names(t, known_vars)}; fix the name or "
                        f"remove it from the targets")
    # 4. the reference
    names = [r.name for r in regimes]
    if reference is not None:
        reference = str(reference).strip()
        if reference not in names:
            raise InputError(f"--reference {reference}: no such regime in {path}"
                             f"{nearest_names(reference, names)}; regimes are: "
                             f"{', '.join(names)}")
        ref = regimes[names.index(reference)]
        if not ref.known:
            raise InputError(f"--reference {reference}: regime '{reference}' is marked known=no "
                             f"in {path}; the reference needs known targets (set known=yes)")
        return [Regime(r.name, r.targets, r.known, r.name == reference) for r in regimes]
    out = [Regime(r.name, r.targets, r.known, not r.targets and r.known) for r in regimes]
    if not any(r.reference for r in out):
        raise InputError(f"regimes file {path}: no control regime (a row with empty targets "
                         f"and known=yes); pass --reference REGIME to name the reference, one of: "
                         f"{', '.join(names)}")
    return out
