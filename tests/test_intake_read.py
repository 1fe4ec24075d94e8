"""read_inputs: statistics against numpy on the raw rows, fingerprint, and every bad input.

Each bad input is checked twice: through `read_inputs` (InputError naming the culprit) and
through the command line (``python -m pipeline check``: exit 2, one ``error:`` line, no
traceback, input files untouched); the command-line half is skipped until the ``check``
command exists.
"""

import hashlib
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from pipeline.errors import InputError
from pipeline.intake.read import Intake, read_inputs
from pipeline.stats.fingerprint import fingerprint_inputs

ROOT = Path(__file__).resolve().parents[1]
REGIMES = "regime,targets,known\nctrl,,\nkd_X1,X1,\nkd_X2,X2,no\n"


def _table(seed=0, n=(40, 35, 30)):
    """A small data set: X1 -> X2 -> X3, X4 independent; ctrl, kd_X1, kd_X2."""
    rng = np.random.default_rng(seed)
    parts = []
    for name, m, shift in zip(("ctrl", "kd_X1", "kd_X2"), n, (0.0, -2.0, 0.0), strict=True):
        x1 = rng.standard_normal(m) + shift
        x2 = 0.8 * x1 + rng.standard_normal(m) + (-1.5 if name == "kd_X2" else 0.0)
        x3 = -0.5 * x2 + rng.standard_normal(m)
        x4 = rng.standard_normal(m) * 2 + 10
        parts.append(pd.DataFrame({"X1": x1, "X2": x2, "X3": x3, "X4": x4, "regime": name}))
    return pd.concat(parts, ignore_index=True)


def _files(tmp_path, files, regimes=REGIMES):
    paths = []
    for name, content in files.items():
        path = tmp_path / name
        if isinstance(content, pd.DataFrame):
            if name.endswith(".parquet"):
                content.to_parquet(path, index=False)
            else:
                content.to_csv(path, index=False)
        else:
            path.write_bytes(content.encode("utf-8") if isinstance(content, str) else content)
        paths.append(path)
    reg = tmp_path / "regimes.csv"
    reg.write_text(regimes, encoding="utf-8")
    return paths, reg


def _check_moments(intake: Intake, frame: pd.DataFrame, variables):
    m = intake.moments
    assert m.variables == tuple(variables)
    for k, name in enumerate(m.regimes):
        rows = frame.loc[frame["regime"] == name, list(variables)].to_numpy(float)
        assert m.count[k] == len(rows)
        np.testing.assert_allclose(m.mean[k], rows.mean(axis=0), rtol=1e-10)  # numpy two-pass
        cov = np.cov(rows, rowvar=False)
        np.testing.assert_allclose(m.scatter[k] / (len(rows) - 1), cov, rtol=1e-10,
                                   atol=1e-12 * np.abs(cov).max())


def test_csv_and_parquet_files_read_as_one_table(tmp_path):
    frame = _table()
    a = frame.iloc[:50].copy()
    a["plate"] = "P1"
    b = frame.iloc[50:80][["regime", "X3", "X1", "X4", "X2"]]  # another column order
    c = frame.iloc[80:]
    paths, reg = _files(tmp_path, {"a.csv": a, "b.csv": b, "c.parquet": c})
    intake = read_inputs(paths, reg, ignore_columns=["plate"], chunk_rows=7)
    assert intake.design.variables == ("X1", "X2", "X3", "X4")
    assert [r.name for r in intake.design.regimes] == ["ctrl", "kd_X1", "kd_X2"]
    assert [r.samples for r in intake.design.regimes] == [40, 35, 30]
    assert [r.reference for r in intake.design.regimes] == [True, False, False]
    assert intake.design.regime("kd_X2").known is False
    _check_moments(intake, pd.concat([a, b, c]), intake.design.variables)
    assert intake.dropped_rows == 0 and intake.warnings == []
    assert "kd_X1" in intake.summary()


def test_fingerprint_tracks_bytes_and_options_not_names(tmp_path):
    paths, reg = _files(tmp_path, {"d.csv": _table()})
    fp = read_inputs(paths, reg).fingerprint
    assert fp == fingerprint_inputs(paths, reg) and len(fp) == 64
    assert fp != fingerprint_inputs(paths, reg, test="rank")
    assert fp != fingerprint_inputs(paths, reg, drop_missing=True)
    moved = tmp_path / "renamed.csv"
    moved.write_bytes(paths[0].read_bytes())
    assert fingerprint_inputs([moved], reg) == fp
    moved.write_bytes(paths[0].read_bytes().replace(b"ctrl", b"ctrL", 1))
    assert fingerprint_inputs([moved], reg) != fp


