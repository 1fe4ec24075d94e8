"""The sweep: equal to a cold learn at each alpha, from the store alone; its files."""

from __future__ import annotations

import io
import json
import math
import shutil

import pandas as pd
import pytest
from hypothesis import given
from hypothesis import strategies as st

import pipeline.intake.read as intake_read
import pipeline.intake.tables as intake_tables
from pipeline.analyses.sweep import parse_alphas, sweep
from pipeline.errors import InputError
from pipeline.results.sweep import CSV_COLUMNS, STABLE, SweepResult
from pipeline.simulation import simulate
from pipeline.workflow import learn

ALPHAS = [0.001, 0.01, 0.05, 0.2]


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("sim")
    simulate(nodes=9, degree=2.5, regimes=4, samples=120, kind="knockdown", strength=0.8,
             seed=8).save(folder)
    return folder / "data.csv", folder / "regimes.csv"


def _state(edges):
    return sorted((e.source, e.target, e.orientation, e.rule) for e in edges)


def test_sweep_equals_cold_learn_and_reads_no_data_file(tmp_path, files, monkeypatch):
    data, regimes = files
    own = tmp_path / "inputs"
    own.mkdir()
    shutil.copy(data, own / "data.csv")
    shutil.copy(regimes, own / "regimes.csv")
    out = tmp_path / "run"
    learn(own / "data.csv", own / "regimes.csv", out=out, alpha=0.01,
          max_condition_size=3, collider_rule="conservative")
    # no data file may be read: remove them and make the readers fail
    shutil.rmtree(own)

    def forbidden(*args, **kwargs):
        raise AssertionError("sweep read a data file")

    monkeypatch.setattr(intake_read, "read_inputs", forbidden)
    monkeypatch.setattr(intake_tables, "iter_chunks", forbidden)
    result = sweep(out, ALPHAS)
    monkeypatch.undo()
    assert result.alphas == ALPHAS
    assert result.settings["collider_rule"] == "conservative"
    for k, alpha in enumerate(ALPHAS):
        cold = learn(data, regimes, alpha=alpha, max_condition_size=3,
                     collider_rule="conservative")  # a fresh run, no store
        swept = result.states[k]
        expected = {}
        for e in cold.edge_records:
            x, y = sorted((e.source, e.target), key=list(cold.design.variables).index)
            code = 0 if e.orientation == "undirected" else (1 if e.source == x else -1)
            expected[(x, y)] = (code, e.rule)
        assert {pair: (c, r) for pair, (c, r, _) in swept.items()} == expected, alpha
        assert result.totals[k]["class_size"] == cold.class_size
        assert result.totals[k]["edges"] == len(cold.edge_records)
    # the levels were chosen so that the graph changes across them
    assert len({len(s) for s in result.states}) > 1


def test_sweep_files_and_report(tmp_path, files):
    data, regimes = files
    out = tmp_path / "run"
    first = learn(data, regimes, out=out, alpha=0.01)
    result = sweep(out, "0.01,0.05")
    frame = result.to_frame()
    p = len(first.design.variables)
    assert len(frame) == math.comb(p, 2) * 2  # every pair at every alpha
    at = frame[frame.alpha == 0.01]
    adjacent = at[at.adjacent]
    assert sorted(zip(adjacent.source, adjacent.target, adjacent.orientation, adjacent.rule,
                      strict=True)) == sorted((e.source, e.target, e.orientation, e.rule)
                                              for e in first.edge_records)
    # sweep.json round trip and the report section
    (out / "sweep.json").write_text(result.to_json())
    back = SweepResult.read(out / "sweep.json")
    assert back.states == result.states and back.alphas == result.alphas
    from pipeline.results.files import refresh_report

    html = refresh_report(out).read_text()
    assert "Stability across significance levels" in html and 'id="sweep"' in html
    assert result.counts()[STABLE] == sum(result.verdict(p) == STABLE for p in result.pairs())


