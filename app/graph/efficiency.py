"""The most efficient adjustment set over measured variables when some are unmeasured.

Without unmeasured variables the O-set pa(cn) minus forb is valid whenever any
adjustment set is, and has the smallest asymptotic variance among valid sets for
linear estimators (Henckel, Perkovic & Maathuis 2022). When it contains an
unmeasured variable, the best measured set may or may not exist (Smucler,
Sapienza & Rotnitzky 2022; Runge 2021). This module builds the candidate from
the latent projection of the diagram onto its measured variables, decides whether
it is optimal, and otherwise looks among the minimal sets for one that is at
least as efficient as every other minimal set.

Terms (DAG G with treatment X, outcome Y, measured variables V)
----------------------------------------------------------------
projected parent   w in V is a projected parent of v when a directed path
                   w -> ... -> v has only unmeasured variables inside.
sibling            v and w in V are siblings (v <-> w in the latent projection)
                   when one unmeasured variable reaches both by directed paths
                   through unmeasured variables only.
comparison         Z1 is at least as efficient as Z2 (both valid) when
                   Y d-separated from Z2 minus Z1 given X u Z1, and X
                   d-separated from Z1 minus Z2 given Z2 (the graphical
                   comparison criterion of Henckel et al. 2022, recalled from
                   memory); then a.var(Z1) <= a.var(Z2) in every linear model of G.
candidate O        the projected parents of the measured mediators and outcome
                   (not forbidden), the measured variables joined to them by
                   chains of siblings (not descendants of X, not forbidden,
                   not siblings of X's own chain), and the projected parents
                   of those (after the collider-path extension of Runge 2021,
                   definition recalled from memory).

The candidate is called optimal when no valid set between its projected parents
and itself drops a variable that matters for X (the comparison's second
condition); the tests hold every claim to brute force over all valid sets in
random linear Gaussian models with unmeasured variables.

References
----------
Henckel, L., Perkovic, E., Maathuis, M. (2022). Graphical criteria for efficient
  total effect estimation via adjustment in causal linear models. JRSS-B 84(2).
Runge, J. (2021). Necessary and sufficient graphical conditions for optimal
  adjustment sets in causal graphical models with hidden variables. NeurIPS 34.
Smucler, E., Sapienza, F., Rotnitzky, A. (2022). Efficient adjustment sets in
  causal graphical models with hidden variables. Biometrika 109(1).
"""

from __future__ import annotations

import itertools
from typing import Callable, Iterable

from .dag import Dag

__all__ = ["projected_parents", "measured_optimal_candidate", "is_at_least_as_efficient",
           "is_candidate_optimal", "most_efficient_minimal", "SUBSET_LIMIT"]

SUBSET_LIMIT = 12  # the candidate's subsets are checked when it has at most this many variables


def _through_unmeasured(dag: Dag, v: str, observed: set[str]) -> tuple[set[str], set[str]]:
    """(projected parents of v, unmeasured variables reaching v through unmeasured ones)."""
    parents, hidden = set(), set()
    stack, seen = [v], {v}
    while stack:
        for p in dag.parents[stack.pop()]:
            if p in seen:
                continue
            seen.add(p)
            if p in observed:
                parents.add(p)
            else:
                hidden.add(p)
                stack.append(p)
    return parents, hidden


def projected_parents(dag: Dag, v: str, observed: Iterable[str]) -> set[str]:
    """Measured variables with a directed path into ``v`` through unmeasured ones only.

    >>> dag = Dag(["w", "u", "y"], [("w", "u"), ("u", "y")])
    >>> sorted(projected_parents(dag, "y", {"w", "y"}))
    ['w']
    """
    return _through_unmeasured(dag, v, set(observed))[0]


def _sibling_chain(starts: set[str], pool: set[str], hidden_of: dict[str, set[str]]) -> set[str]:
    """Variables of ``pool`` joined to ``starts`` by chains of siblings inside ``pool``
    (through an index from each unmeasured variable to the measured ones it reaches)."""
    members: dict[str, list[str]] = {}
    for b in pool:
        for h in hidden_of[b]:
            members.setdefault(h, []).append(b)
    found: set[str] = set()
    used: set[str] = set()
    frontier = list(starts)
    while frontier:
        for h in hidden_of[frontier.pop()] - used:
            used.add(h)
            for b in members.get(h, ()):
                if b not in found and b not in starts:
                    found.add(b)
                    frontier.append(b)
    return found