def test_background_hashing_gives_the_same_fingerprint(tmp_path):
    from pipeline.stats import fingerprint as fp_module

    paths, reg = _files(tmp_path, {"d.csv": _table()})
    plain = fingerprint_inputs(paths, reg)
    fp_module.FILE_HASHES.clear()
    fp_module.hash_in_background([*paths, reg])
    assert fingerprint_inputs(paths, reg) == plain
    # each digest is the SHA-256 of the file's bytes (hashlib is the reference)
    key = fp_module.file_key(paths[0])
    assert fp_module.FILE_HASHES[key] == hashlib.sha256(paths[0].read_bytes()).hexdigest()
    assert not fp_module._PENDING
    # a file changed after its hashing began is hashed again
    fp_module.FILE_HASHES.clear()
    fp_module.hash_in_background(paths)
    paths[0].write_bytes(paths[0].read_bytes().replace(b"ctrl", b"ctrL", 1) + b"\n")
    changed = fingerprint_inputs(paths, reg)
    fp_module.FILE_HASHES.clear()
    assert changed != plain and changed == fingerprint_inputs(paths, reg)


def test_drop_missing_drops_and_counts(tmp_path):
    frame = _table()
    frame.loc[3, "X2"] = np.nan
    frame.loc[5, "X3"] = np.inf
    frame.loc[7, ["X2", "X3"]] = np.nan
    paths, reg = _files(tmp_path, {"d.csv": frame})
    with pytest.raises(InputError) as info:
        read_inputs(paths, reg, chunk_rows=4)
    msg = str(info.value)
    assert "X2 2" in msg and "X3 2" in msg and "--drop-missing" in msg and "line 5" in msg
    intake = read_inputs(paths, reg, drop_missing=True, chunk_rows=4)
    assert intake.dropped_rows == 3
    assert any("dropped 3 rows" in w for w in intake.warnings)
    _check_moments(intake, frame.drop(index=[3, 5, 7]), ("X1", "X2", "X3", "X4"))


def test_rank_statistics_are_within_regime(tmp_path):
    frame = _table()
    frame["X4"] = np.exp(frame["X4"] / 3)  # a monotone distortion
    paths, reg = _files(tmp_path, {"d.csv": frame})
    intake = read_inputs(paths, reg, test="rank", chunk_rows=9)
    variables = ["X1", "X2", "X3", "X4"]
    m = intake.moments
    for k, name in enumerate(m.regimes):
        rows = frame.loc[frame["regime"] == name, variables].to_numpy(float)
        # CI tests: correlations of the normal scores of the ranks within the regime
        # (Phi^-1(rank / (n + 1)), scipy.stats; Klaassen & Wellner 1997), never pooled
        scores = stats.norm.ppf(stats.rankdata(rows, axis=0) / (len(rows) + 1))
        np.testing.assert_allclose(m.ci_scatter[k] / (len(rows) - 1),
                                   np.corrcoef(scores, rowvar=False), atol=1e-12)
    # invariance tests: normal scores in the reference's distribution; the reference's own
    # rows get Phi^-1(rank / (n_ref + 1)) of their ranks among themselves (scipy)
    ref = frame.loc[frame["regime"] == "ctrl", variables].to_numpy(float)
    scores = stats.norm.ppf(stats.rankdata(ref, axis=0) / (len(ref) + 1))
    k = m.regimes.index("ctrl")
    np.testing.assert_allclose(m.mean[k], scores.mean(axis=0), atol=1e-12)
    dev = scores - scores.mean(axis=0)
    np.testing.assert_allclose(m.scatter[k], dev.T @ dev, atol=1e-9)
    assert m.ci_variance == 1.0


def test_warnings_few_samples_and_knockout(tmp_path):
    frame = _table(n=(40, 35, 6))
    frame.loc[frame["regime"] == "kd_X1", "X1"] = 0.0  # complete knockout
    paths, reg = _files(tmp_path, {"d.csv": frame})
    intake = read_inputs(paths, reg)
    text = " ".join(intake.warnings)
    assert "'kd_X2' has only 6 samples" in text
    assert "'X1' is constant within regime 'kd_X1'" in text
    assert intake.design.warnings == tuple(intake.warnings)


def test_reference_option(tmp_path):
    paths, reg = _files(tmp_path, {"d.csv": _table()},
                        regimes="regime,targets\nctrl,X4\nkd_X1,X1\nkd_X2,X2\n")
    intake = read_inputs(paths, reg, reference="ctrl")
    assert [r.reference for r in intake.design.regimes] == [True, False, False]


