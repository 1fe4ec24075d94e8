"""Streaming moments against numpy's two-pass mean and covariance on the raw rows."""

import numpy as np
import pytest

from pipeline.stats.accumulate import MomentAccumulator, one_blas_thread
from pipeline.stats.moments import Moments


def _stream(codes, x, regimes, rng, max_chunk=37):
    acc = MomentAccumulator([f"V{j}" for j in range(x.shape[1])], regimes)
    i = 0
    while i < len(codes):
        m = int(rng.integers(1, max_chunk))
        acc.update(codes[i:i + m], x[i:i + m])
        i += m
    return acc.result()


def _check_against_numpy(res, codes, x, rtol):
    for k in range(len(res.regimes)):
        rows = x[codes == k]
        assert res.count[k] == len(rows)
        # numpy's np.mean / np.cov (two-pass) as the outside reference
        np.testing.assert_allclose(res.mean[k], rows.mean(axis=0), rtol=rtol)
        cov = np.cov(rows, rowvar=False)
        # relative to the scale of the matrix: entries near 0 carry its absolute error
        np.testing.assert_allclose(res.scatter[k] / (len(rows) - 1), cov, rtol=rtol,
                                   atol=rtol * np.abs(cov).max())


def test_many_small_chunks_match_numpy():
    rng = np.random.default_rng(1)
    n, p = 3000, 5
    codes = rng.integers(0, 3, n)
    x = rng.standard_normal((n, p)) @ rng.standard_normal((p, p)) + codes[:, None] * 2.0
    res = _stream(codes, x, ["a", "b", "c"], rng)
    _check_against_numpy(res, codes, x, rtol=1e-10)
    assert np.array_equal(res.scatter, np.swapaxes(res.scatter, 1, 2))


def test_huge_offset_keeps_precision():
    # values 1e8 + small noise: the pairwise merge (Chan, Golub & LeVeque 1979) keeps the
    # variance; numpy's two-pass np.cov is the reference (common practice)
    rng = np.random.default_rng(2)
    n, p = 4000, 3
    codes = rng.integers(0, 2, n)
    x = 1e8 + rng.standard_normal((n, p)) * np.array([1.0, 0.5, 2.0])
    res = _stream(codes, x, ["a", "b"], rng, max_chunk=50)
    _check_against_numpy(res, codes, x, rtol=1e-7)
    # the textbook one-pass formula sum(x^2) - n mean^2 loses every digit here
    rows = x[codes == 0]
    naive = (rows ** 2).sum(axis=0) - len(rows) * rows.mean(axis=0) ** 2
    exact = ((rows - rows.mean(axis=0)) ** 2).sum(axis=0)
    assert np.max(np.abs(naive - exact) / exact) > 1e-3


def test_matches_from_samples_and_merge():
    rng = np.random.default_rng(3)
    x = rng.standard_normal((500, 4))
    codes = rng.integers(0, 2, 500)
    one = MomentAccumulator(list("wxyz"), ["r0", "r1"])
    one.update(codes, np.asfortranarray(x))  # column-major, as pandas gives it
    a = MomentAccumulator(list("wxyz"), ["r0", "r1"])
    b = MomentAccumulator(list("wxyz"), ["r0", "r1"])
    a.update(codes[:123], x[:123])
    b.update(codes[123:], x[123:])
    a.merge(b)
    ref = Moments.from_samples({"r0": x[codes == 0], "r1": x[codes == 1]}, tuple("wxyz"))
    for res in (one.result(), a.result()):
        np.testing.assert_array_equal(res.count, ref.count)
        np.testing.assert_allclose(res.mean, ref.mean, rtol=1e-12)
        np.testing.assert_allclose(res.scatter, ref.scatter, rtol=1e-10, atol=1e-10)


def test_regime_without_rows_stays_zero_and_empty_update_is_noop():
    acc = MomentAccumulator(["x"], ["a", "b"])
    acc.update(np.zeros(0, dtype=int), np.zeros((0, 1)))
    acc.update(np.array([1, 1]), np.array([[1.0], [3.0]]))
    res = acc.result()
    assert res.count.tolist() == [0, 2]
    assert res.mean[1, 0] == 2.0 and res.scatter[1, 0, 0] == 2.0


@pytest.mark.parametrize("codes, values", [
    (np.array([0, 2]), np.zeros((2, 1))),          # code out of range
    (np.array([0, -1]), np.zeros((2, 1))),         # negative code
    (np.array([0, 1]), np.zeros((3, 1))),          # length mismatch
    (np.array([0.0, 1.0]), np.zeros((2, 1))),      # not integers
])
def test_bad_update_raises(codes, values):
    acc = MomentAccumulator(["x"], ["a", "b"])
    with pytest.raises(ValueError):
        acc.update(codes, values)


def test_one_blas_thread_restores_and_keeps_results():
    rng = np.random.default_rng(4)
    x = rng.standard_normal((200, 6))
    before = x.T @ x
    with one_blas_thread():
        inside = x.T @ x
    np.testing.assert_allclose(inside, before, rtol=1e-12)


def test_grouped_rows_and_caller_array_untouched():
    rng = np.random.default_rng(5)
    codes = np.repeat([0, 1, 2], [30, 1, 50])  # already grouped: the no-copy path
    x = rng.standard_normal((81, 3)) + 7.0
    keep = x.copy()
    acc = MomentAccumulator(list("abc"), ["r0", "r1", "r2"])
    acc.update(codes, x)
    acc.update(codes[::-1], x)  # shuffled order: the sorting path
    assert np.array_equal(x, keep)
    res = acc.result()
    both = np.concatenate([codes, codes[::-1]])
    _check_against_numpy(res, both, np.vstack([x, x]), rtol=1e-10)


def test_third_and_fourth_moments_match_scipy():
    # Pebay (2008) merges against scipy.stats.moment on the raw rows of each regime
    from scipy import stats

    rng = np.random.default_rng(7)
    n, p = 2500, 4
    codes = rng.integers(0, 3, n)
    x = rng.exponential(size=(n, p)) * np.array([1.0, 3.0, 0.2, 1.0]) + 50.0 + codes[:, None]
    res = _stream(codes, x, ["a", "b", "c"], rng, max_chunk=80)
    for k in range(3):
        rows = x[codes == k]
        np.testing.assert_allclose(res.m3[k] / len(rows), stats.moment(rows, 3), rtol=1e-8)
        np.testing.assert_allclose(res.m4[k] / len(rows), stats.moment(rows, 4), rtol=1e-8)
    # pooling regimes by the merge equals the moments of their union
    m3, m4 = res.pooled_tails(["a", "c"])
    rows = x[(codes == 0) | (codes == 2)]
    np.testing.assert_allclose(m3 / len(rows), stats.moment(rows, 3), rtol=1e-8)
    np.testing.assert_allclose(m4 / len(rows), stats.moment(rows, 4), rtol=1e-8)
    # skewness and excess kurtosis as scipy.stats defines them (biased, Fisher)
    skew, kurt = res.shape()
    np.testing.assert_allclose(skew[1], stats.skew(x[codes == 1]), rtol=1e-8)
    np.testing.assert_allclose(kurt[1], stats.kurtosis(x[codes == 1]), rtol=1e-8)