def measured_optimal_candidate(dag: Dag, xs: set[str], ys: set[str], observed: set[str],
                               cn: set[str], forb: set[str]) -> tuple[set[str], set[str]]:
    """The candidate O over measured variables (module notes).

    Parameters
    ----------
    dag : Dag
        The diagram, unmeasured variables included.
    xs, ys, observed, cn, forb : set of str
        Treatment, outcome, measured variables, cn(X, Y) and forb(X, Y)
        (Perkovic et al. 2018, Definition 3.3).

    Returns
    -------
    (set of str, set of str)
        The projected parents part and the sibling extension (its union is O);
        O(n (n + m)).
    """
    measured = set(observed) | set(xs) | set(ys)
    info = {v: _through_unmeasured(dag, v, measured) for v in measured}
    hidden_of = {v: h for v, (_, h) in info.items()}
    area = dag.ancestors(xs | ys)
    allowed = (area & set(observed)) - forb - xs - ys
    parents = set().union(*(info[m][0] for m in cn & measured)) & allowed
    pool = set(observed) - forb - xs - ys - dag.descendants(xs)
    pool -= _sibling_chain(set(xs), pool, hidden_of)  # conditioning on those would open X <-> ... <-> Y
    chain = _sibling_chain(cn & measured, pool, hidden_of)
    extension = chain.union(*(info[d][0] for d in chain)) & pool
    return parents, extension - parents


def is_at_least_as_efficient(dag: Dag, xs: set[str], ys: set[str], z1: set[str], z2: set[str]) -> bool:
    """Henckel, Perkovic & Maathuis (2022), graphical comparison: for valid Z1 and Z2, Z1 is at
    least as efficient as Z2 in every linear model of G when Y is d-separated from
    Z2 minus Z1 given X u Z1 and X from Z1 minus Z2 given Z2."""
    extra2, extra1 = set(z2) - set(z1), set(z1) - set(z2)
    if extra2 and not dag.is_d_separated(ys, extra2, xs | set(z1)):
        return False
    return not extra1 or dag.is_d_separated(xs, extra1, set(z2))


def is_candidate_optimal(dag: Dag, xs: set[str], parents: set[str], extension: set[str],
                         is_valid: Callable[[set[str]], bool]) -> bool | None:
    """Is the candidate O = parents u extension at least as efficient as each valid set
    that keeps its projected parents and drops some of the extension?

    A valid Z for which X is not d-separated from the dropped variables given Z can be
    made more efficient than O by weakening their links to Y (the comparison's second
    condition fails). Only the extension is varied: the projected parents play the part
    of Henckel et al.'s O-set, which no subset improves on. 2^|extension| checks; None
    when the extension has more than SUBSET_LIMIT variables (not decided).
    """
    if len(extension) > SUBSET_LIMIT:
        return None
    candidate = parents | extension
    for size in range(len(extension)):
        for kept in itertools.combinations(sorted(extension), size):
            zs = parents | set(kept)
            if is_valid(zs) and not dag.is_d_separated(xs, candidate - zs, zs):
                return False
    return True


def most_efficient_minimal(dag: Dag, xs: set[str], ys: set[str],
                           minimal_sets: list[list[str]]) -> list[str] | None:
    """A minimal set at least as efficient as every other listed minimal set by the
    comparison (Henckel et al. 2022), or None when none is shown to be.

    One pass keeps the set that the comparison favours, then the survivor is checked
    against every other: 2k comparisons for k sets instead of k^2.
    """
    best = set(minimal_sets[0]) if minimal_sets else set()
    for other in minimal_sets[1:]:
        o = set(other)
        if not is_at_least_as_efficient(dag, xs, ys, best, o) and is_at_least_as_efficient(dag, xs, ys, o, best):
            best = o
    if all(is_at_least_as_efficient(dag, xs, ys, best, set(other)) for other in minimal_sets):
        return sorted(best)
    return None
