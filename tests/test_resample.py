"""Half-sample resamples as weighted moments: against explicit resampling with numpy."""

from __future__ import annotations

import numpy as np
import pytest

from pipeline.stats import resample as rs
from pipeline.stats.resample import ResampleAccumulator, resample_counts


def _data(seed=0, sizes=(37, 50, 23), p=3):
    rng = np.random.default_rng(seed)
    codes = rng.permutation(np.repeat(np.arange(len(sizes)), sizes))
    values = rng.normal(size=(codes.size, p)) * [1.0, 5.0, 0.1] + [1e3, -2.0, 0.0]
    return codes, values


def _counts_of_regime(seed, b, k, n):
    return np.concatenate([resample_counts(seed, b, k, n, j)
                           for j in range(-(-n // rs.BLOCK))])


@pytest.mark.parametrize("block", [4096, 16])
def test_weighted_moments_equal_those_of_the_explicit_resample(monkeypatch, block):
    monkeypatch.setattr(rs, "BLOCK", block)  # several blocks per regime when 16
    codes, values = _data()
    sizes = np.bincount(codes)
    acc = ResampleAccumulator(["a", "b", "c"], ["r0", "r1", "r2"], sizes, resamples=3, seed=7)
    for start in range(0, codes.size, 29):  # chunks that cut regimes anywhere
        acc.update(codes[start:start + 29], values[start:start + 29])
    got = acc.result()
    for b in range(3):
        for k in range(3):
            rows = values[codes == k]  # the regime's rows in file order
            w = _counts_of_regime(7, b, k, int(sizes[k]))
            explicit = np.repeat(rows, w, axis=0)  # the resample: the rows drawn
            assert got[b].count[k] == len(explicit) == sizes[k] // 2
            # reference: numpy's mean and covariance of the resampled rows
            np.testing.assert_allclose(got[b].mean[k], explicit.mean(axis=0), rtol=1e-12)
            np.testing.assert_allclose(got[b].scatter[k] / (len(explicit) - 1),
                                       np.cov(explicit, rowvar=False), rtol=1e-9, atol=1e-12)
            # third and fourth central moment sums, against numpy on the resampled rows
            d = explicit - explicit.mean(axis=0)
            for got_m, power in ((got[b].m3[k], 3), (got[b].m4[k], 4)):
                scale = (np.abs(d) ** power).sum(axis=0)
                assert np.all(np.abs(got_m - (d ** power).sum(axis=0)) <= 1e-9 * scale)


def test_counts_do_not_depend_on_chunking(monkeypatch):
    monkeypatch.setattr(rs, "BLOCK", 8)
    codes, values = _data(seed=1, sizes=(30, 19))
    sizes = np.bincount(codes)
    results = []
    for step in (1, 7, codes.size):
        acc = ResampleAccumulator(["a", "b", "c"], ["r0", "r1"], sizes, resamples=2, seed=3)
        for start in range(0, codes.size, step):
            acc.update(codes[start:start + step], values[start:start + step])
        results.append(acc.result())
    for other in results[1:]:
        for m0, m1 in zip(results[0], other, strict=True):
            np.testing.assert_array_equal(m0.count, m1.count)
            np.testing.assert_allclose(m0.mean, m1.mean, rtol=1e-12)
            np.testing.assert_allclose(m0.scatter, m1.scatter, rtol=1e-10)


def test_counts_are_a_uniform_half_sample(monkeypatch):
    # half of the n rows without replacement: weights 0 or 1 summing to n // 2, and every
    # row drawn with chance (n // 2) / n (the hypergeometric law: common practice)
    monkeypatch.setattr(rs, "BLOCK", 64)
    n = 201
    draws = np.stack([_counts_of_regime(11, b, 0, n) for b in range(400)])
    assert set(np.unique(draws)) <= {0, 1}
    assert (draws.sum(axis=1) == n // 2).all()
    share = draws.mean(axis=0)  # per row, over 400 resamples: binomial sd about 0.025
    assert abs(share.mean() - (n // 2) / n) < 1e-12
    assert np.abs(share - (n // 2) / n).max() < 0.1
    # rows of different blocks are drawn alike (the split over blocks is not biased)
    assert abs(share[:64].mean() - share[128:].mean()) < 0.03


def test_different_seeds_differ_and_same_seed_repeats():
    a = resample_counts(1, 0, 0, 50, 0)
    assert np.array_equal(a, resample_counts(1, 0, 0, 50, 0))
    assert not np.array_equal(a, resample_counts(2, 0, 0, 50, 0))
    assert not np.array_equal(a, resample_counts(1, 1, 0, 50, 0))


def test_bad_arguments_raise():
    with pytest.raises(ValueError, match="counts"):
        ResampleAccumulator(["a"], ["r"], [0], resamples=2, seed=1)
    acc = ResampleAccumulator(["a"], ["r"], [2], resamples=2, seed=1)
    with pytest.raises(ValueError, match="more rows"):
        acc.update(np.zeros(3, dtype=int), np.zeros((3, 1)))
    acc = ResampleAccumulator(["a"], ["r"], [2], resamples=2, seed=1)
    acc.update(np.zeros(1, dtype=int), np.zeros((1, 1)))
    with pytest.raises(ValueError, match="fewer rows"):
        acc.result()
