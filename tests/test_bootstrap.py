"""Bootstrap frequencies: reproducible, independent of the jobs, and higher on true edges."""

from __future__ import annotations

import itertools
import json

import numpy as np
import pandas as pd
import pytest

from pipeline.analyses.bootstrap import bootstrap
from pipeline.errors import InputError
from pipeline.independence.store import TestStore
from pipeline.results.bootstrap import BootstrapResult
from pipeline.results.schema import EdgeRecord
from pipeline.simulation import simulate
from pipeline.workflow import learn


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("sim")
    simulate(nodes=8, degree=2.0, regimes=4, samples=150, kind="knockdown", strength=0.7,
             seed=5).save(folder)
    return folder / "data.csv", folder / "regimes.csv"


def _frequencies(out):
    edges = json.loads((out / "result.json").read_text())["edges"]
    return [(e["source"], e["target"], e["bootstrap_adjacency"], e["bootstrap_orientation"])
            for e in edges]


@pytest.mark.slow
def test_same_seed_same_frequencies_whatever_the_jobs(tmp_path, files):
    data, regimes = files
    runs = []
    for name, jobs in (("a", 1), ("b", 2), ("c", 1)):
        learn(data, regimes, out=tmp_path / name, alpha=0.05, bootstrap=12, seed=3, jobs=jobs)
        runs.append(tmp_path / name)
    first = _frequencies(runs[0])
    assert all(a is not None and 0 <= a <= 1 for _, _, a, _ in first)
    for other in runs[1:]:
        assert _frequencies(other) == first
        assert (other / "bootstrap.csv").read_bytes() == (runs[0] / "bootstrap.csv").read_bytes()
    # another seed draws other resamples (the table differs somewhere)
    learn(data, regimes, out=tmp_path / "d", alpha=0.05, bootstrap=12, seed=4)
    assert (tmp_path / "d" / "bootstrap.csv").read_bytes() != \
        (runs[0] / "bootstrap.csv").read_bytes()


def test_files_settings_and_store(tmp_path, files):
    data, regimes = files
    plain = learn(data, regimes, out=tmp_path / "plain", alpha=0.05)
    boot = learn(data, regimes, out=tmp_path / "boot", alpha=0.05, bootstrap=5)
    # the seed drawn is recorded, and repeats the run
    seed = boot.settings["seed"]
    assert boot.settings["bootstrap"] == 5 and isinstance(seed, int)
    again = learn(data, regimes, alpha=0.05, bootstrap=5, seed=seed)
    assert [(e.bootstrap_adjacency, e.bootstrap_orientation) for e in again.edge_records] == \
        [(e.bootstrap_adjacency, e.bootstrap_orientation) for e in boot.edge_records]
    # the same graph; frequencies in result.json, edges.csv, bootstrap.csv and the report
    assert [(e.source, e.target, e.orientation) for e in plain.edge_records] == \
        [(e.source, e.target, e.orientation) for e in boot.edge_records]
    edges = pd.read_csv(tmp_path / "boot" / "edges.csv")
    assert edges["bootstrap_adjacency"].between(0, 1).all()
    assert edges["bootstrap_orientation"].between(0, 1).all()
    assert pd.read_csv(tmp_path / "plain" / "edges.csv")["bootstrap_adjacency"].isna().all()
    pairs = pd.read_csv(tmp_path / "boot" / "bootstrap.csv", keep_default_na=False)
    assert (pairs["resamples"] == 5).all()
    listed = {frozenset(pair) for pair in zip(pairs.x, pairs.y, strict=True)}
    assert {frozenset(pair) for pair in zip(edges.source, edges.target, strict=True)} <= listed
    report = (tmp_path / "boot" / "report.html").read_text()
    assert "bootstrap adjacency" in report and "Bootstrap: edge stability" in report
    assert not (tmp_path / "plain" / "bootstrap.csv").exists()
    # resamples write no test into the store
    with TestStore(tmp_path / "plain" / "tests.sqlite") as a, \
            TestStore(tmp_path / "boot" / "tests.sqlite") as b:
        assert a.count_tests() == b.count_tests() > 0


