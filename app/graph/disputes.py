"""Disputed arrows: what each dispute changes, what holds in every combination of them,
and which left-out arrows would change the answer.

Pure functions over the engine's :class:`~app.graph.dag.Dag` and
:class:`~app.graph.identification.Question`; they return data (dataclasses), and the
words shown to people are built from that data elsewhere.

Terms (for treatment set X and outcome set Y in a DAG G)
--------------------------------------------------------
dispute       two variables and the arrows the room argues over: one direction, the
              other, or none (an option of None means "no arrow").
combination   one option chosen for every dispute, added to the undisputed arrows.
fullest       a combination to which no disputed arrow can be added without a cycle
              (maximal under inclusion of arrows).
valid Z       Z n forb = {} and Z d-separates X and Y in the proper back-door graph
              (van der Zander, Liskiewicz & Textor 2019, Theorem 5;
              forb as in Perkovic, Textor, Kalisch & Maathuis 2018, Definition 3.3).

Two facts make the checks cheap. (1) Adding an arrow only adds paths, opens more
colliders and forbids more variables; it never blocks an open path. So a set that is
invalid stays invalid, and the minimal adjustment sets change after adding an arrow
exactly when one of them becomes invalid. (2) For d-separation given Z only the
ancestors of X u Y u Z matter (Lauritzen, Dawid, Larsen & Leimer 1990), so an arrow
u -> v with v outside an(X u Y u Z) cannot change whether Z is valid.

Sets valid in every combination: by fact (1) a set valid in a combination is valid in
every combination with fewer arrows, so it suffices to check the fullest combinations.
Disputes over whether an arrow exists have one fullest combination (all of them drawn,
when that makes no cycle), and its minimal adjustment sets are the answer, exactly and
however many disputes there are. Disputes over direction give several; the sets valid
in all are found by growing, size by size, the minimal unions of one minimal set from
each (every valid set contains a minimal one), stopping when every larger candidate
must contain a set already found, or at a stated time budget.

References
----------
Lauritzen, S., Dawid, A., Larsen, B., Leimer, H.-G. (1990). Independence properties of
  directed Markov fields. Networks 20(5).
Perkovic, E., Textor, J., Kalisch, M., Maathuis, M. (2018). Complete graphical
  characterization and construction of adjustment sets in Markov equivalence classes
  of ancestral graphs. JMLR 18.
van der Zander, B., Liskiewicz, M., Textor, J. (2019). Separators and adjustment sets
  in causal graphs: complete criteria and an algorithmic framework. Artificial
  Intelligence 270.
"""

from __future__ import annotations

import itertools
import random
import time
from dataclasses import dataclass, field
from typing import Iterable, Optional, cast

from .dag import Dag
from .identification import (
    SET_CAP, Question, answer_question, has_adjustment_set, instrument_candidates, instrument_for,
    instruments, is_adjustment_set, is_front_door_set, is_instrument, is_separable_from_outcome,
    minimal_adjustment_sets,
)

__all__ = [
    "Dispute", "Answer", "OptionEffect", "DisputeEffects", "CombinationCheck", "CommonSets",
    "DisputeAnalysis", "AbsentArrow", "AbsentArrows", "fullest_combinations",
    "common_adjustment_sets", "analyse_disputes", "find_absent_arrows",
    "EXACT_LIMIT", "SAMPLE_SEED", "FULLEST_CAP",
]

Edge = tuple[str, str]
Option = Optional[Edge]

EXACT_LIMIT = 4096
SAMPLE_SEED = 20240611
OTHER_STRATEGY_BUDGET_S = 0.4
COMBINATION_BUDGET_S = 8.0   # a huge diagram stops here and says how far it got
ABSENT_BUDGET_S = 4.0
FULLEST_CAP = 4096           # fullest combinations we are willing to intersect
COMMON_SEARCH_BUDGET_S = 0.5
UNION_CAP = 2000             # minimal unions of one minimal set per diagram, at most
ANCHOR_DIAGRAMS = 256        # fullest diagrams whose minimal sets are listed to guide the search
COMMON_VERIFY_LIMIT = 12     # a set found by shrinking is checked against all its subsets up to this size


# ---------------------------------------------------------------------------
# Data
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class Dispute:
    """One disputed pair: the options argued over (None: no arrow) and the one drawn now."""

    pair: tuple[str, str]
    options: tuple[Option, ...]
    current: int = 0

    @classmethod
    def of(cls, pair: Iterable[str], options: Iterable, current: int = 0) -> "Dispute":
        opts = tuple(None if o is None else (o[0], o[1]) for o in options)
        return cls(cast("tuple[str, str]", tuple(pair)), opts, current)

    def arrows(self) -> list[Edge]:
        """The arrows this dispute offers (its options other than "no arrow")."""
        return [o for o in self.options if o is not None]