# --------------------------------------------------------------------------- bad inputs
def _bad_cases():
    t = _table()
    good = t.to_csv(index=False)
    const = t.assign(X4=3.0)
    collinear = t.assign(X4=2 * t["X2"] - 1)
    dependent = t.assign(X4=t["X1"] + t["X3"])
    text = t.assign(plate="P7")
    bad_cell = good.splitlines()
    row = bad_cell[12].split(",")
    row[2] = "abc"
    bad_cell[12] = ",".join(row)
    missing = t.copy()
    missing.loc[[2, 9], "X3"] = np.nan
    cases = {
        # name: (files, regimes, options, substrings the message must contain)
        "empty file": ({"d.csv": ""}, REGIMES, {}, ["d.csv", "0 bytes"]),
        "header only": ({"d.csv": "X1,X2,X3,X4,regime\n"}, REGIMES, {},
                        ["d.csv", "no data rows"]),
        "non-numeric cell": ({"d.csv": "\n".join(bad_cell) + "\n"}, REGIMES, {},
                             ["d.csv", "line 13", "column 'X3'", "'abc'"]),
        "missing values": ({"d.csv": missing}, REGIMES, {}, ["X3 2", "--drop-missing"]),
        "duplicate columns": ({"d.csv": good.replace("X3", "X2", 1)}, REGIMES, {},
                              ["X2", "more than once"]),
        "regime without row": ({"d.csv": t}, "regime,targets\nctrl,\nkd_X1,X1\n", {},
                               ["kd_X2", "no row in the regimes file"]),
        "row without data": ({"d.csv": t}, REGIMES + "kd_X9,X4,\n", {},
                             ["kd_X9", "no rows in the data"]),
        "unknown target": ({"d.csv": t}, REGIMES + "kd_Y,X11,\n", {},
                           ["X11", "kd_Y", "nearest"]),
        "no regime column": ({"d.csv": t.rename(columns={"regime": "condition"})}, REGIMES, {},
                             ["'regime'", "condition", "--regime-column"]),
        "no targets column": ({"d.csv": t}, "regime,target\nctrl,\n", {}, ["targets"]),
        "bad known": ({"d.csv": t}, "regime,targets,known\nctrl,,perhaps\n", {},
                      ["perhaps", "yes or no"]),
        "duplicate regime": ({"d.csv": t}, REGIMES + "ctrl,,\n", {}, ["ctrl", "appears again"]),
        "no reference": ({"d.csv": t}, "regime,targets\nctrl,X4\nkd_X1,X1\nkd_X2,X2\n", {},
                         ["--reference"]),
        "unknown reference": ({"d.csv": t}, REGIMES, {"reference": "crtl"},
                              ["crtl", "ctrl"]),
        "constant column": ({"d.csv": const}, REGIMES, {}, ["X4", "constant", "--ignore-columns"]),
        "collinear pair": ({"d.csv": collinear}, REGIMES, {},
                           ["X2 and X4", "collinear", "--ignore-columns"]),
        "dependent set": ({"d.csv": dependent}, REGIMES, {},
                          ["X1, X3, X4", "linearly dependent"]),
        "text column": ({"d.csv": text}, REGIMES, {}, ["plate", "--ignore-columns plate"]),
        "unknown ignored": ({"d.csv": t}, REGIMES, {"ignore_columns": ["plates"]},
                            ["plates", "--ignore-columns"]),
        "differing files": ({"a.csv": t, "b.csv": t.rename(columns={"X4": "X5"})}, REGIMES, {},
                            ["b.csv", "missing X4", "extra X5"]),
        "unknown extension": ({"d.json": good}, REGIMES, {}, ["d.json", ".json"]),
        "not a workbook": ({"d.xlsx": good}, REGIMES, {}, ["d.xlsx", "not a readable Excel"]),
    }
    return cases


CASES = _bad_cases()


@pytest.mark.parametrize("name", sorted(CASES))
def test_bad_input_names_the_culprit(tmp_path, name):
    files, regimes, options, words = CASES[name]
    paths, reg = _files(tmp_path, files, regimes)
    with pytest.raises(InputError) as info:
        read_inputs(paths, reg, **options)
    for word in words:
        assert word in str(info.value), (word, str(info.value))


def test_missing_data_file(tmp_path):
    _, reg = _files(tmp_path, {})
    with pytest.raises(InputError, match="nope.csv: no such file"):
        read_inputs([tmp_path / "nope.csv"], reg)


