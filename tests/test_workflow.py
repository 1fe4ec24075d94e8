"""The learn workflow: recovery on simulated experiments, and reuse of the test store."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from simulated import in_memory

import pipeline.independence.gaussian as gaussian
import pipeline.intake.read as intake_read
from pipeline.analyses.scoring import score
from pipeline.errors import InputError
from pipeline.graphs.essential import essential_graph
from pipeline.independence.store import TestStore
from pipeline.simulation import simulate
from pipeline.workflow import learn, learn_from_moments


# Acceptance: 15 variables, expected degree 2, a control plus 7 single-target regimes of
# 3,000 samples. The truth is the interventional essential graph of the true DAG under the
# declared targets (Hauser & Buhlmann 2012); SHD as in Tsamardinos, Brown & Aliferis (2006).
@pytest.mark.parametrize("kind", ["knockdown", "shift"])
def test_recovery_on_simulated_experiments(kind):
    shds, recalls = [], []
    for seed in range(4):
        sim = simulate(nodes=15, degree=2.0, regimes=7, samples=3000, kind=kind, seed=seed)
        design, m = in_memory(sim)
        result = learn_from_moments(design, m, alpha=0.01)
        truth = essential_graph(sim.truth_dag, design.intervention_targets()).graph
        s = score(result.graph, truth)
        shds.append(s.shd)
        recalls.append(1.0 if s.orientation_recall is None else s.orientation_recall)
    assert np.mean(shds) <= 3, shds
    assert np.mean(recalls) >= 0.8, recalls


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("sim")
    simulate(nodes=8, degree=2.0, regimes=4, samples=400, kind="knockdown", seed=5).save(folder)
    return folder / "data.csv", folder / "regimes.csv"


class _Counter:
    """Counts the tests the Gaussian tester computes (wrapping its methods)."""

    def __init__(self, monkeypatch):
        self.n = 0
        ci, inv = gaussian.GaussianTester.ci, gaussian.GaussianTester.invariance

        def counted_ci(tester, x, y, cond):
            self.n += len(x)
            return ci(tester, x, y, cond)

        def counted_inv(tester, regime, x, cond):
            self.n += len(x)
            return inv(tester, regime, x, cond)

        monkeypatch.setattr(gaussian.GaussianTester, "ci", counted_ci)
        monkeypatch.setattr(gaussian.GaussianTester, "invariance", counted_inv)


def _edges(out):
    d = json.loads((out / "result.json").read_text())
    return d["edges"], d["regimes"], d["class_size"], d["settings"]


def test_rerun_reuses_the_store_and_parses_nothing(tmp_path, files, monkeypatch):
    data, regimes = files
    out = tmp_path / "out"
    counter = _Counter(monkeypatch)
    learn([data], regimes, out=out, alpha=0.05)
    cold_tests = counter.n
    with TestStore(out / "tests.sqlite") as store:
        stored_before = store.count_tests()
    assert cold_tests > 0 and stored_before > 0

    # second run at a new alpha: no data parsing at all, only tests never run before
    def boom(*args, **kwargs):
        raise AssertionError("a data file was parsed on a rerun")

    monkeypatch.setattr(intake_read, "read_inputs", boom)
    monkeypatch.setattr(pd, "read_csv", boom)
    counter.n = 0
    warm = learn([data], regimes, out=out, alpha=0.001)
    with TestStore(out / "tests.sqlite") as store:
        stored_after = store.count_tests()
    assert warm.run["from_store"]
    # every test the tester computed was new to the store
    assert counter.n == stored_after - stored_before
    assert warm.run["computed"] == counter.n
    assert warm.run["reused"] > 0
    monkeypatch.undo()

    # the same as a cold run at that alpha in a fresh folder
    counter = _Counter(monkeypatch)
    cold = tmp_path / "cold"
    learn([data], regimes, out=cold, alpha=0.001)
    assert _edges(out) == _edges(cold)
    assert counter.n >= warm.run["computed"]
    assert (out / "history").is_dir()


def test_changed_byte_gets_a_new_fingerprint(tmp_path, files, monkeypatch):
    data, regimes = files
    out = tmp_path / "out"
    first = learn([data], regimes, out=out)
    text = data.read_text()
    i = next(k for k in range(len(text) - 1, 0, -1) if text[k].isdigit() and text[k] != "7")
    changed = tmp_path / "data.csv"
    changed.write_text(text[:i] + "7" + text[i + 1:])  # one byte differs
    counter = _Counter(monkeypatch)
    second = learn([changed], regimes, out=out)
    assert second.settings["fingerprint"] != first.settings["fingerprint"]
    assert not second.run["from_store"]
    # nothing reused across fingerprints: it computes as much as a cold run of the file
    counter.n = 0
    learn([changed], regimes, out=tmp_path / "fresh")
    assert second.run["computed"] == counter.n
    with TestStore(out / "tests.sqlite") as store:
        assert len(store.fingerprints()) == 2
        assert store.integrity() == "ok"


def test_learn_from_moments_with_a_store(tmp_path):
    sim = simulate(nodes=6, degree=2.0, regimes=3, samples=300, kind="shift", seed=2)
    design, m = in_memory(sim)
    with TestStore(tmp_path / "tests.sqlite") as store:
        a = learn_from_moments(design, m, store=store, fingerprint="mem")
        b = learn_from_moments(design, m, store=store, fingerprint="mem")
    assert a.run["computed"] > 0 and b.run["computed"] == 0
    assert a.graph == b.graph
    assert a.record().to_dict()["edges"] == b.record().to_dict()["edges"]


@pytest.mark.parametrize("kwargs, match", [
    ({"alpha": 1.5}, "--alpha"),
    ({"alpha": "0.05"}, "--alpha"),
    ({"max_condition_size": -1}, "--max-condition-size"),
    ({"targets": "learned"}, "--targets"),
    ({"test": "spearman"}, "--test"),
    ({"collider_rule": "majorty"}, "nearest: majority"),
])
def test_bad_options_are_input_errors(files, kwargs, match):
    data, regimes = files
    with pytest.raises(InputError, match=match):
        learn([data], regimes, **kwargs)


def test_missing_files_are_input_errors(tmp_path, files):
    data, regimes = files
    with pytest.raises(InputError, match="no such file"):
        learn([tmp_path / "nope.csv"], regimes, out=tmp_path / "o")
    with pytest.raises(InputError, match="--regimes"):
        learn([data], None)
    assert not (tmp_path / "o").exists()  # no partial output


# A rerun from the store, in a process where the statistics, table and graph libraries
# cannot be imported (so neither can a data file be parsed): importing one fails the run.
_WITHOUT_LIBRARIES = """
import json, sys
for name in ("scipy", "pandas", "pyarrow", "networkx"):
    sys.modules[name] = None