@dataclass(frozen=True)
class Answer:
    """The parts of the engine's answer that a dispute can change."""

    identifiable: bool
    strategy: str | None
    sets: tuple[tuple[str, ...], ...]

    @classmethod
    def of(cls, result: dict) -> "Answer":
        return cls(bool(result.get("identifiable")), result.get("strategy"),
                   tuple(tuple(s) for s in result.get("minimal_adjustment_sets", [])))

    def change_to(self, other: "Answer") -> str:
        """How ``other`` differs: "identified", "lost", "strategy", "sets" or "same"."""
        if self.identifiable != other.identifiable:
            return "identified" if other.identifiable else "lost"
        if self.strategy != other.strategy:
            return "strategy"
        return "sets" if self.sets != other.sets else "same"


@dataclass
class OptionEffect:
    """One option of a dispute, the others as drawn. ``change`` is "current", "cycle",
    or one of :meth:`Answer.change_to`'s words."""

    option: Option
    change: str
    answer: Answer | None = None
    cycle: list[str] | None = None
    # the sets of the current answer that remain valid adjustment sets with this option
    still_valid: tuple[tuple[str, ...], ...] | None = None

    @property
    def decisive(self) -> bool:
        return self.change not in ("current", "same")


@dataclass
class DisputeEffects:
    """One dispute and what each of its options does, the other disputes as drawn."""

    dispute: Dispute
    effects: list[OptionEffect]

    @property
    def decisive(self) -> bool:
        return any(e.decisive for e in self.effects)


@dataclass
class CombinationCheck:
    """Every combination (or a seeded sample): which make cycles, which are not identified."""

    total: int
    checked: int
    sampled: bool
    stopped_early: bool
    seed: int | None
    not_identified: list[list[Option]] = field(default_factory=list)
    not_identified_count: int = 0
    cycle_count: int = 0
    cycle_examples: list[list[str]] = field(default_factory=list)
    other_unchecked: int = 0


@dataclass
class CommonSets:
    """The minimal adjustment sets valid in every combination.

    ``method``: "fullest" (one fullest combination), "search" (several), "none" (every
    combination has a cycle), "too-many" (more than FULLEST_CAP fullest combinations).
    ``reason`` for "search": "verified" (found from ``consulted`` of the fullest
    diagrams and checked in all), "none-allowed", "none-somewhere", "exhausted", "time"
    or "cap"; ``checked_size``: every set of at most this many variables was checked.
    """

    sets: list[list[str]]
    complete: bool
    method: str
    reason: str = ""
    fullest_count: int = 0
    drawn: int = 0
    dispute_count: int = 0
    more: bool = False
    pool_size: int = 0
    checked_size: int = -1
    shrunk: list[str] | None = None
    consulted: int = 0


@dataclass
class DisputeAnalysis:
    """Everything :func:`analyse_disputes` finds."""

    items: list[DisputeEffects]
    combinations: CombinationCheck
    common: CommonSets
    elapsed_ms: float


@dataclass
class AbsentArrow:
    """A left-out arrow whose addition would change the engine's answer.

    ``breaks``: listed items that stop holding (adjustment or front-door sets; an
    instrument as ``[z, *conditioning set]``). ``consequence``:

    * "some": other listed items still hold;
    * "new-set": every listed set breaks, but another set of the same kind exists;
    * "none-left": nothing of that strategy remains; ``after`` is the engine's new
      strategy (None: not identified) and ``after_items`` its first listed items;
    * "instruments": the instruments change (``breaks``, ``regiven``, ``gained``) and
      at least one remains;
    * "identified": an effect not identified becomes identified by an instrument.

    ``regiven``: ``(z, old conditioning set, new one)`` for an instrument that stays one
    only given another set; ``gained``: new instruments as ``[z, *conditioning set]``.
    """

    source: str
    target: str
    breaks: list[list[str]]
    consequence: str
    after: str | None = None
    after_items: list[list[str]] = field(default_factory=list)
    regiven: list[tuple[str, list[str], list[str]]] = field(default_factory=list)
    gained: list[list[str]] = field(default_factory=list)

    @property
    def severity(self) -> int:
        """3: identification lost; 2: the strategy or every listed item changes, or
        identification is gained; 1: some listed items change."""
        if self.consequence == "none-left":
            return 3 if self.after is None else 2
        return 2 if self.consequence in ("new-set", "identified") else 1


@dataclass
class AbsentArrows:
    """``answer``: "adjustment", "front-door", "instrument", or None (not identified)."""

    answer: str | None
    arrows: list[AbsentArrow]
    checked: int
    stopped_early: bool
    more_sets_exist: bool = False


# ---------------------------------------------------------------------------
# Fullest combinations
# ---------------------------------------------------------------------------

def _reaches(children: dict[str, set[str]], start: str, goal: str) -> bool:
    """Is there a directed path start -> ... -> goal?"""
    if start == goal:
        return True
    seen, stack = {start}, [start]
    while stack:
        for c in children[stack.pop()]:
            if c == goal:
                return True
            if c not in seen:
                seen.add(c)
                stack.append(c)
    return False