def _digest(paths):
    return {p: hashlib.sha256(p.read_bytes()).hexdigest() for p in paths}


_NO_CHECK = not (ROOT / "pipeline" / "commands" / "check.py").exists()


def _argv(paths, reg, options):
    argv = ["check", *map(str, paths), "--regimes", str(reg)]
    if "reference" in options:
        argv += ["--reference", options["reference"]]
    if "ignore_columns" in options:
        argv += ["--ignore-columns", ",".join(options["ignore_columns"])]
    return argv


@pytest.mark.skipif(_NO_CHECK, reason="the check command is not built yet")
@pytest.mark.parametrize("name", sorted(CASES))
def test_bad_input_through_the_command_line(tmp_path, monkeypatch, capsys, name):
    from pipeline.cli import main

    files, regimes, options, words = CASES[name]
    paths, reg = _files(tmp_path, files, regimes)
    before = _digest([*paths, reg])
    monkeypatch.chdir(tmp_path)
    monkeypatch.setenv("ORIENTEER_LOG_DIR", str(tmp_path / "logs"))
    code = main(_argv(paths, reg, options))
    out, err = capsys.readouterr()
    assert code == 2, err
    assert err.startswith("error:") and err.count("\n") == 1
    assert "Traceback" not in out + err
    for word in words:
        assert word in err, (word, err)
    assert _digest([*paths, reg]) == before


@pytest.mark.slow
@pytest.mark.skipif(_NO_CHECK, reason="the check command is not built yet")
@pytest.mark.parametrize("name", ["non-numeric cell", "missing values", "unknown target"])
def test_bad_input_in_a_real_process(tmp_path, name):
    files, regimes, options, words = CASES[name]
    paths, reg = _files(tmp_path, files, regimes)
    before = _digest([*paths, reg])
    env = {**os.environ, "ORIENTEER_LOG_DIR": str(tmp_path / "logs")}
    done = subprocess.run([sys.executable, "-m", "pipeline", *_argv(paths, reg, options)],
                          cwd=tmp_path, capture_output=True, text=True, env=env, timeout=120)
    assert done.returncode == 2, done.stderr
    assert done.stderr.startswith("error:")
    assert "Traceback" not in done.stderr + done.stdout
    for word in words:
        assert word in done.stderr, (word, done.stderr)
    assert _digest([*paths, reg]) == before


def test_header_only_parquet_and_non_utf8_csv(tmp_path):
    frame = _table().iloc[:0]
    paths, reg = _files(tmp_path, {"d.parquet": frame})
    with pytest.raises(InputError, match="d.parquet: has a header but no data rows"):
        read_inputs(paths, reg)
    paths, reg = _files(tmp_path, {"l.csv": "X1,X2,regime\n1,2,ctr\xe9\n".encode("latin-1")})
    with pytest.raises(InputError, match="l.csv: is not UTF-8"):
        read_inputs(paths, reg)


def test_too_few_samples_for_the_variables(tmp_path):
    frame = _table(n=(2, 2, 2))
    paths, reg = _files(tmp_path, {"d.csv": frame})
    with pytest.raises(InputError, match="too few samples: 6 rows in 3 regimes"):
        read_inputs(paths, reg)


@pytest.mark.skipif(_NO_CHECK, reason="the check command is not built yet")
def test_missing_data_file_through_the_command_line(tmp_path, monkeypatch, capsys):
    from pipeline.cli import main

    _, reg = _files(tmp_path, {})
    monkeypatch.chdir(tmp_path)
    code = main(["check", str(tmp_path / "nope.csv"), "--regimes", str(reg)])
    err = capsys.readouterr().err
    assert code == 2 and err.startswith("error:") and "nope.csv" in err


def test_byte_order_mark_in_a_data_file(tmp_path):
    # a spreadsheet's UTF-8 byte-order mark before the header is not part of a column name
    (tmp_path / "d.csv").write_bytes("\ufeffregime,a,b\nctrl,1,2\nctrl,2,3.5\nctrl,3,1\n"
                                     "kd,0,2\nkd,1,1\nkd,0,0.5\n".encode())
    (tmp_path / "r.csv").write_text("regime,targets\nctrl,\nkd,a\n")
    intake = read_inputs([tmp_path / "d.csv"], tmp_path / "r.csv")
    assert intake.design.variables == ("a", "b")
    assert np.allclose(intake.moments.mean[intake.moments.index("ctrl")], [2.0, 13 / 6])
