"""Why each edge has its direction: the chain of evidence, its strength, one sentence.

Every directed edge of a learned graph rests on one of three kinds of evidence:

collider
    ``A -> C <- B``: `A` and `B` are unrelated given a set without `C` (the separating
    test) and become related once `C` joins that set (the dependence test): two causes
    of a common effect [1]_.
intervention
    an experiment on `C` left `A` unchanged (given a set): `A` is upstream of `C`
    (``F -> C <- A`` in the augmented graph [2]_); or an experiment on `X` changed `Y` but
    not once `X` is accounted for: the effect runs from `X` to `Y` (``F -> X - Y``,
    Meek's rule 1 through the intervention node).
Meek's rules 1-4
    the direction follows from other arrows: the other one would close a loop or make two
    unlinked variables meet [3]_.

The *strength* of an arrow is ``-log10`` of the weakest of the tests that had to find a
dependence for it to stand (the dependence test and the adjacency tests; for an arrow
that follows by Meek's rules, the weakest arrow it follows from), capped at 300: 2 means
the weakest such test rejected at p = 0.01, 0 that it did not reject at all. The *chain*
lists the steps from the tests to the arrow; the *explanation* says the last step in one
sentence of plain words.

References
----------
.. [1] Spirtes, P., Glymour, C. & Scheines, R. (2000). *Causation, Prediction, and
   Search*, 2nd ed. MIT Press.
.. [2] Yang, K. D., Katcoff, A. & Uhler, C. (2018). Characterizing and learning
   equivalence classes of causal DAGs under interventions. *ICML*.
.. [3] Meek, C. (1995). Causal inference and causal explanation with background
   knowledge. *UAI*, 403-410.
"""

from __future__ import annotations

from dataclasses import field
from typing import Any

from pipeline.graphs.pdag import InterventionNode
from pipeline.learner.evidence import ColliderEvidence, Learned, strength_of
from pipeline.records import record
from pipeline.results.formatting import format_p

__all__ = ["Explanation", "explain_edges", "MAX_CHAIN"]

#: Steps kept in a chain (the last ones, nearest the edge).
MAX_CHAIN = 12


@record
class Explanation:
    """The evidence of one edge: `strength` (None when undirected), `chain`, `sentence`."""

    strength: float | None
    chain: list[dict[str, Any]] = field(default_factory=list)
    sentence: str = ""


def _and(s: tuple[str, ...] | list[str]) -> str:
    """``A``, ``A and B``, ``A, B and C``."""
    s = list(s)
    return s[0] if len(s) == 1 else ", ".join(s[:-1]) + f" and {s[-1]}"


def _given(s: tuple[str, ...] | list[str]) -> str:
    return f" given {_and(s)}" if s else ""


def _once(s: tuple[str, ...] | list[str]) -> str:
    """``once A is accounted for``, ``once A and B are accounted for``."""
    return f"once {_and(s)} {'is' if len(s) == 1 else 'are'} accounted for"


def _p(v: float | None) -> str:
    """``p = 0.012``, ``p < 1e-300``."""
    text = format_p(v)
    return f"p {text}" if text.startswith("<") else f"p = {text}"


def _test(role: str, x: str, y: str, given: tuple | list, p: float | None,
          regime: str | None = None) -> dict[str, Any]:
    out = {"role": role, "x": x, "y": y, "given": list(given), "p": p}
    if regime is not None:
        out["regime"] = regime
    return out