def _may_skip(fixed_dag: Dag, disputes: list[Dispute]) -> list[bool]:
    """For each dispute: can a fullest combination leave its arrow out? Only when it has
    a "no arrow" option and one of its arrows could close a cycle with every other
    disputed arrow drawn."""
    union_children = {n: set(c) for n, c in fixed_dag.children.items()}
    for d in disputes:
        for a, b in d.arrows():
            union_children[a].add(b)
    out = []
    for d in disputes:
        own = d.arrows()
        if None not in d.options or not own:
            out.append(None in d.options)
            continue
        for a, b in own:  # disputes are per pair: no other dispute or fixed arrow is one of these
            union_children[a].discard(b)
        out.append(any(_reaches(union_children, b, a) for a, b in own))
        for a, b in own:
            union_children[a].add(b)
    return out


def fullest_combinations(fixed_dag: Dag, disputes: list[Dispute],
                         cap: int = FULLEST_CAP) -> tuple[list[list[Edge]], bool]:
    """The acyclic combinations to which no disputed arrow can be added without a cycle.

    Each is the list of arrows it adds to the undisputed ones. The flag is False when
    more than ``cap`` exist (the list is then incomplete). A combination leaving dispute
    i out is maximal exactly when every arrow that dispute offers would close a cycle,
    so "no arrow" is only tried where :func:`_may_skip` allows. Depth-first over the
    disputes; each step is one reachability search, O(n + m).
    """
    directed = [d.arrows() for d in disputes]
    may_skip = _may_skip(fixed_dag, disputes)
    children = {n: set(c) for n, c in fixed_dag.children.items()}
    found: dict[frozenset, list[Edge]] = {}
    chosen: list[Edge | None] = []

    def leaf() -> bool:
        maximal = all(all(_reaches(children, b, a) for a, b in directed[i])
                      for i, c in enumerate(chosen) if c is None)
        if maximal:
            edges = [c for c in chosen if c is not None]
            found.setdefault(frozenset(edges), edges)
        return len(found) <= cap

    def walk(i: int) -> bool:
        if i == len(disputes):
            return leaf()
        for a, b in directed[i]:
            if _reaches(children, b, a):
                continue  # would close a cycle
            fresh = b not in children[a]
            children[a].add(b)
            chosen.append((a, b))
            going = walk(i + 1)
            chosen.pop()
            if fresh:
                children[a].discard(b)
            if not going:
                return False
        if may_skip[i]:
            chosen.append(None)
            going = walk(i + 1)
            chosen.pop()
            return going
        return True

    complete = walk(0)
    return list(found.values())[:cap], complete


# ---------------------------------------------------------------------------
# Sets valid in every combination
# ---------------------------------------------------------------------------

def _minimal_unions(lists: list[list[frozenset]], cap: int) -> list[frozenset] | None:
    """The inclusion-minimal sets formed by taking one set from each list and joining
    them (None when more than ``cap`` would have to be kept)."""
    unions: list[frozenset] = [frozenset()]
    for options in lists:
        joined = {u | m for u in unions for m in options}
        unions = []
        for u in sorted(joined, key=len):
            if not any(v <= u for v in unions):
                unions.append(u)
                if len(unions) > cap:
                    return None
    return unions


def common_adjustment_sets(fixed_dag: Dag, disputes: list[Dispute], xs: set[str],
                           ys: set[str], observed: set[str]) -> CommonSets:
    """The minimal adjustment sets that are valid in every combination of the disputes.

    Adding an arrow never turns an invalid set into a valid one (module notes), so the
    sets valid everywhere are those valid in each fullest combination
    (:func:`fullest_combinations`). With one, they are that diagram's minimal
    adjustment sets (listed with polynomial delay, van der Zander et al. 2019); with
    several they are searched by size (:class:`_CommonSearch`).
    """
    fullest, all_found = fullest_combinations(fixed_dag, disputes)
    if not all_found:
        return CommonSets([], False, "too-many")
    if not fullest:
        return CommonSets([], True, "none")
    if len(fullest) == 1:
        q = Question.on_dag(fixed_dag.with_edges(fullest[0]), xs, ys, observed)
        sets, more = minimal_adjustment_sets(q)
        return CommonSets(sets, not more, "fullest", drawn=len(fullest[0]),
                          dispute_count=len(disputes), more=more)
    questions = [Question.on_dag(fixed_dag.with_edges(edges), xs, ys, observed) for edges in fullest]
    return _common_by_refinement(fixed_dag, questions, xs, ys, observed)


