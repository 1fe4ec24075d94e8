"""Every input format gives the statistics of the same table written as CSV; bad files exit 2.

The files are written by outside writers (pandas, openpyxl, gzip, h5py following the
AnnData on-disk layout, see ``tests/h5ad_files.py``), and the sufficient statistics of
each are compared with those of the same table written by pandas as a plain CSV file
(counts equal, means and scatter matrices to rounding). Each bad variant is run through
the command line (``pipeline.cli.main``): exit 2, one ``error:`` line naming the culprit,
inputs untouched.
"""

import gzip
import hashlib
import shutil

import numpy as np
import openpyxl
import pandas as pd
import pytest
from h5ad_files import write_h5ad

from pipeline.errors import InputError
from pipeline.intake.formats import h5ad as h5ad_reader
from pipeline.intake.read import read_inputs
from pipeline.intake.tables import DataFiles, ReadOptions, iter_chunks, read_header
from pipeline.stats.fingerprint import fingerprint_inputs

REGIMES = "regime,targets\nctrl,\nkd_G1,G1\nkd_G2,G2\n"
GENES = ["G1", "G2", "G3", "G4", "G5"]


def _table(n: int = 240, seed: int = 0, zeros: float = 0.0) -> pd.DataFrame:
    """G1 -> G2 -> G3, G4 and G5 independent; three regimes; a share of exact zeros."""
    rng = np.random.default_rng(seed)
    regime = np.array(["ctrl", "kd_G1", "kd_G2"])[rng.integers(0, 3, n)]
    g1 = rng.standard_normal(n) - 2.0 * (regime == "kd_G1")
    g2 = 0.8 * g1 + rng.standard_normal(n) - 1.5 * (regime == "kd_G2")
    g3 = -0.5 * g2 + rng.standard_normal(n)
    x = np.column_stack([g1, g2, g3, rng.standard_normal(n) * 2 + 10, rng.standard_normal(n)])
    if zeros:
        x = np.where(rng.random(x.shape) < zeros, 0.0, x)
    frame = pd.DataFrame(x, columns=GENES)
    frame.insert(2, "regime", regime)
    return frame


@pytest.fixture
def folder(tmp_path):
    (tmp_path / "regimes.csv").write_text(REGIMES, encoding="utf-8")
    return tmp_path


def _reference(folder, frame, name="ref.csv", **options):
    path = folder / name
    frame.to_csv(path, index=False)  # pandas: the outside writer of the reference CSV
    return read_inputs([path], folder / "regimes.csv", **options).moments


def _same(m, ref):
    assert m.variables == ref.variables and m.regimes == ref.regimes
    np.testing.assert_array_equal(m.count, ref.count)
    np.testing.assert_allclose(m.mean, ref.mean, rtol=1e-12, atol=1e-13)
    np.testing.assert_allclose(m.scatter, ref.scatter, rtol=1e-12,
                               atol=1e-12 * np.abs(ref.scatter).max())


def _digest(paths):
    return {p: hashlib.sha256(p.read_bytes()).hexdigest() for p in paths}


def _exit_2(folder, monkeypatch, capsys, argv, words):
    """Run ``orienteer check``: exit 2, one error line naming every word, inputs untouched."""
    from pipeline.cli import main

    inputs = [p for p in folder.iterdir() if p.is_file()]
    before = _digest(inputs)
    monkeypatch.chdir(folder)
    monkeypatch.setenv("ORIENTEER_LOG_DIR", str(folder / "logs"))
    code = main(["check", *argv, "--regimes", str(folder / "regimes.csv")])
    out, err = capsys.readouterr()
    assert code == 2, err
    assert err.startswith("error:") and err.count("\n") == 1 and "Traceback" not in out + err
    for word in words:
        assert word in err, (word, err)
    assert _digest(inputs) == before
    return err