class _Explainer:
    def __init__(self, learned: Learned, alpha: float, open_edges: set[frozenset]) -> None:
        self.learned = learned
        self.open_edges = open_edges
        self.alpha = alpha
        self.aug = learned.essential.augmented
        self.reasons = learned.essential.reasons
        self.colliders: dict[tuple, ColliderEvidence] = {
            (t[1], frozenset((t[0], t[2]))): ev for t, ev in learned.colliders.items()}
        self.adjacency = {frozenset((k.x, k.y)): k.max_pvalue for k in learned.kept
                          if k.regime is None}
        self.separation = {frozenset((r.x, r.y)): r for r in learned.removed if r.regime is None}
        self.steps: dict[tuple[str, str], dict[str, Any]] = {}
        self.chains: dict[tuple[str, str], list[dict[str, Any]]] = {}
        self.strengths: dict[tuple[str, str], float] = {}

    # -- one step per kind ------------------------------------------------------------------
    def _collider(self, u: str, v: str, other: object) -> tuple[dict, float]:
        ev = self.colliders.get((v, frozenset((u, str(other)))))
        if ev is None:  # made by the repair: no test found it
            return ({"edge": f"{u} -> {v}", "rule": "collider", "via": [str(other)],
                     "tests": [],
                     "text": f"the graph needs {u} and {other} to meet at {v} to stay "
                             f"consistent, although no test showed it"}, 0.0)
        tests = [_test("separation", u, str(other), ev.separating_set, ev.p_separation,
                       ev.regime),
                 _test("dependence", u, str(other), (*ev.separating_set, v), ev.p_dependence,
                       ev.regime),
                 _test("adjacency", u, v, (), self.adjacency.get(frozenset((u, v)))),
                 _test("adjacency", str(other), v, (), self._f_adjacency(other, v))]
        if ev.regime is None:
            text = (f"{u} and {other} are unrelated{_given(ev.separating_set)} "
                    f"({_p(ev.p_separation)}) but related once {v} is accounted "
                    f"for ({_p(ev.p_dependence)}): both act on {v}")
        else:
            text = (f"experiment {ev.regime}, which acts on {v}, left {u} unchanged"
                    + (f" {_once(ev.separating_set)}" if ev.separating_set else "")
                    + f" ({_p(ev.p_separation)}), so {u} acts on {v} and not the reverse")
        return ({"edge": f"{u} -> {v}", "rule": "collider" if ev.regime is None
                 else "intervention", "via": [ev.regime or str(other)], "tests": tests,
                 "text": text}, ev.strength)

    def _f_adjacency(self, other: object, v: str) -> float | None:
        if isinstance(other, InterventionNode) or str(other).startswith("F["):
            for k in self.learned.kept:
                if k.x == str(other) and k.y == v:
                    return k.max_pvalue
            return None
        return self.adjacency.get(frozenset((str(other), v)))

    def _through(self, u: str, v: str, f: InterventionNode) -> tuple[dict, float]:
        ch = self.learned.chains.get((u, v))
        k = f.regime
        p_adj = self.adjacency.get(frozenset((u, v)))
        if ch is None or ch.p_separation is None:
            sep = ch.separating_set if ch is not None else ()
            tests = [] if ch is None else [
                _test("dependence", str(f), v, (), ch.p_dependence, k)]
            return ({"edge": f"{u} -> {v}", "rule": "intervention", "via": [k],
                     "tests": tests,
                     "text": f"experiment {k} acts on {u} and the graph stays consistent "
                             f"only this way; the tests could not tell whether {v} stays put "
                             f"{_once(sep or (u,))}"}, 0.0)
        tests = [_test("dependence", str(f), v, (), ch.p_dependence, k),
                 _test("separation", str(f), v, ch.separating_set, ch.p_separation, k),
                 _test("adjacency", u, v, (), p_adj)]
        strength = strength_of(max(0.0 if ch.p_dependence is None else ch.p_dependence,
                                   0.0 if p_adj is None else p_adj))
        once = _once(ch.separating_set or (u,))
        if ch.p_dependence is not None and ch.p_dependence <= self.alpha:
            text = (f"experiment {k} acts on {u} and changed {v} ({_p(ch.p_dependence)}), "
                    f"but not {once} ({_p(ch.p_separation)}): the effect runs from {u} to {v}")
        else:
            text = (f"experiment {k} acts on {u}, and {v} stays put {once} "
                    f"({_p(ch.p_separation)}), so {v} does not act on {u} (the change of {v} "
                    f"itself is weak: {_p(ch.p_dependence)})")
        return ({"edge": f"{u} -> {v}", "rule": "intervention", "via": [k], "tests": tests,
                 "text": text}, strength)

    def _meek(self, u: str, v: str, rule: str, via: tuple) -> tuple[dict, list[tuple]]:
        names = [str(n) for n in via]
        tests: list[dict] = []
        if rule == "meek-1":
            (a,) = names
            premises = [(via[0], u)]
            r = self.separation.get(frozenset((a, v)))
            if r is not None:
                tests.append(_test("separation", r.x, r.y, r.separating_set, r.pvalue))
            text = (f"it follows from {a} -> {u}: {a} and {v} are not linked directly"
                    + (f" (unrelated{_given(r.separating_set)}, {_p(r.pvalue)})"
                       if r is not None else "")
                    + f", and {v} -> {u} would make them meet at {u}, which the tests ruled "
                      f"out")
        elif rule == "meek-2":
            (b,) = names
            premises = [(u, via[0]), (via[0], v)]
            text = f"it follows from {u} -> {b} -> {v}: the other direction would close a loop"
        elif rule == "meek-3":
            c, d = names
            premises = [(via[0], v), (via[1], v)]
            text = (f"it follows from {c} -> {v} <- {d}, with {u} linked to both: the other "
                    f"direction would close a loop or make {c} and {d} meet at {u}")
        else:  # meek-4
            d, c = names
            premises = [(via[0], via[1]), (via[1], v)]
            text = (f"it follows from {d} -> {c} -> {v}, with {u} linked to {d} and {c}: the "
                    f"other direction would close a loop or add a meeting point the tests "
                    f"ruled out")
        tests.append(_test("adjacency", u, v, (), self.adjacency.get(frozenset((u, v)))))
        step = {"edge": f"{u} -> {v}", "rule": rule, "via": names,
                "from": [f"{a} -> {b}" for a, b in premises], "tests": tests, "text": text}
        return step, [(str(a), str(b)) for a, b in premises]

    # -- the chain of one edge --------------------------------------------------------------
    def explain(self, u: str, v: str, seen: frozenset = frozenset()) -> None:
        if (u, v) in self.chains:
            return
        reason = self.reasons.get((u, v))
        chain: list[dict] = []
        if frozenset((u, v)) in self.open_edges:
            step, strength = {"edge": f"{u} -> {v}", "rule": reason.rule if reason else "none",
                              "via": [str(n) for n in (reason.via if reason else ())],
                              "tests": [],
                              "text": "the tests could not decide this direction; it was "
                                      "chosen so that the graph stays consistent, and the "
                                      "other direction is about as plausible"}, 0.0
        elif reason is None or reason.rule == "none":
            step, strength = {"edge": f"{u} -> {v}", "rule": "none", "via": [], "tests": [],
                              "text": "the direction was given as background knowledge"}, 0.0
        elif reason.rule == "collider":
            step, strength = self._collider(u, v, reason.via[0])
        elif reason.rule == "intervention":
            f = reason.via[0]
            if self.aug.has_directed(f, v):  # F -> v <- u
                step, strength = self._collider(u, v, f)
            else:  # F -> u - v
                step, strength = self._through(u, v, f)
        else:
            step, premises = self._meek(u, v, reason.rule, reason.via)
            p_adj = self.adjacency.get(frozenset((u, v)))
            strength = strength_of(p_adj)
            for e in premises:
                if e in seen or e == (u, v):
                    continue
                self.explain(*e, seen=seen | {(u, v)})
                strength = min(strength, self.strengths.get(e, 0.0))
                for s in self.chains.get(e, []):
                    if s not in chain:
                        chain.append(s)
        step["strength"] = round(strength, 2)
        chain.append(step)
        if len(chain) > MAX_CHAIN:
            chain = [{"edge": "", "rule": "", "via": [], "tests": [],
                      "text": f"{len(chain) - MAX_CHAIN + 1} earlier step(s) left out"}] \
                + chain[-(MAX_CHAIN - 1):]
        self.chains[(u, v)] = chain
        self.steps[(u, v)] = step
        self.strengths[(u, v)] = strength