def _common_by_refinement(fixed_dag: Dag, questions: list[Question], xs: set[str], ys: set[str],
                          observed: set[str]) -> CommonSets:
    """The sets valid in every fullest diagram, found from a few of them.

    Let M(D) be the minimal sets (over variables allowed in every diagram) valid in
    each diagram of D. If every set of M(D) is valid in all diagrams, M(D) is the
    answer: a set S minimal among those valid everywhere is valid in D, so it contains
    some T in M(D); T is valid everywhere, so S = T; and T is minimal everywhere since
    a smaller set valid everywhere would be valid in D. If M(D) is empty, no set is
    valid everywhere. Otherwise a diagram in which a set of M(D) fails joins D, and the
    search repeats (at most once per diagram). This proof replaces a time budget
    whenever each M(D) is found exactly; if not, the search over all diagrams decides.
    """
    forbidden = set().union(*(q.forb for q in questions))
    started = time.perf_counter()
    chosen = [questions[0]]
    while True:
        result = _CommonSearch(fixed_dag, list(chosen), xs, ys, observed, forbidden, started,
                               COMMON_SEARCH_BUDGET_S / 2).run()
        if not result.complete:
            break
        failing: list[Question] = []
        for zs in result.sets:
            bad = next((q for q in questions if not is_adjustment_set(q, zs)), None)
            if bad is not None and all(bad is not c for c in chosen + failing):
                failing.append(bad)
        if not failing:
            result.fullest_count, result.consulted = len(questions), len(chosen)
            if result.sets or result.reason == "exhausted":
                result.reason = "verified"
            return result
        chosen.extend(failing)
    return _CommonSearch(fixed_dag, questions, xs, ys, observed, forbidden).run()


class _CommonSearch:
    """The sets valid in each of several fullest diagrams, searched by size."""

    def __init__(self, fixed_dag: Dag, questions: list[Question], xs: set[str],
                 ys: set[str], observed: set[str], forbidden: set[str] | None = None,
                 started: float | None = None, budget: float = COMMON_SEARCH_BUDGET_S):
        self.questions, self.xs, self.ys = questions, xs, ys
        if forbidden is None:
            forbidden = set().union(*(q.forb for q in questions))
        self.pool = self._pool(fixed_dag, observed, forbidden)
        self.found: list[frozenset] = []
        self.started = time.perf_counter() if started is None else started
        self.budget = budget

    def _pool(self, fixed_dag: Dag, observed: set[str], forbidden: set[str]) -> list[str]:
        """Measured variables connected to X u Y in some diagram and allowed in all
        (``forbidden``: forbidden in at least one fullest diagram)."""
        neighbours: dict[str, set[str]] = {n: set() for n in fixed_dag.children}
        for q in self.questions:
            for a, cs in q.dag.children.items():
                for b in cs:
                    neighbours[a].add(b)
                    neighbours[b].add(a)
        reach, stack = set(self.xs | self.ys), list(self.xs | self.ys)
        while stack:
            for m in neighbours[stack.pop()]:
                if m not in reach:
                    reach.add(m)
                    stack.append(m)
        return sorted((reach & observed) - self.xs - self.ys - forbidden)

    def _result(self, complete: bool, reason: str, checked_size: int = -1) -> CommonSets:
        sets = sorted((sorted(f) for f in self.found), key=lambda s: (len(s), s))
        return CommonSets(sets, complete, "search", reason, fullest_count=len(self.questions),
                          pool_size=len(self.pool), checked_size=checked_size)

    def valid_everywhere(self, zs: set[str]) -> bool:
        """Is ``zs`` an adjustment set in every diagram of the search?"""
        # Most sets fail somewhere; ask the diagram that refused the last one first.
        for i, q in enumerate(self.questions):
            if not is_adjustment_set(q, zs):
                if i:
                    self.questions.insert(0, self.questions.pop(i))
                return False
        return True

    def _out_of_time(self) -> bool:
        return time.perf_counter() - self.started > self.budget

    def _guides(self) -> tuple[list[frozenset], list[list[frozenset]]] | None:
        """Anchors to grow and the other diagrams' complete minimal-set lists; None when
        some diagram has no adjustment set at all."""
        lists: list[list[frozenset]] = []
        for q in self.questions[:ANCHOR_DIAGRAMS]:
            if time.perf_counter() - self.started > self.budget / 2:
                break
            sets, more = minimal_adjustment_sets(q)
            if not more:
                lists.append([frozenset(x) for x in sets])
        if any(not m for m in lists):
            return None
        lists.sort(key=len)
        pool = set(self.pool)
        lists = [[m for m in ms if m <= pool] for ms in lists]
        anchors, others = (lists[0] if lists else [frozenset()]), lists[1:]
        if len(lists) == len(self.questions):
            # Every list is known: a set valid everywhere contains a union of one
            # minimal set from each, so grow the minimal such unions instead.
            unions = _minimal_unions(lists, UNION_CAP)
            if unions is not None:
                anchors, others = unions, []
        return anchors, others

    def run(self) -> CommonSets:
        """The search: emptiness checks, then growth by size, then shrinking beyond it."""
        # Within the variables allowed everywhere, a diagram has a valid set only if its
        # ancestors of X u Y among them form one (van der Zander et al. 2019, with the
        # allowed variables restricted): if one diagram has none, none is valid everywhere.
        allowed = set(self.pool)
        if any(not is_adjustment_set(q, q.dag.ancestors(self.xs | self.ys) & allowed)
               for q in self.questions):
            return self._result(True, "none-allowed")
        guides = self._guides()
        if guides is None:
            return self._result(True, "none-somewhere")
        anchors, others = guides
        checked_size, stop = self._grow(anchors, others)
        exhaustive = stop == "exhausted" or checked_size >= len(self.pool) or not anchors
        if exhaustive:
            return self._result(True, "exhausted", checked_size)
        shrunk = self._shrink_beyond(checked_size)
        out = self._result(False, stop, checked_size)
        out.shrunk = shrunk
        return out

    def _grow(self, anchors: list[frozenset], others: list[list[frozenset]]) -> tuple[int, str]:
        """Grow the anchors size by size. Returns (every set up to this size checked, why
        it stopped: "exhausted", "time" or "cap")."""
        pool = set(self.pool)
        lowest = min((len(m) for m in anchors), default=0)
        checked_size = lowest - 1
        for size in range(lowest, len(self.pool) + 1):
            covered = self._grow_size(anchors, others, pool, size)
            if covered is None:
                return checked_size, "time"
            if len(self.found) >= SET_CAP:
                return checked_size, "cap"
            checked_size = size
            if covered:
                # Each larger set around an anchor contains one of this size, hence a found set.
                return checked_size, "exhausted"
        return checked_size, "exhausted"

    def _grow_size(self, anchors, others, pool: set[str], size: int) -> bool | None:
        """Check every anchor extended to ``size`` variables; True when each candidate
        contains a set already found, None when the time budget ran out."""
        seen: set[frozenset] = set()
        covered = True
        checks = 0
        for anchor in anchors:
            if len(anchor) > size:
                continue
            for extra in itertools.combinations(sorted(pool - anchor), size - len(anchor)):
                checks += 1
                if checks % 128 == 0 and self._out_of_time():
                    return None
                zs = anchor.union(extra)
                if zs in seen:
                    continue
                seen.add(zs)
                if any(f <= zs for f in self.found):
                    continue  # contains a valid set, so not minimal
                covered = False
                if not all(any(m <= zs for m in ms) for ms in others):
                    continue  # invalid in a diagram that has none of its minimal sets inside
                if self.valid_everywhere(set(zs)):
                    self.found.append(zs)
        return covered

    def _shrink_beyond(self, checked_size: int) -> list[str] | None:
        """Beyond the searched sizes: shrink the largest set allowed everywhere, if it is
        valid, and keep it when none of its subsets is valid everywhere."""
        ancestors = set().union(*(q.dag.ancestors(self.xs | self.ys) for q in self.questions))
        big = set(self.pool) & ancestors
        if len(big) <= checked_size or any(f <= big for f in self.found) or not self.valid_everywhere(big):
            return None
        small = set(big)
        for name in sorted(big):
            if self.valid_everywhere(small - {name}):
                small -= {name}
        if len(small) > COMMON_VERIFY_LIMIT or any(f <= small for f in self.found):
            return None
        proper = (set(c) for k in range(checked_size + 1, len(small))
                  for c in itertools.combinations(sorted(small), k))
        if any(self.valid_everywhere(c) for c in proper):
            return None
        self.found.append(frozenset(small))
        return sorted(small)