def test_stable_column_matches_the_states(tmp_path, files):
    data, regimes = files
    out = tmp_path / "run"
    learn(data, regimes, out=out, alpha=0.01)
    result = sweep(out, [0.001, 0.2])
    frame = result.to_frame()
    key = frame["orientation"] + ":" + frame["source"] + ">" + frame["target"]
    per_pair = key.groupby([frame.x, frame.y]).nunique() == 1
    stable = frame.groupby(["x", "y"])["stable"].first()
    pd.testing.assert_series_equal(per_pair.sort_index(), stable.sort_index(),
                                   check_names=False)


def test_parse_alphas():
    assert parse_alphas(["0.05", "0.001,0.005", 0.01]) == [0.001, 0.005, 0.01, 0.05]
    assert parse_alphas("0.01, 0.01") == [0.01]
    for bad in (["0"], ["1.5"], ["x"], [], ["0.01,abc"]):
        with pytest.raises(InputError, match="--alpha"):
            parse_alphas(bad)


def test_folder_without_a_learn_run(tmp_path, files):
    with pytest.raises(InputError, match="no such folder"):
        sweep(tmp_path / "none", [0.01])
    with pytest.raises(InputError, match="result.json"):
        sweep(tmp_path, [0.01])
    data, regimes = files
    out = tmp_path / "run"
    learn(data, regimes, out=out)
    (out / "tests.sqlite").unlink()
    with pytest.raises(InputError, match="tests.sqlite"):
        sweep(out, [0.01])
    rec = json.loads((out / "result.json").read_text())
    rec["settings"].pop("fingerprint")
    (out / "result.json").write_text(json.dumps(rec))
    with pytest.raises(InputError, match="fingerprint"):
        sweep(out, [0.01])


_NAMES = st.sampled_from(["A", "B", "g,1", 'q"x', "Δ", "C 2"])


@st.composite
def sweeps(draw):
    names = draw(st.lists(_NAMES, min_size=2, max_size=5, unique=True))
    alphas = sorted(draw(st.lists(st.sampled_from([0.001, 0.01, 0.05, 0.2]), min_size=1,
                                  max_size=3, unique=True)))
    pairs = [(x, y) for i, x in enumerate(names) for y in names[i + 1:]]
    states = []
    for _ in alphas:
        chosen = draw(st.lists(st.sampled_from(pairs), unique=True))
        states.append({pair: (draw(st.sampled_from([1, -1, 0])),
                              draw(st.sampled_from(["intervention", "meek-1", "none"])),
                              draw(st.one_of(st.none(), st.floats(0, 1), st.just(1e-300))))
                       for pair in chosen})
    return SweepResult(alphas, names, {}, [], states, "run")


@given(sweeps())
def test_sweep_csv_is_the_table_as_pandas_writes_it(result):
    # reference: pandas' CSV writer over the same rows (the file was written by pandas before)
    reference = result.to_frame().to_csv(index=False, lineterminator="\n")
    assert result.to_csv() == reference
    back = pd.read_csv(io.StringIO(result.to_csv()), keep_default_na=False)
    assert list(back.columns) == list(CSV_COLUMNS)
    assert len(back) == len(result.alphas) * len(result.variables) * (len(result.variables)
                                                                       - 1) // 2


def test_sweep_imports_no_table_or_statistics_library(tmp_path, files):
    # a process where pandas, scipy, pyarrow and networkx cannot be imported: a sweep
    # whose tests are all in the store (a first sweep put them there) writes its files
    import subprocess
    import sys

    data, regimes = files
    out = tmp_path / "run"
    learn(data, regimes, out=out, alpha=0.01)
    first = sweep(out, [0.001, 0.05]).to_csv()
    script = ("import sys\n"
              "for name in ('scipy', 'pandas', 'pyarrow', 'networkx'):\n"
              "    sys.modules[name] = None\n"
              "from pipeline.cli import main\n"
              "sys.exit(main(sys.argv[1:]))\n")
    done = subprocess.run([sys.executable, "-c", script, "sweep", str(out), "--alpha",
                           "0.001", "0.05"], capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
    assert (out / "sweep.csv").read_text() == first
