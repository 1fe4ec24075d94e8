"""The test store: sufficient statistics and test results kept in SQLite by input fingerprint."""

from __future__ import annotations

import multiprocessing as mp
import sqlite3

import numpy as np
import pytest

from pipeline.design import Design, Regime
from pipeline.independence.base import TestResults
from pipeline.independence.cached import CachedTester
from pipeline.independence.store import TestStore
from pipeline.stats.moments import Moments


class CountingTester:
    """A stand-in tester whose answers are a fixed function of the (unordered) test."""

    def __init__(self, k: int = 3, leave_out: int | None = None) -> None:
        self.k = k
        self.leave_out = leave_out
        self.asked = 0
        self.batches = 0

    def _answer(self, a, b, cond):
        a = np.asarray(a, float)
        b = np.asarray(b, float)
        s = np.asarray(cond, float).reshape(len(a), -1).sum(axis=1)
        stat = a + b + 0.125 * s + 1e-3 * a * b
        left = None
        if self.leave_out is not None:
            left = np.zeros((len(a), self.k), dtype=bool)
            left[:, self.leave_out] = True
        self.asked += len(a)
        self.batches += 1
        return TestResults(stat, 1.0 / (1.0 + stat), left)

    def ci(self, x, y, cond):
        return self._answer(x, y, cond)

    def invariance(self, regime, x, cond):
        return self._answer(x, np.full(len(x), len(regime)), cond)


def _design():
    return Design(("A", "B", "C", "D"),
                  (Regime("ctrl", (), True, True, 10), Regime("kd", ("A",), True, False, 12)),
                  ("a warning",))


def test_inputs_round_trip(tmp_path):
    rng = np.random.default_rng(0)
    samples = {"ctrl": rng.normal(size=(10, 4)), "kd": rng.normal(size=(12, 4))}
    m = Moments.from_samples(samples, ("A", "B", "C", "D"))
    with TestStore(tmp_path / "tests.sqlite") as store:
        assert not store.has_inputs("fp1")
        store.put_inputs("fp1", _design(), m, ["w1"], dropped_rows=3)
        got = store.get_inputs("fp1")
        assert store.get_inputs("other") is None
    assert got.design == _design()
    assert got.warnings == ["w1"] and got.dropped_rows == 3
    # bit-identical arrays (np.save keeps float64 exactly)
    np.testing.assert_array_equal(got.moments.scatter, m.scatter)
    np.testing.assert_array_equal(got.moments.mean, m.mean)
    np.testing.assert_array_equal(got.moments.count, m.count)
    np.testing.assert_array_equal(got.moments.m3, m.m3)
    np.testing.assert_array_equal(got.moments.m4, m.m4)
    assert got.moments.ci_scatter is None and got.moments.ci_variance == 1.0
    assert got.moments.variables == m.variables and got.moments.regimes == m.regimes
    # the rank variant's extra matrices travel too
    from dataclasses import replace

    ranked = replace(m, ci_scatter=m.scatter * 0.5, ci_variance=1.25)
    with TestStore(tmp_path / "tests.sqlite") as store:
        store.put_inputs("fp2", _design(), ranked)
        back = store.get_inputs("fp2").moments
    np.testing.assert_array_equal(back.ci_scatter, ranked.ci_scatter)
    assert back.ci_variance == 1.25


def test_cached_ci_computes_only_missing(tmp_path):
    inner = CountingTester()
    store = TestStore(tmp_path / "tests.sqlite")
    t = CachedTester(inner, store, "fp", n_regimes=3)
    x = np.array([0, 1, 2])
    y = np.array([1, 2, 3])
    cond = np.array([[2], [3], [0]])
    first = t.ci(x, y, cond)
    assert inner.asked == 3
    # same tests with the pair swapped: all answered from the store, identical values
    again = t.ci(y, x, cond)
    assert inner.asked == 3 and t.reused == 3
    np.testing.assert_array_equal(first.statistic, again.statistic)
    np.testing.assert_array_equal(first.pvalue, again.pvalue)
    # a batch with one new test computes that one only
    t.ci(np.array([0, 0]), np.array([1, 3]), np.array([[2], [1]]))
    assert inner.asked == 4 and t.computed == 4 and t.calls == 2
    # conditioning sets are sets: order does not matter
    t.ci(np.array([0]), np.array([3]), np.array([[2, 1]]))
    t.ci(np.array([3]), np.array([0]), np.array([[1, 2]]))
    assert inner.asked == 5
    # results are written when the next level starts (or on flush): the four of size 1
    # are in the file, the one of size 2 waits
    assert store.count_tests("fp") == 4
    t.ci(np.array([0]), np.array([1]), np.zeros((1, 0), int))
    assert store.count_tests("fp") == 5
    t.flush()
    assert store.count_tests("fp") == 6
    store.close()