# ---------------------------------------------------------------------------
# Decisive disputes and every combination
# ---------------------------------------------------------------------------

class _Engine:
    """The engine's answer for one set of arrows, asked once per distinct set."""

    def __init__(self, names: list[str], xs: set[str], ys: set[str], observed: set[str]):
        self.names, self.xs, self.ys, self.observed = names, xs, ys, observed
        self.answers: dict[frozenset, tuple[Answer | None, list[str] | None]] = {}

    def answer(self, edges: list[Edge], dag: Dag | None = None) -> tuple[Answer | None, list[str] | None]:
        """(answer, None), or (None, cycle) when the arrows close a cycle."""
        key = frozenset(edges)
        if key not in self.answers:
            dag = dag or Dag(self.names, edges)
            cycle = dag.find_cycle()
            if cycle:
                self.answers[key] = (None, cycle)
            else:
                q = Question.on_dag(dag, self.xs, self.ys, self.observed)
                self.answers[key] = (Answer.of(answer_question(q)), None)
        return self.answers[key]


    def still_valid(self, edges: list[Edge], sets) -> tuple[tuple[str, ...], ...]:
        """Which of ``sets`` are valid adjustment sets with ``edges`` (an acyclic set of arrows)."""
        q = Question.on_dag(Dag(self.names, edges), self.xs, self.ys, self.observed)
        return tuple(s for s in sets if is_adjustment_set(q, s))


def _one_at_a_time(engine: _Engine, fixed: list[Edge], disputes: list[Dispute],
                   base: Answer) -> list[DisputeEffects]:
    """Each dispute's other options, with every other dispute as drawn."""
    current = [d.options[d.current] for d in disputes]
    out = []
    for index, d in enumerate(disputes):
        effects = []
        for o_index, option in enumerate(d.options):
            if o_index == d.current:
                effects.append(OptionEffect(option, "current", base))
                continue
            choice = list(current)
            choice[index] = option
            edges = fixed + [o for o in choice if o is not None]
            answer, cycle = engine.answer(edges)
            if cycle:
                effects.append(OptionEffect(option, "cycle", None, cycle))
            else:
                assert answer is not None  # the engine answers whenever there is no cycle
                effects.append(OptionEffect(option, base.change_to(answer), answer,
                                            still_valid=engine.still_valid(edges, base.sets)))
        out.append(DisputeEffects(d, effects))
    return out