def test_true_edges_are_more_stable_than_false_ones(tmp_path):
    # Friedman, Goldszmidt & Wyner (1999): edges found in most resamples are the ones to
    # trust. On simulated experiments with little data, the true edges of the result have a
    # higher mean adjacency frequency than its false ones, and true pairs than other pairs.
    true_found, false_found, true_pairs, other_pairs = [], [], [], []
    for seed in range(3):
        folder = tmp_path / str(seed)
        sim = simulate(nodes=10, degree=2.5, regimes=3, samples=60, strength=0.6, seed=seed)
        sim.save(folder)
        result = learn(folder / "data.csv", folder / "regimes.csv", alpha=0.05, bootstrap=20,
                       seed=1)
        truth = {frozenset(e) for e in sim.truth_dag.edges()}
        for e in result.edge_records:
            (true_found if frozenset((e.source, e.target)) in truth
             else false_found).append(e.bootstrap_adjacency)
        p = result.bootstrap.pairs
        freq = {frozenset((x, y)): a for x, y, a in zip(p.x, p.y, p.adjacency, strict=True)}
        for pair in itertools.combinations(sim.model.variables, 2):
            (true_pairs if frozenset(pair) in truth else other_pairs).append(
                freq.get(frozenset(pair), 0.0))
    assert false_found, "the check needs some false edges in the results"
    assert np.mean(true_found) > np.mean(false_found)
    assert np.mean(true_pairs) > np.mean(other_pairs)


def test_other_formats_are_read_as_the_intake_reads_them(tmp_path, files):
    # the same table as tab-separated text: the same rows, so the same resamples
    data, regimes = files
    tsv = tmp_path / "data.tsv"
    pd.read_csv(data).to_csv(tsv, sep="\t", index=False)
    a = learn(data, regimes, alpha=0.05, bootstrap=4, seed=6)
    b = learn(tsv, regimes, alpha=0.05, bootstrap=4, seed=6)
    assert [(e.source, e.target, e.bootstrap_adjacency, e.bootstrap_orientation)
            for e in a.edge_records] == \
        [(e.source, e.target, e.bootstrap_adjacency, e.bootstrap_orientation)
         for e in b.edge_records]


def test_progress_over_the_resamples(files):
    data, regimes = files
    seen = []
    learn(data, regimes, alpha=0.05, bootstrap=3, seed=2,
          progress=lambda label, done, total: seen.append((label, done, total)))
    steps = [(d, t) for label, d, t in seen if label == "bootstrap: relearning"]
    assert steps == [(0, 3), (1, 3), (2, 3), (3, 3)]
    assert any(label == "bootstrap: reading data" and d == t for label, d, t in seen)


def test_frequencies_from_counts():
    # hand-made counts over A, B, C of 10 resamples: A-B adjacent 8 times (A -> B 6, B -> A 1,
    # undirected 1); B-C 3 times, all undirected
    counts = np.zeros((4, 3, 3), dtype=int)
    counts[:, 0, 1] = [8, 6, 1, 1]
    counts[:, 1, 2] = [3, 0, 0, 3]
    edges = [EdgeRecord("B", "A", "directed"), EdgeRecord("A", "C", "undirected")]
    r = BootstrapResult.from_counts(["A", "B", "C"], counts, resamples=10, seed=1, edges=edges)
    assert r.frequencies("B", "A", "directed") == (0.8, 0.1)
    assert r.frequencies("A", "B", "directed") == (0.8, 0.6)
    assert r.frequencies("B", "C", "undirected") == (0.3, 0.3)
    assert r.frequencies("A", "C", "undirected") == (0.0, 0.0)  # never adjacent
    assert list(r.pairs.result) == ["B -> A", "A -- C", ""]
    weak, strong = r.unstable()
    assert list(weak.x) == ["A"] and list(strong.x) == []


def test_bootstrap_csv_round_trip(tmp_path):
    counts = np.zeros((4, 2, 2), dtype=int)
    counts[:, 0, 1] = [1, 1, 0, 0]  # adjacent in 1 of 4: listed as weak in the section
    r = BootstrapResult.from_counts(["<b>", "y"], counts, resamples=4, seed=9,
                                    edges=[EdgeRecord("<b>", "y", "directed")])
    (tmp_path / "bootstrap.csv").write_text(r.to_csv())
    back = BootstrapResult.read(tmp_path / "bootstrap.csv")
    assert (back.resamples, back.seed) == (4, 9)
    pd.testing.assert_frame_equal(back.pairs, r.pairs, check_dtype=False)
    section = back.html_section()
    assert "&lt;b&gt; &ndash; y" in section and "<b>" not in section  # escaped


def test_bad_options(files):
    data, regimes = files
    with pytest.raises(InputError, match="--bootstrap"):
        learn(data, regimes, bootstrap=-1)
    with pytest.raises(InputError, match="--jobs"):
        learn(data, regimes, bootstrap=2, jobs=0)
    with pytest.raises(InputError, match="--seed"):
        learn(data, regimes, bootstrap=2, seed=-5)
    from pipeline.design import Design, Regime
    from pipeline.stats.moments import Moments

    d = Design(("a",), (Regime("r", reference=True, samples=2),))
    m = Moments(("a",), ("r",), np.array([2]), np.zeros((1, 1)), np.ones((1, 1, 1)))
    with pytest.raises(InputError, match="--bootstrap 0"):
        bootstrap([data], d, m, [], resamples=0)
