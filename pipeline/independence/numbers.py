"""Numbers that do not depend on alpha, computed once per input fingerprint.

Some results are read at a significance level but computed without one: the p-values and
effect sizes of the input check (response matrix, control agreement, neighbour estimate,
tests of the declared targets). `StoredNumbers` gives each such set of named arrays to
its caller, computing it only when the test store (`pipeline.independence.store`) does
not hold it yet under the input fingerprint, and keeping what it computed. A rerun at
another alpha so applies its alpha to stored numbers without computing them again (and
without importing the libraries that compute them). Entries are keyed like the tests: a
new fingerprint (other inputs, options or `METHODS_VERSION`) never reuses one. The name
of an entry says everything else its numbers depend on (the reference regimes, the
conditioning set, ...).

Arrays come back bit for bit as computed (``np.save`` keeps every float64 exactly), so a
result built from stored numbers is the one a fresh computation gives.

>>> calls = []
>>> numbers = StoredNumbers()  # no store: every set is computed when asked
>>> numbers.get("one", lambda: calls.append(1) or {"p": np.array([0.5])})["p"].tolist()
[0.5]
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    from pipeline.independence.store import TestStore

__all__ = ["StoredNumbers"]


class StoredNumbers:
    """Named sets of arrays from the store, computed and kept when missing.

    Parameters
    ----------
    store : TestStore, optional
        Where the numbers are kept; None computes every set when asked.
    fingerprint : str
        The key of the inputs (as for `pipeline.independence.cached.CachedTester`).

    Attributes
    ----------
    computed, reused : int
        Sets computed / read from the store so far.
    """

    def __init__(self, store: TestStore | None = None, fingerprint: str = "") -> None:
        self.store = store
        self.fingerprint = fingerprint
        self.computed = 0
        self.reused = 0
        self._fid: int | None = None
        self._held: dict[str, dict[str, np.ndarray]] | None = None

    def get(self, name: str, compute: Callable[[], Mapping[str, np.ndarray]]
            ) -> dict[str, np.ndarray]:
        """The arrays of `name`: from the store, else ``compute()`` (then kept there)."""
        if self.store is not None and self._held is None:  # every set of the key, read once
            self._fid = self.store.fingerprint_id(self.fingerprint)
            self._held = self.store.load_numbers(self._fid)
        if self._held is not None and name in self._held:
            self.reused += 1
            return self._held[name]
        arrays = {field: np.asarray(a) for field, a in compute().items()}
        self.computed += 1
        if self.store is not None and self._held is not None:
            self.store.put_numbers(self._fid, name, arrays)
            self._held[name] = arrays
        return arrays