def _combinations(disputes: list[Dispute], exact_limit: int,
                  seed: int) -> tuple[Iterable[tuple[int, ...]], CombinationCheck]:
    """Every combination when at most ``exact_limit``, else a seeded sample of that many."""
    sizes = [len(d.options) for d in disputes]
    total = 1
    for s in sizes:
        total *= s
    if total <= exact_limit:
        return (itertools.product(*(range(s) for s in sizes)),
                CombinationCheck(total, total, False, False, None))
    rng = random.Random(seed)
    picked = {tuple(rng.randrange(s) for s in sizes) for _ in range(exact_limit * 2)}
    combos = sorted(picked)[:exact_limit]
    return combos, CombinationCheck(total, len(combos), True, False, seed)


def _check_combinations(engine: _Engine, fixed: list[Edge], disputes: list[Dispute],
                        exact_limit: int, seed: int) -> CombinationCheck:
    """Count the combinations that close a cycle or leave the effect not identified.

    A combination with an adjustment set (:func:`has_adjustment_set`, linear time) is
    identified; the others are asked for front-door sets and instruments within
    OTHER_STRATEGY_BUDGET_S, and counted as not identified beyond it (and said so).
    """
    combos, check = _combinations(disputes, exact_limit, seed)
    started = time.perf_counter()
    engine_time = 0.0
    fixed_dag = Dag(engine.names, fixed)
    done = 0
    for combo in combos:
        if done and time.perf_counter() - started > COMBINATION_BUDGET_S:
            check.stopped_early, check.checked = True, done
            break
        done += 1
        choice = [disputes[i].options[k] for i, k in enumerate(combo)]
        added = [o for o in choice if o is not None]
        dag = fixed_dag.with_edges(added)
        cycle = dag.find_cycle()
        if cycle:
            check.cycle_count += 1
            if len(check.cycle_examples) < 3 and cycle not in check.cycle_examples:
                check.cycle_examples.append(cycle)
            continue
        if has_adjustment_set(Question.on_dag(dag, engine.xs, engine.ys, engine.observed)):
            continue
        identified = False
        if engine_time < OTHER_STRATEGY_BUDGET_S:
            t0 = time.perf_counter()
            answer, _ = engine.answer(fixed + added, dag)
            engine_time += time.perf_counter() - t0
            identified = bool(answer and answer.identifiable)
        else:
            check.other_unchecked += 1
        if not identified:
            check.not_identified_count += 1
            if len(check.not_identified) < 50:
                check.not_identified.append(choice)
    return check


def analyse_disputes(dag: Dag, disputes: list[Dispute], xs: Iterable[str], ys: Iterable[str],
                     observed: Iterable[str], base: Answer, *, exact_limit: int = EXACT_LIMIT,
                     seed: int = SAMPLE_SEED) -> DisputeAnalysis:
    """Which disputes change the answer, and what holds across every combination.

    ``dag`` is the diagram as drawn (disputed arrows included as they are drawn now);
    ``base`` the engine's answer for it.
    """
    xs, ys, observed = set(xs), set(ys), set(observed)
    pairs = {frozenset(d.pair) for d in disputes}
    fixed = [(a, b) for a, b in dag.edges() if frozenset((a, b)) not in pairs]
    engine = _Engine(list(dag.nodes), xs, ys, observed)
    started = time.perf_counter()
    items = _one_at_a_time(engine, fixed, disputes, base)
    check = _check_combinations(engine, fixed, disputes, exact_limit, seed)
    common = common_adjustment_sets(Dag(dag.nodes, fixed), disputes, xs, ys, observed)
    return DisputeAnalysis(items, check, common, round((time.perf_counter() - started) * 1000, 1))


# ---------------------------------------------------------------------------
# Absent arrows
# ---------------------------------------------------------------------------

def _listed_answers(result: dict) -> tuple[str | None, list[list[str]]]:
    """The answer kind and its listed items (each a list of names; an instrument is
    [instrument, *conditioning set])."""
    strategy = result.get("strategy")
    sets = [sorted(s) for s in result.get("minimal_adjustment_sets", [])]
    if strategy == "adjustment" and sets:
        return "adjustment", sets
    if strategy == "front-door" and result.get("front_door_sets"):
        return "front-door", [sorted(s) for s in result["front_door_sets"]]
    if strategy == "instrument" and result.get("instruments"):
        return "instrument", [[i["instrument"], *i["given"]] for i in result["instruments"]]
    return None, []


def _items_of(answer: dict) -> list[list[str]]:
    return _listed_answers(answer)[1]