# -- delimited text -----------------------------------------------------------------------------
@pytest.mark.parametrize("name,sep", [("d.tsv", "\t"), ("d.tab", "\t"), ("d.txt", "\t"),
                                      ("s.txt", ";"), ("c.txt", ","), ("s.csv", ";")])
def test_delimited_text_gives_the_csv_statistics(folder, name, sep):
    frame = _table()
    ref = _reference(folder, frame)
    frame.to_csv(folder / name, sep=sep, index=False)
    header = read_header(folder / name)
    assert header.delimiter == sep
    _same(read_inputs([folder / name], folder / "regimes.csv", chunk_rows=37).moments, ref)


@pytest.mark.parametrize("name,sep", [("d.csv.gz", ","), ("d.tsv.gz", "\t")])
def test_gzip_text_is_streamed_to_the_same_statistics(folder, name, sep):
    frame = _table()
    ref = _reference(folder, frame)
    text = frame.to_csv(sep=sep, index=False)
    with gzip.open(folder / name, "wt", encoding="utf-8") as fh:  # the gzip module writes
        fh.write(text)
    assert read_header(folder / name).compression == "gzip"
    _same(read_inputs([folder / name], folder / "regimes.csv", chunk_rows=50).moments, ref)


def test_decimal_comma(folder, monkeypatch, capsys):
    frame = _table()
    ref = _reference(folder, frame)
    frame.to_csv(folder / "eu.csv", sep=";", decimal=",", index=False)
    frame.to_csv(folder / "eu.tsv", sep="\t", decimal=",", index=False)
    for name in ("eu.csv", "eu.tsv"):
        m = read_inputs([folder / name], folder / "regimes.csv", decimal=",", chunk_rows=64)
        _same(m.moments, ref)
    with pytest.raises(InputError, match=r"values such as '-?\d+,\d+' in column G1 \(line 2\) "
                                         r"look like decimal commas; pass --decimal ,"):
        read_inputs([folder / "eu.csv"], folder / "regimes.csv")
    # a point in a file read with decimal commas is not a number
    (folder / "mixed.csv").write_text("G1;G2;regime\n1,5;2;ctrl\n1.5;2;ctrl\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"line 3, column 'G1': '1.5' is not a number"):
        read_inputs([folder / "mixed.csv"], folder / "regimes.csv", decimal=",")
    (folder / "mixed.csv").unlink()
    _exit_2(folder, monkeypatch, capsys, ["eu.tsv"], ["eu.tsv", "G1", "decimal commas",
                                                       "--decimal ,"])
    _exit_2(folder, monkeypatch, capsys, ["ref.csv", "--decimal", ","],
            ["ref.csv", "--decimal ,", "separated by commas"])


def test_non_numeric_cell_in_a_tsv_exits_2(folder, monkeypatch, capsys):
    lines = _table().to_csv(sep="\t", index=False).splitlines()
    cells = lines[9].split("\t")
    cells[3] = "n.d."
    lines[9] = "\t".join(cells)
    (folder / "d.tsv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    _exit_2(folder, monkeypatch, capsys, ["d.tsv"], ["d.tsv", "line 10", "column 'G3'",
                                                     "'n.d.'"])