def explain_edges(learned: Learned, alpha: float = 0.01) -> dict[tuple[str, str], Explanation]:
    """The `Explanation` of every edge of ``learned.graph``, by ``(source, target)``.

    Undirected edges are keyed by their pair in the graph's node order, earlier node
    first; they carry no strength and say why they stay undirected.

    Parameters
    ----------
    learned : Learned
        The learner's output (graph, reasons, collider and chain evidence, conflicts).
    alpha : float
        The significance level of the run (words such as "changed" depend on it).
    """
    g = learned.graph
    conflicted = {frozenset((c.source, c.target)) for c in learned.conflicts}
    changed = {frozenset(e) for e in learned.resolution.get("changed", [])}
    undecided = set()
    for a, c, b in learned.ambiguous:
        undecided.update(frozenset((x, c)) for x in (a, b) if not x.startswith("F["))
    ex = _Explainer(learned, alpha, changed & undecided)
    out: dict[tuple[str, str], Explanation] = {}
    for u, v in g.directed_edges():
        ex.explain(str(u), str(v))
        step = ex.steps[(str(u), str(v))]
        sentence = f"{u} -> {v}: {step['text']}"
        pair = frozenset((u, v))
        if pair in conflicted:
            sentence += "; other tests point elsewhere (see the conflict notes)"
        elif pair in changed and pair not in undecided:
            sentence += " (the tests alone left this edge open)"
        out[(str(u), str(v))] = Explanation(ex.strengths[(str(u), str(v))],
                                            ex.chains[(str(u), str(v))], sentence + ".")
    for u, v in g.undirected_edges():
        pair = frozenset((u, v))
        if pair in conflicted:
            text = "left undirected: the tests disagree about its direction (see the notes)"
        elif pair in undecided:
            text = ("left undirected: the tests could not decide whether the variables around "
                    "it meet here")
        else:
            text = ("left undirected: the data fit both directions; an experiment on one end "
                    "would tell")
        out[(str(u), str(v))] = Explanation(None, [], f"{u} - {v}: {text}.")
    return out