class _SetCheck:
    """What an added arrow does to listed adjustment or front-door sets.

    Adding an arrow never makes an invalid adjustment set valid (module notes, fact 1),
    and never makes a set a front-door set: each of Pearl's three conditions is a
    directed-path or d-separation statement that extra arrows can only violate. So the
    listed minimal sets change exactly when one of them breaks, and then the engine is
    asked again only when all of them break.
    """

    def __init__(self, answer: str, listed: list[list[str]]):
        self.answer, self.listed = answer, listed

    def holds(self, q: Question, item: list[str]) -> bool:
        return is_adjustment_set(q, item) if self.answer == "adjustment" else is_front_door_set(q, item)

    def change(self, q: Question, u: str, v: str) -> AbsentArrow | None:
        broken = [i for i in self.listed if not self.holds(q, i)]
        if not broken:
            return None
        if len(broken) < len(self.listed):
            return AbsentArrow(u, v, broken, "some")
        if self.answer == "adjustment" and has_adjustment_set(q):
            return AbsentArrow(u, v, broken, "new-set")
        after = answer_question(q)
        if after.get("strategy") == self.answer:
            return AbsentArrow(u, v, broken, "new-set")
        return AbsentArrow(u, v, broken, "none-left", after.get("strategy"), _items_of(after)[:3])


class _InstrumentCheck:
    """What an added arrow does to the instruments (the answer is "instrument" or none).

    No adjustment or front-door set can appear (see :class:`_SetCheck`), but instruments
    can: extra arrows can d-connect a variable to the treatment. Whether z is an
    instrument, and with which conditioning set, depends only on the subgraph induced
    by an(Y u {z}) (:func:`~app.graph.identification.instrument_for`), so an arrow
    u -> v can change it only when v is in an(Y u {z}); and a variable that no allowed
    set separates from Y never becomes an instrument
    (:func:`~app.graph.identification.is_separable_from_outcome`).
    """

    def __init__(self, q: Question, answer: str | None, listed: list[list[str]]):
        self.answer = answer
        self.old = {i[0]: i[1:] for i in listed}
        self.full = not q.cn  # a first causal path changes every candidate
        self.watch = set(self.old) | {z for z in instrument_candidates(q)
                                      if z not in self.old and is_separable_from_outcome(q, z)}
        self.outcome_ancestors = q.dag.ancestors(q.ys)
        self.fragile = {z: _Fragility(q, z, set(given), set(q.ys)) for z, given in self.old.items()}

    def affected(self, dag: Dag, v: str) -> set[str] | None:
        """Variables whose status an arrow into v may change (None: all of them)."""
        if self.full:
            return None
        return set(self.watch) if v in self.outcome_ancestors else self.watch & dag.descendants([v])

    def _untouched(self, z: str, u: str, v: str) -> bool:
        """Is z surely still an instrument given its listed set after adding u -> v?"""
        return not self.fragile[z].may_break(u, v)

    def change(self, q: Question, u: str, v: str, affected: set[str] | None) -> AbsentArrow | None:
        if affected is None:
            new = {i["instrument"]: i["given"] for i in instruments(q)}
            affected = rechecked = set(new) | set(self.old)
        else:
            new = {z: g for z, g in self.old.items() if z not in affected}
            rechecked = set()
            for z in affected:
                if z in self.old and (self._untouched(z, u, v) or is_instrument(q, z, self.old[z])):
                    new[z] = self.old[z]  # still an instrument given the same set
                    continue
                rechecked.add(z)
                entry = instrument_for(q, z)
                if entry is not None:
                    new[z] = entry["given"]
        lost = [[z, *self.old[z]] for z in sorted(affected) if z in self.old and z not in new]
        regiven = [(z, self.old[z], new[z]) for z in sorted(affected) if z in self.old and z in new
                   and z in rechecked and not is_instrument(q, z, self.old[z])]
        gained = [[z, *new[z]] for z in sorted(new) if z not in self.old]
        if not (lost or regiven or gained):
            return None
        broken = lost + [[z, *old] for z, old, _ in regiven]
        if self.answer is None:
            return AbsentArrow(u, v, [], "identified", "instrument", gained[:3], gained=gained)
        if not new:
            return AbsentArrow(u, v, broken, "none-left", None)
        return AbsentArrow(u, v, broken, "instruments", regiven=regiven, gained=gained)


def _ball(dag: Dag, sources: set[str], given: set[str]) -> set[tuple[str, bool]]:
    """The states (node, arrived from a child) of the d-separation search from ``sources``
    given ``given`` (as in :meth:`Dag.d_connected`)."""
    opened = dag.ancestors(given)
    stack = [(s, True) for s in sources]
    seen: set[tuple[str, bool]] = set()
    while stack:
        state = stack.pop()
        if state in seen:
            continue
        seen.add(state)
        v, upward = state
        if v not in given:
            stack.extend((c, False) for c in dag.children[v])
            if upward:
                stack.extend((p, True) for p in dag.parents[v])
        elif not upward:
            stack.extend((p, True) for p in dag.parents[v])
        if not upward and v not in given and v in opened:
            stack.extend((p, True) for p in dag.parents[v])
    return seen