from pipeline.cli import main
code = main(sys.argv[1:])
loaded = sorted(m for m, v in sys.modules.items() if v is not None
                and m.split(".")[0] in ("scipy", "pandas", "pyarrow", "networkx"))
print(json.dumps({"code": code, "loaded": loaded}))
"""


@pytest.fixture(scope="module")
def strong(tmp_path_factory):
    """Large effects: a new alpha needs no test the store lacks."""
    folder = tmp_path_factory.mktemp("strong")
    simulate(nodes=8, degree=2.0, regimes=4, samples=3000, kind="knockdown", seed=5,
             controls=2).save(folder)
    return folder / "data.csv", folder / "regimes.csv"


def test_a_rerun_from_the_store_imports_no_statistics_library(tmp_path, strong):
    import subprocess
    import sys

    data, regimes = strong
    out, cold = tmp_path / "out", tmp_path / "cold"
    learn([data], regimes, out=out, alpha=0.01)
    learn([data], regimes, out=cold, alpha=0.004)  # the reference: a cold run at that alpha
    args = ["learn", str(data), "--regimes", str(regimes), "--out", str(out), "--alpha", "0.004"]
    proc = subprocess.run([sys.executable, "-c", _WITHOUT_LIBRARIES, *args],
                          capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    report = json.loads(proc.stdout.strip().splitlines()[-1])
    assert report == {"code": 0, "loaded": []}, proc.stderr
    assert "tests computed: 0," in proc.stdout and "no data file parsed" in proc.stdout
    # the files are those of the cold run at that alpha, the input check included
    for name in ("check.json", "response.csv", "edges.csv", "removed.csv", "graph.graphml"):
        assert (out / name).read_text() == (cold / name).read_text(), name
    rerun, fresh = (json.loads((d / "result.json").read_text()) for d in (out, cold))
    assert rerun.pop("provenance")["command"].startswith("orienteer learn")
    fresh.pop("provenance")
    assert rerun == fresh
