"""Tables: headers, variable columns, chunked reading of CSV and Parquet, locating rows."""

import numpy as np
import pandas as pd
import pytest

from pipeline.errors import InputError
from pipeline.intake.tables import (
    check_data_path,
    iter_chunks,
    locate_row,
    read_header,
    resolve_variables,
)


def _csv(tmp_path, text, name="d.csv"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_header_checks(tmp_path):
    h = read_header(_csv(tmp_path, "\ufeffa,b,regime\n1,2,c\n"))  # byte-order mark dropped
    assert h.columns == ("a", "b", "regime") and h.kind == "csv"
    with pytest.raises(InputError, match="a appear more than once"):
        read_header(_csv(tmp_path, "a,a,regime\n1,2,c\n"))
    with pytest.raises(InputError, match="column 1 of the header has no name"):
        read_header(_csv(tmp_path, ",a,regime\n0,1,c\n"))


def test_data_path_checks(tmp_path):
    with pytest.raises(InputError, match="no such file"):
        check_data_path(tmp_path / "missing.csv")
    with pytest.raises(InputError, match="unknown file type '.xls'.*save the sheet as .xlsx"):
        check_data_path(_csv(tmp_path, "a\n1\n", name="d.xls"))
    with pytest.raises(InputError, match=r"unknown file type '.json.gz'"):
        check_data_path(_csv(tmp_path, "a\n1\n", name="d.json.gz"))
    with pytest.raises(InputError, match="0 bytes"):
        check_data_path(_csv(tmp_path, "", name="e.csv"))


def test_resolve_variables(tmp_path):
    h1 = read_header(_csv(tmp_path, "a,b,regime,plate\n", name="1.csv"))
    h2 = read_header(_csv(tmp_path, "regime,b,a,plate\n", name="2.csv"))
    assert resolve_variables([h1, h2], "regime", ["plate"]) == ("a", "b")
    h3 = read_header(_csv(tmp_path, "regime,b,c\n", name="3.csv"))
    with pytest.raises(InputError, match="missing a; extra c"):
        resolve_variables([h1, h3], "regime", ["plate"])
    with pytest.raises(InputError, match="--regime-column"):
        resolve_variables([h1], "condition", [])
    with pytest.raises(InputError, match="--ignore-columns: column.* plat"):
        resolve_variables([h1], "regime", ["plat"])


def test_locate_row_counts_lines_as_an_editor(tmp_path):
    path = _csv(tmp_path, 'a,note,regime\n1,x,c\n\n2,"two\nlines",c\n3,y,c\n')
    h = read_header(path)
    assert [locate_row(h, i) for i in range(3)] == ["line 2", "line 4", "line 6"]
    frame = pd.read_csv(path)  # pandas skips the blank line too: same row count
    assert len(frame) == 3


def test_chunks_values_labels_and_bad_cells(tmp_path):
    path = _csv(tmp_path, "a,b,regime\n1,2,ctrl\n3,NA,kd\n5,inf, ctrl\n7,8,\n")
    h = read_header(path)
    chunks = list(iter_chunks(h, ["b", "a"], "regime", 3))
    assert [c.start for c in chunks] == [0, 3]
    c0 = chunks[0]
    np.testing.assert_array_equal(c0.values, [[2, 1], [np.nan, 3], [np.inf, 5]])
    assert [c0.labels[i] for i in c0.codes] == ["ctrl", "kd", "ctrl"]  # spaces stripped
    assert chunks[1].codes.tolist() == [-1]  # empty label is missing
    bad = _csv(tmp_path, "a,b,regime\n1,2,c\n3,4,c\n5,x7,c\n", name="bad.csv")
    with pytest.raises(InputError, match=r"line 4, column 'b': 'x7' is not a number"):
        list(iter_chunks(read_header(bad), ["a", "b"], "regime", 2))
    text = _csv(tmp_path, "a,plate,regime\n1,P1,c\n3,P2,c\n", name="text.csv")
    with pytest.raises(InputError, match="plate are not numeric.*--ignore-columns plate"):
        list(iter_chunks(read_header(text), ["a", "plate"], "regime", 10))
    ragged = _csv(tmp_path, "a,b,regime\n1,2,c\n3,4,c,9\n", name="ragged.csv")
    with pytest.raises(InputError, match="ragged.csv"):
        list(iter_chunks(read_header(ragged), ["a", "b"], "regime", 10))


def test_parquet_chunks(tmp_path):
    frame = pd.DataFrame({"x": [1.0, None, 3.0], "k": [1, 2, 3], "regime": [0, 1, None]})
    path = tmp_path / "d.parquet"
    frame.to_parquet(path)
    h = read_header(path)
    assert h.kind == "parquet" and h.columns == ("x", "k", "regime")
    (chunk,) = list(iter_chunks(h, ["k", "x"], "regime", 10))
    np.testing.assert_array_equal(chunk.values, [[1, 1], [2, np.nan], [3, 3]])
    assert [chunk.labels[i] if i >= 0 else None for i in chunk.codes] == ["0", "1", None]
    pd.DataFrame({"x": [1.0], "s": ["a"], "regime": ["c"]}).to_parquet(tmp_path / "s.parquet")
    with pytest.raises(InputError, match="--ignore-columns s"):
        list(iter_chunks(read_header(tmp_path / "s.parquet"), ["x", "s"], "regime", 10))


def test_bad_parquet_files(tmp_path):
    junk = tmp_path / "junk.parquet"
    junk.write_bytes(b"not a parquet file at all")
    with pytest.raises(InputError, match="junk.parquet: is not a readable Parquet file"):
        read_header(junk)
    empty = tmp_path / "empty.parquet"
    pd.DataFrame({"x": pd.Series([], dtype=float), "regime": pd.Series([], dtype=str)}) \
        .to_parquet(empty)
    assert list(iter_chunks(read_header(empty), ["x"], "regime", 10)) == []
