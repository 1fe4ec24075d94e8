"""Named numbers computed once per input fingerprint and kept in the test store."""

from __future__ import annotations

import numpy as np

from pipeline.independence.numbers import StoredNumbers
from pipeline.independence.store import TestStore


class Computation:
    """Counts its calls; returns fresh random arrays each time (so reuse is visible)."""

    def __init__(self) -> None:
        self.calls = 0
        self.rng = np.random.default_rng(0)

    def __call__(self) -> dict[str, np.ndarray]:
        self.calls += 1
        return {"pvalue": self.rng.random(5), "tested": self.rng.random(5) > 0.5}


def test_computed_once_then_read_back(tmp_path):
    compute = Computation()
    with TestStore(tmp_path / "tests.sqlite") as store:
        first = StoredNumbers(store, "fp").get("neighbours", compute)
        numbers = StoredNumbers(store, "fp")  # a later run
        again = numbers.get("neighbours", compute)
        assert compute.calls == 1 and (numbers.computed, numbers.reused) == (0, 1)
        for k in first:
            assert again[k].tobytes() == first[k].tobytes()
        # another name, or another fingerprint, is computed anew
        numbers.get("other", compute)
        StoredNumbers(store, "fp2").get("neighbours", compute)
        assert compute.calls == 3


def test_without_a_store_every_set_is_computed():
    compute = Computation()
    numbers = StoredNumbers()
    a = numbers.get("x", compute)
    b = numbers.get("x", compute)
    assert compute.calls == 2 and numbers.computed == 2
    assert not np.array_equal(a["pvalue"], b["pvalue"])