@pytest.mark.parametrize("damage", ["truncated", "garbage", "bad crc"])
def test_corrupt_gzip_exits_2(folder, monkeypatch, capsys, damage):
    raw = gzip.compress(_table(n=3000).to_csv(index=False).encode())
    if damage == "truncated":
        raw = raw[: len(raw) // 2]
    elif damage == "garbage":
        raw = b"this is not gzip at all\n" * 10
    else:  # the CRC-32 trailer no longer matches the data (RFC 1952)
        raw = raw[:-8] + bytes(b ^ 0xFF for b in raw[-8:-4]) + raw[-4:]
    (folder / "d.csv.gz").write_bytes(raw)
    _exit_2(folder, monkeypatch, capsys, ["d.csv.gz"], ["d.csv.gz", "gzip"])


# -- Excel ----------------------------------------------------------------------------------------
def _workbook(path, sheets: dict[str, pd.DataFrame]):
    """Write with openpyxl: a header row, then the values (numbers as numbers)."""
    wb = openpyxl.Workbook()
    wb.remove(wb.active)
    for name, frame in sheets.items():
        ws = wb.create_sheet(name)
        ws.append(list(frame.columns))
        for row in frame.itertuples(index=False):
            ws.append([v.item() if hasattr(v, "item") else v for v in row])
    wb.save(path)


def test_excel_sheet_gives_the_csv_statistics(folder):
    frame = _table()
    ref = _reference(folder, frame)
    _workbook(folder / "one.xlsx", {"plate 1": frame})
    _same(read_inputs([folder / "one.xlsx"], folder / "regimes.csv", chunk_rows=41).moments, ref)
    frame.to_excel(folder / "pandas.xlsx", index=False, sheet_name="data")  # pandas writes too
    _same(read_inputs([folder / "pandas.xlsx"], folder / "regimes.csv").moments, ref)
    _workbook(folder / "two.xlsx", {"notes": frame.iloc[:5], "cells": frame})
    m = read_inputs([folder / "two.xlsx"], folder / "regimes.csv", sheet="cells").moments
    _same(m, ref)
    files = DataFiles([folder / "two.xlsx"], ReadOptions(sheet="cells"))  # options carried
    _same(read_inputs(files, folder / "regimes.csv").moments, ref)


def test_excel_bad_variants_exit_2(folder, monkeypatch, capsys):
    frame = _table()
    _workbook(folder / "two.xlsx", {"notes": frame.iloc[:5], "cells": frame})
    _exit_2(folder, monkeypatch, capsys, ["two.xlsx"], ["two.xlsx", "2 sheets", "notes, cells",
                                                        "--sheet"])
    _exit_2(folder, monkeypatch, capsys, ["two.xlsx", "--sheet", "cels"],
            ["two.xlsx", "no sheet 'cels'", "cells"])
    bad = frame.astype(object)
    bad.iloc[6, 3] = "high"
    _workbook(folder / "bad.xlsx", {"s": bad})
    _exit_2(folder, monkeypatch, capsys, ["bad.xlsx"], ["bad.xlsx", "sheet 's', row 8",
                                                        "column 'G3'", "'high'"])
    (folder / "fake.xlsx").write_text(frame.to_csv(index=False), encoding="utf-8")
    _exit_2(folder, monkeypatch, capsys, ["fake.xlsx"], ["fake.xlsx", "not a readable Excel"])


def test_excel_text_cells_blank_rows_and_true_false(folder):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "s"
    for row in (["G1", "G2", "regime"], [1, "2,5", "ctrl"], [None, None, None], [3, "4", 7],
                [2, 1.5, "ctrl"]):
        ws.append(row)
    wb.save(folder / "t.xlsx")
    h = read_header(folder / "t.xlsx")
    chunks = list(iter_chunks(h, ["G1", "G2"], "regime", 10, ReadOptions(decimal=",")))
    np.testing.assert_array_equal(chunks[0].values, [[1, 2.5], [3, 4], [2, 1.5]])
    assert [chunks[0].labels[i] for i in chunks[0].codes] == ["ctrl", "7", "ctrl"]
    ws["B6"], ws["A6"], ws["C6"] = True, 1, "ctrl"
    wb.save(folder / "t.xlsx")
    with pytest.raises(InputError, match=r"sheet 's', row 6, column 'G2': 'True'"):
        list(iter_chunks(h, ["G1", "G2"], "regime", 10, ReadOptions(decimal=",")))


# -- one file per regime --------------------------------------------------------------------------
def test_regime_from_filename(folder, monkeypatch, capsys):
    frame = _table()
    ref = _reference(folder, frame)
    (folder / "ref.csv").unlink()
    parts = {name: part.drop(columns="regime") for name, part in frame.groupby("regime")}
    parts["ctrl"].to_csv(folder / "ctrl.csv", index=False)
    parts["kd_G1"].to_csv(folder / "kd_G1.tsv.gz", sep="\t", index=False, compression="gzip")
    parts["kd_G2"].to_parquet(folder / "kd_G2.parquet", index=False)
    paths = [folder / "ctrl.csv", folder / "kd_G1.tsv.gz", folder / "kd_G2.parquet"]
    m = read_inputs(paths, folder / "regimes.csv", regime_from="filename").moments
    _same(m, ref)
    fp = fingerprint_inputs(paths, folder / "regimes.csv", regime_from="filename")
    shutil.copy(folder / "ctrl.csv", folder / "control.csv")
    moved = [folder / "control.csv", *paths[1:]]
    assert fingerprint_inputs(moved, folder / "regimes.csv", regime_from="filename") != fp
    (folder / "control.csv").unlink()
    parts["ctrl"].iloc[:3].to_csv(folder / "ctrl.tsv", sep="\t", index=False)
    _exit_2(folder, monkeypatch, capsys,
            ["ctrl.csv", "ctrl.tsv", "kd_G1.tsv.gz", "--regime-from", "filename"],
            ["ctrl.csv", "ctrl.tsv", "same name 'ctrl'"])
    (folder / "ctrl.tsv").unlink()
    parts["kd_G2"].to_csv(folder / "kd_G3.csv", index=False)
    _exit_2(folder, monkeypatch, capsys,
            ["ctrl.csv", "kd_G3.csv", "--regime-from", "filename"],
            ["kd_G3.csv", "'kd_G3'", "no row in the regimes file"])


# -- AnnData --------------------------------------------------------------------------------------
@pytest.mark.parametrize("layout", ["dense", "csr", "csc"])
@pytest.mark.parametrize("labels", ["categorical", "string", "old"])
def test_h5ad_gives_the_csv_statistics_of_the_chosen_genes(folder, layout, labels):
    frame = _table(zeros=0.4)
    (folder / "genes.txt").write_text("# chosen\nG4\nG1\n\nG2\n", encoding="utf-8")
    ref = _reference(folder, frame, genes=folder / "genes.txt")
    assert ref.variables == ("G4", "G1", "G2")
    x = frame[GENES].to_numpy()
    obs = {"batch": np.arange(len(frame)) % 4, "condition": frame["regime"].to_numpy()}
    path = write_h5ad(folder / "cells.h5ad", x, GENES, obs, layout=layout, labels=labels)
    m = read_inputs([path], folder / "regimes.csv", regime_column="condition",
                    genes=folder / "genes.txt", chunk_rows=29).moments
    _same(m, ref)


def test_h5ad_sparse_row_blocks_follow_the_entry_budget(folder, monkeypatch):
    frame = _table(zeros=0.6)
    ref = _reference(folder, frame)
    x = frame[GENES].to_numpy()
    path = write_h5ad(folder / "cells.h5ad", x, GENES, {"regime": frame["regime"].to_numpy()})
    monkeypatch.setattr(h5ad_reader, "_SPARSE_ENTRIES", 7)  # a few rows per block
    h = read_header(path)
    chunks = list(iter_chunks(h, GENES, "regime", 1000))
    assert len(chunks) > 20 and sum(len(c.values) for c in chunks) == len(frame)
    np.testing.assert_array_equal(np.vstack([c.values for c in chunks]), x)
    _same(read_inputs([path], folder / "regimes.csv").moments, ref)


def test_h5ad_bad_variants_exit_2(folder, monkeypatch, capsys):
    frame = _table()
    x = frame[GENES].to_numpy()
    write_h5ad(folder / "cells.h5ad", x, GENES, {"batch": np.arange(len(frame)) % 4})
    (folder / "genes.txt").write_text("G1\nG2\n", encoding="utf-8")
    _exit_2(folder, monkeypatch, capsys, ["cells.h5ad", "--genes", "genes.txt"],
            ["cells.h5ad", "obs has no column 'regime'", "batch", "--regime-column"])
    write_h5ad(folder / "cells.h5ad", x, GENES, {"regime": frame["regime"].to_numpy()})
    (folder / "genes.txt").write_text("G1\nGATA1\nG2\n", encoding="utf-8")
    _exit_2(folder, monkeypatch, capsys, ["cells.h5ad", "--genes", "genes.txt"],
            ["--genes", "GATA1", "cells.h5ad"])
    (folder / "genes.txt").write_text("G1\nG2\nG1\n", encoding="utf-8")
    _exit_2(folder, monkeypatch, capsys, ["cells.h5ad", "--genes", "genes.txt"],
            ["genes.txt", "G1 listed more than once"])
    many = np.repeat(x, 500, axis=1)[:, : h5ad_reader.MAX_GENES_WITHOUT_LIST + 1]
    write_h5ad(folder / "wide.h5ad", many, [f"g{j}" for j in range(many.shape[1])],
               {"regime": frame["regime"].to_numpy()})
    _exit_2(folder, monkeypatch, capsys, ["wide.h5ad"], ["wide.h5ad", "--genes FILE"])
    (folder / "junk.h5ad").write_bytes(b"not hdf5" * 100)
    _exit_2(folder, monkeypatch, capsys, ["junk.h5ad"], ["junk.h5ad", "HDF5"])


def test_genes_file_selects_csv_columns_too(folder):
    frame = _table()
    (folder / "genes.txt").write_text("G3\nG1\nG2\n", encoding="utf-8")
    m = _reference(folder, frame, genes=folder / "genes.txt")
    frame[["G3", "G1", "regime", "G2"]].to_csv(folder / "two.csv", index=False)
    _same(m, read_inputs([folder / "two.csv"], folder / "regimes.csv").moments)


# -- the fingerprint sees every reading option ----------------------------------------------------
def test_fingerprint_includes_the_reading_options(folder):
    frame = _table()
    frame.to_csv(folder / "d.csv", index=False)
    paths, reg = [folder / "d.csv"], folder / "regimes.csv"
    (folder / "genes.txt").write_text("G1\nG2\n", encoding="utf-8")
    plain = fingerprint_inputs(paths, reg)
    assert plain == read_inputs(paths, reg).fingerprint
    others = {fingerprint_inputs(paths, reg, decimal=","),
              fingerprint_inputs(paths, reg, regime_from="filename"),
              fingerprint_inputs(paths, reg, sheet="s"),
              fingerprint_inputs(paths, reg, genes=folder / "genes.txt"),
              fingerprint_inputs(paths, reg, genes=["G2", "G1"])}
    assert len(others) == 5 and plain not in others
    assert fingerprint_inputs(paths, reg, genes=["G1", "G2"]) \
        == fingerprint_inputs(paths, reg, genes=folder / "genes.txt")
    assert read_inputs(paths, reg, genes=["G1", "G2"]).fingerprint \
        == fingerprint_inputs(paths, reg, genes=["G1", "G2"])
    shutil.copy(folder / "d.csv", folder / "d.txt")  # same bytes, another reading
    assert fingerprint_inputs([folder / "d.txt"], reg) != plain


def test_a_file_named_for_another_format_says_which_it_looks_like(folder, monkeypatch, capsys):
    frame = _table()
    frame.to_csv(folder / "packed.csv", index=False, compression="gzip")
    _exit_2(folder, monkeypatch, capsys, ["packed.csv"], ["packed.csv", "gzip", ".csv.gz"])
    (folder / "packed.csv").unlink()
    frame.to_excel(folder / "sheet.csv", index=False, engine="openpyxl")
    _exit_2(folder, monkeypatch, capsys, ["sheet.csv"], ["sheet.csv", "name it .xlsx"])
    (folder / "sheet.csv").unlink()
    frame.to_csv(folder / "commas.tsv", index=False)
    _exit_2(folder, monkeypatch, capsys, ["commas.tsv"], ["commas.tsv", "separated by commas"])