def test_other_fingerprint_never_reuses(tmp_path):
    store = TestStore(tmp_path / "tests.sqlite")
    a, b = CountingTester(), CountingTester()
    for tester, fp in ((a, "fp-a"), (b, "fp-b")):
        with CachedTester(tester, store, fp, 3) as t:
            t.ci(np.array([0]), np.array([1]), np.zeros((1, 0), int))
    assert a.asked == 1 and b.asked == 1
    assert store.count_tests() == 2
    store.close()


def test_invariance_and_left_out_round_trip(tmp_path):
    store = TestStore(tmp_path / "tests.sqlite")
    inner = CountingTester(k=3, leave_out=2)
    t = CachedTester(inner, store, "fp", 3)
    x = np.array([0, 1])
    cond = np.zeros((2, 0), int)
    r1 = t.invariance("kd", x, cond)
    t.flush()
    # a fresh wrapper without an inner tester answers from the file alone
    r2 = CachedTester(None, TestStore(tmp_path / "tests.sqlite"), "fp", 3).invariance("kd", x, cond)
    np.testing.assert_array_equal(r1.statistic, r2.statistic)
    np.testing.assert_array_equal(r1.left_out, r2.left_out)
    assert r2.left_out[:, 2].all() and not r2.left_out[:, :2].any()
    # invariance keys include the regime
    t.invariance("other", x, cond)
    assert inner.asked == 4
    with pytest.raises(LookupError):
        CachedTester(None, store, "fp", 3).invariance("never", x, cond)
    store.close()


def test_inner_tester_is_built_only_when_a_test_is_missing(tmp_path):
    built = []

    def build():
        built.append(CountingTester())
        return built[-1]

    x, cond = np.array([0, 1]), np.zeros((2, 0), int)
    with TestStore(tmp_path / "tests.sqlite") as store:
        with CachedTester(build, store, "fp", 3) as t:
            first = t.invariance("kd", x, cond)
            t.invariance("kd", np.array([2]), np.zeros((1, 0), int))
        assert len(built) == 1 and built[0].asked == 3  # built once, for the first miss
        # every test stored: the builder is never called
        again = CachedTester(build, store, "fp", 3).invariance("kd", x, cond)
        assert len(built) == 1
    np.testing.assert_array_equal(first.pvalue, again.pvalue)


def test_named_numbers_round_trip_bit_for_bit(tmp_path):
    rng = np.random.default_rng(1)
    arrays = {"p": rng.random((3, 4)), "mask": rng.random((3, 4)) > 0.5,
              "signed": np.array([-0.0, np.nan, np.inf, 5e-324])}
    with TestStore(tmp_path / "tests.sqlite") as store:
        fid = store.fingerprint_id("fp")
        store.put_numbers(fid, "one", arrays)
        store.put_numbers(fid, "one", {"p": np.zeros((3, 4))})  # first write wins
        other = store.fingerprint_id("other")
        assert store.load_numbers(other) == {}
        got = store.load_numbers(fid)["one"]
    assert set(got) == set(arrays)
    for k, a in arrays.items():
        assert got[k].dtype == a.dtype and got[k].shape == a.shape
        assert got[k].tobytes() == a.tobytes()  # -0.0, NaN and subnormals kept


def _writer(path: str, offset: int, n_batches: int, barrier=None) -> None:
    store = TestStore(path, timeout=120)
    t = CachedTester(CountingTester(), store, "fp", 3)
    t.FLUSH_ROWS = 50  # one transaction per batch
    if barrier is not None:
        barrier.wait(60)  # both processes write at the same time
    for b in range(n_batches):
        x = np.arange(200) + offset
        y = np.full(200, 100_000 + b)
        # half of each batch overlaps the other writer's keys
        x[:100] = np.arange(100)
        t.ci(x, y, np.zeros((200, 1), int) + b)
    t.flush()
    store.close()


@pytest.mark.slow
def test_two_processes_writing_one_store(tmp_path):
    path = str(tmp_path / "tests.sqlite")
    TestStore(path).close()
    ctx = mp.get_context("spawn")
    barrier = ctx.Barrier(2)
    procs = [ctx.Process(target=_writer, args=(path, off, 60, barrier)) for off in (1000, 5000)]
    for p in procs:
        p.start()
    for p in procs:
        p.join(120)
        assert p.exitcode == 0
    con = sqlite3.connect(path)
    assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    # each writer: 60 batches of 100 own keys; plus 60 x 100 shared keys written once
    assert con.execute("SELECT COUNT(*) FROM tests").fetchone()[0] == 2 * 60 * 100 + 60 * 100
    con.close()