class _Fragility:
    """Which added arrows could break "z is an instrument given W".

    After adding u -> v: z stays d-connected to x given W (extra arrows never block a
    path); W and z stay non-descendants of x unless v is an ancestor of one of them;
    the new proper back-door graph is a subgraph of the old one plus the arrow. So z
    stays d-separated from Y given W unless v is in an(W u {z}) (new ancestors of W
    open colliders) or a new path runs through the arrow: z reaches u and Y reaches v
    from one of v's children (z ... u -> v ... Y), or z reaches v from a child and Y
    reaches u (z ... v <- u ... Y), each outside W. One search from z and one from Y,
    then O(1) per arrow.
    """

    def __init__(self, q: Question, z: str, given: set[str], ys: set[str]):
        self.given, self.z, self.ys = given, z, ys
        self.up_of_w = q.dag.ancestors(given | {z})
        self.from_z = _ball(q.pbd, {z}, given)
        self.from_y = _ball(q.pbd, ys, given)
        self.z_nodes = {n for n, _ in self.from_z}
        self.y_nodes = {n for n, _ in self.from_y} | ys

    def may_break(self, u: str, v: str) -> bool:
        """Could adding u -> v break the instrument (class notes)? False is a proof."""
        if v in self.up_of_w:
            return True
        if u in self.given or v in self.given:
            return False
        forward = u in self.z_nodes and (v in self.ys or (v, True) in self.from_y)
        backward = ((v, True) in self.from_z or v == self.z) and u in self.y_nodes
        return forward or backward


def find_absent_arrows(dag: Dag, xs: Iterable[str], ys: Iterable[str], observed: Iterable[str],
                       result: dict) -> AbsentArrows:
    """Arrows not drawn whose addition would change the engine's answer.

    Parameters
    ----------
    dag : Dag
        The diagram as drawn.
    xs, ys, observed : iterable of str
        Treatment, outcome and measured variables.
    result : dict
        The engine's answer for the diagram (:func:`~app.graph.identification.answer_question`).

    Returns
    -------
    AbsentArrows
        Every arrow whose addition keeps the diagram acyclic and changes the answer:
        the listed minimal adjustment sets or front-door sets (:class:`_SetCheck`), or
        the instruments, including new ones for an effect not identified
        (:class:`_InstrumentCheck`). Stops after ABSENT_BUDGET_S and says so.
    """
    xs, ys, observed = set(xs), set(ys), set(observed)
    answer, listed = _listed_answers(result)
    more = answer == "adjustment" and bool(result.get("more_sets_exist"))
    work = Dag(dag.nodes, dag.edges())  # a private copy: arrows are added and removed in place
    if answer in ("adjustment", "front-door"):
        sets = _SetCheck(answer, listed)
        # Only arrows into an(X u Y u listed variables) can matter (module notes, fact 2).
        targets = sorted(work.ancestors(xs | ys | set().union(*(set(i) for i in listed))))
        judge = lambda q, u, v, affected: sets.change(q, u, v)  # noqa: E731

        def scope(v: str) -> tuple[bool, set[str] | None]:
            return True, None
    else:
        ivs = _InstrumentCheck(Question.on_dag(work, xs, ys, observed), answer, listed)
        targets, judge = list(work.nodes), ivs.change

        def scope(v: str) -> tuple[bool, set[str] | None]:
            affected = ivs.affected(work, v)
            return affected is None or bool(affected), affected
    found, checked, stopped = _scan(work, targets, scope, judge, xs, ys, observed)
    return AbsentArrows(answer, found, checked, stopped, more)


def _scan(dag: Dag, targets: list[str], scope, judge, xs: set[str], ys: set[str],
          observed: set[str]) -> tuple[list[AbsentArrow], int, bool]:
    """Add each arrow u -> v (v in ``targets``) that is not drawn and closes no cycle, and
    ask ``judge``; ``scope(v)`` says whether an arrow into v can matter at all, and what
    it may affect."""
    linked = {frozenset(e) for e in dag.edges()}
    found: list[AbsentArrow] = []
    checked, started = 0, time.perf_counter()
    for v in targets:
        matters, affected = scope(v)
        if not matters:
            continue
        if time.perf_counter() - started > ABSENT_BUDGET_S:
            return found, checked, True
        descendants_of_v = dag.descendants([v])
        for u in dag.nodes:
            if u == v or frozenset((u, v)) in linked or u in descendants_of_v:
                continue  # drawn already, or the new arrow would close a cycle
            checked += 1
            if checked % 64 == 0 and time.perf_counter() - started > ABSENT_BUDGET_S:
                return found, checked, True
            dag.parents[v].add(u)
            dag.children[u].add(v)
            try:
                change = judge(Question.on_dag(dag, xs, ys, observed), u, v, affected)
                if change is not None:
                    found.append(change)
            finally:
                dag.parents[v].discard(u)
                dag.children[u].discard(v)
    return found, checked, False
