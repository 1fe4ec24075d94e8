"""`record` against the reference: the standard library's ``@dataclass``.

Each check defines the same class twice, once with ``@dataclass`` and once with
``@record``, and requires the same text form, equality, hashing and immutability.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field

import pytest
from hypothesis import given
from hypothesis import strategies as st

from pipeline.records import record

VALUES = st.one_of(st.integers(), st.text(max_size=5), st.none(),
                   st.tuples(st.integers(), st.text(max_size=3)))


def _pair(frozen: bool):
    def body():
        class Point:
            x: object
            y: object = 0
            note: str = field(default="", repr=False, compare=False)
            tag: object = field(default=None, hash=False)
        return Point

    reference = dataclass(frozen=frozen)(body())
    ours = record(frozen=frozen)(body())
    return reference, ours


@pytest.mark.parametrize("frozen", [False, True])
@given(a=VALUES, b=VALUES, c=VALUES, d=VALUES)
def test_text_equality_and_hash_as_the_standard_dataclass(frozen, a, b, c, d):
    reference, ours = _pair(frozen)
    for args in [(a, b), (a, b, "n", c), (c, d)]:
        r, o = reference(*args), ours(*args)
        assert repr(r) == repr(o)
        for other in [(a, b), (c, d), (a, b, "other note", c)]:
            assert (r == reference(*other)) == (o == ours(*other))
        if frozen:
            assert hash(r) == hash(o)
        else:
            with pytest.raises(TypeError):
                hash(o)
    assert (ours(a, b) == reference(a, b)) is False  # another class: never equal
    assert ours(a, b) != (a, b)


def test_frozen_records_refuse_changes_and_keep_the_dataclass_tools():
    _, Point = _pair(frozen=True)
    p = Point(1, 2)
    with pytest.raises(dataclasses.FrozenInstanceError):
        p.x = 3
    assert dataclasses.is_dataclass(p)
    assert dataclasses.asdict(p) == {"x": 1, "y": 2, "note": "", "tag": None}
    assert dataclasses.replace(p, y=5) == Point(1, 5)
    assert [f.name for f in dataclasses.fields(p)] == ["x", "y", "note", "tag"]


def test_methods_of_the_class_body_are_kept():
    @record(frozen=True)
    class Named:
        name: str

        def __repr__(self) -> str:
            return f"<{self.name}>"

        def __eq__(self, other: object) -> bool:
            return isinstance(other, Named) and other.name.lower() == self.name.lower()

        def __hash__(self) -> int:
            return hash(self.name.lower())

    assert repr(Named("A")) == "<A>"
    assert Named("A") == Named("a") and hash(Named("A")) == hash(Named("a"))


def test_a_body_with_its_own_eq_still_hashes_its_fields_when_frozen_as_dataclass():
    def body():
        class Box:
            v: int

            def __eq__(self, other: object) -> bool:
                return True
        return Box

    hashes = {hash(decorate(body())(1)) for decorate in (dataclass(frozen=True),
                                                        record(frozen=True))}
    assert hashes == {hash((1,))}
    for decorate in (dataclass, record):
        with pytest.raises(TypeError):
            hash(decorate(body())(1))


def test_a_record_subclass_shows_and_compares_its_own_fields():
    @record
    class Base:
        a: int

    @record
    class Child(Base):
        b: int = 2

    @dataclass
    class ReferenceChild:
        a: int
        b: int = 2

    assert repr(Child(1)) == repr(ReferenceChild(1)).replace("ReferenceChild", "Child")
    assert Child(1) == Child(1, 2) and Child(1) != Child(1, 3) and Base(1) != Child(1)


def test_recursive_records_show_an_ellipsis_as_dataclass_does():
    @dataclass
    class RefNode:
        child: object = None

    @record
    class Node:
        child: object = None

    r, o = RefNode(), Node()
    r.child, o.child = r, o
    assert repr(o) == repr(r).replace("RefNode", "Node")


def test_records_cross_processes_as_dataclasses_do():
    # the bootstrap's worker processes send records back pickled
    import pickle

    from pipeline.learner.evidence import RemovedPair

    pair = RemovedPair(x="A", y="B", separating_set=("C",), pvalue=0.2, statistic=1.3,
                       level=1, notes=(), regime=None)
    back = pickle.loads(pickle.dumps(pair))
    assert back == pair and hash(back) == hash(pair) and repr(back) == repr(pair)