class SignedTester(CountingTester):
    """Answers with -0.0 and NaN among the statistics (what SQLite cannot keep as such)."""

    def _answer(self, a, b, cond):
        res = super()._answer(a, b, cond)
        stat = np.asarray(res.statistic, float).copy()
        stat[::3] = -0.0
        stat[1::3] = np.nan
        return TestResults(stat, res.pvalue, res.left_out)


def test_packed_copy_answers_as_the_rows(tmp_path):
    path = tmp_path / "tests.sqlite"
    rng = np.random.default_rng(3)
    x = rng.integers(0, 30, 400)
    y = x + 1 + rng.integers(0, 20, 400)
    cond = np.sort(rng.choice(60, size=(400, 2), replace=True), axis=1)
    inner = SignedTester(k=3, leave_out=1)
    with TestStore(path) as store, CachedTester(inner, store, "fp", 3) as t:
        t.ci(x, y, cond)
    # reference: the stored rows themselves, read with sqlite3 (the standard library)
    con = sqlite3.connect(str(path))
    rows = {(a, b, c): (s, p) for a, b, c, s, p in con.execute(
        "SELECT x, y, cond, statistic, pvalue FROM tests")}
    assert con.execute("SELECT COUNT(*) FROM held").fetchone()[0] == 1
    con.close()
    with TestStore(path) as store:
        got = CachedTester(None, store, "fp", 3).ci(y, x, cond[:, ::-1])
    for i in range(400):
        s, p = rows[(int(x[i]), int(y[i]), f"{cond[i, 0]},{cond[i, 1]}")]
        want_s = np.nan if s is None else s
        np.testing.assert_array_equal(got.statistic[i], want_s)  # NaN equals NaN here
        assert np.signbit(got.statistic[i]) == np.signbit(want_s)  # -0.0 comes back as 0.0
        assert got.pvalue[i] == p
    assert got.left_out[:, 1].all() and not got.left_out[:, [0, 2]].any()


def test_stale_packed_copy_falls_back_to_rows(tmp_path):
    path = tmp_path / "tests.sqlite"
    x, y, cond = np.array([0, 1]), np.array([1, 2]), np.array([[3], [4]])
    with TestStore(path) as store, CachedTester(CountingTester(), store, "fp", 3) as t:
        t.ci(x, y, cond)
    # a writer that keeps no packed copy (an older version) adds a row of the same level
    with TestStore(path) as store:
        fid = store.fingerprint_id("fp")
        store.insert([(fid, "ci", "", 1, 5, 6, "7", 0.5, 0.25, None)])
    with TestStore(path) as store:
        t = CachedTester(None, store, "fp", 3)
        got = t.ci(np.array([6, 0]), np.array([5, 1]), np.array([[7], [3]]))
        assert got.pvalue[0] == 0.25 and t.reused == 2
        t.flush()  # nothing computed: the copy is rewritten from the rows read
    con = sqlite3.connect(str(path))
    assert con.execute("SELECT n FROM held").fetchall() == [(3,)]
    con.close()


def test_large_indices_match_exactly(tmp_path):
    # keys too wide for one 62-bit code are compared as bytes; the reference is a dict
    rng = np.random.default_rng(5)
    x = rng.integers(0, 2**40, 300)
    y = x + rng.integers(1, 2**40, 300)
    cond = np.sort(rng.integers(0, 2**40, (300, 3)), axis=1)
    inner = CountingTester()
    with TestStore(tmp_path / "tests.sqlite") as store:
        t = CachedTester(inner, store, "fp", 3)
        first = t.ci(x[:200], y[:200], cond[:200])
        again = t.ci(x[100:], y[100:], cond[100:])
    assert inner.asked == 300 and t.reused == 100
    ref = {(int(x[i]), int(y[i]), tuple(cond[i].tolist())): first.statistic[i]
           for i in range(200)}
    for i in range(100):
        key = (int(x[100 + i]), int(y[100 + i]), tuple(cond[100 + i].tolist()))
        assert again.statistic[i] == ref[key]


def test_digest_records_replace_by_path(tmp_path):
    row = ("/data/a.csv", 1, 2, 3, 4, 5, "ab" * 32, 6)
    newer = ("/data/a.csv", 1, 9, 3, 4, 7, "cd" * 32, 8)
    other = ("/data/b.csv", 1, 3, 3, 4, 5, "ef" * 32, 6)
    with TestStore(tmp_path / "tests.sqlite") as store:
        assert store.put_digests([row, other]) and store.put_digests([newer])
        assert store.put_digests([])
    # read back by SQLite itself: one record per path, the latest
    con = sqlite3.connect(tmp_path / "tests.sqlite")
    assert con.execute("SELECT * FROM digests ORDER BY path").fetchall() == [newer, other]
    con.close()
