"""What a causal diagram implies for the effect of treatment X on outcome Y.

Pure functions over a validated :class:`~app.graph.document.Diagram`.
:func:`analyze` runs everything the workshop panel shows; the other public
functions answer one question each.

Terms
-----
proper causal path   a directed path X -> ... -> Y meeting X only at its start.
cn(X, Y)             nodes other than X on proper causal paths (mediators and Y).
forb(X, Y)           de(cn) u X: variables an adjustment set may not contain
                     (Perkovic, Textor, Kalisch & Maathuis 2018, Definition 3.3).
adjustment set       Z with Z n forb = {} that blocks every proper non-causal
                     path (the complete adjustment criterion of Shpitser,
                     VanderWeele & Robins 2010), equivalently Z n forb = {} and
                     Z d-separates X and Y in the proper back-door graph
                     (van der Zander, Liskiewicz & Textor 2019, Theorem 5).
optimal set          O = pa(cn) \\ forb, valid whenever any adjustment set is,
                     with the smallest asymptotic variance among valid sets for
                     linear estimators (Henckel, Perkovic & Maathuis 2022).
front-door set       Z intercepting every directed X->Y path, with no open
                     back-door path from X to Z, and every back-door path from
                     Z to Y blocked by X (Pearl 1995; Pearl 2009, Def. 3.3.3),
                     read for sets as (X ⊥ Z) in G without arrows out of X
                     and (Z ⊥ Y | X) in G without arrows out of Z (Jeong,
                     Tian & Bareinboim 2022).
instrument           z with conditioning set W (W free of descendants of X):
                     z d-connected to X given W, and d-separated from Y given W
                     once the causal arrows out of X are removed
                     (Brito & Pearl 2002; van der Zander, Textor & Liskiewicz 2015).

References
----------
Pearl, J. (1995). Causal diagrams for empirical research. Biometrika 82(4).
Shpitser, I., VanderWeele, T., Robins, J. (2010). On the validity of covariate
  adjustment for estimating causal effects. UAI.
Perkovic, E., Textor, J., Kalisch, M., Maathuis, M. (2018). Complete graphical
  characterization and construction of adjustment sets in Markov equivalence
  classes of ancestral graphs. JMLR 18.
van der Zander, B., Liskiewicz, M., Textor, J. (2019). Separators and
  adjustment sets in causal graphs: complete criteria and an algorithmic
  framework. Artificial Intelligence 270.
Henckel, L., Perkovic, E., Maathuis, M. (2022). Graphical criteria for
  efficient total effect estimation via adjustment in causal linear models.
  JRSS-B 84(2).
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import combinations
from typing import Iterable

from . import efficiency
from .dag import Dag
from .document import Diagram
from .errors import BadQuestion
from .implications import implied_independencies
from .paths import PathReport, arrow_text, colliders_on_paths, describe_path, iter_paths, relevant_nodes
from .separators import iter_minimal_separators, moral_graph, reduce_graph

__all__ = [
    "Question",
    "analyze",
    "answer_question",
    "check_adjustment",
    "has_adjustment_set",
    "is_adjustment_set",
    "minimal_adjustment_sets",
    "optimal_adjustment_set",
    "most_efficient_minimal_set",
    "front_door_sets",
    "is_front_door_set",
    "instruments",
    "is_instrument",
    "find_instrument_conditioning",
    "instrument_candidates",
    "instrument_for",
    "is_separable_from_outcome",
    "implications",
    "roles",
    "list_paths",
]

PATH_CAP = 200
PATH_STEP_BUDGET = 1_000
SET_CAP = 50
FRONT_DOOR_CAP = 20
FRONT_DOOR_CHECK_BUDGET = 2_000
IMPLICATION_CAP = 1_000

_A, _B = "\0a", "\0b"


@dataclass
class Question:
    """The diagram prepared for one treatment/outcome question."""

    diagram: Diagram | None
    dag: Dag
    xs: frozenset[str]
    ys: frozenset[str]
    observed: frozenset[str]
    cn: frozenset[str]
    forb: frozenset[str]
    pbd: Dag

    @classmethod
    def of(
        cls,
        diagram: Diagram,
        treatment: Iterable[str] | None = None,
        outcome: Iterable[str] | None = None,
    ) -> "Question":
        xs = tuple(treatment) if treatment is not None else diagram.treatment
        ys = tuple(outcome) if outcome is not None else diagram.outcome
        if treatment is not None or outcome is not None:
            diagram = diagram.with_question(xs, ys)
        if not xs:
            raise BadQuestion("no treatment is set: say which variable's effect to study")
        if not ys:
            raise BadQuestion("no outcome is set: say which variable the effect is on")
        return cls.on_dag(Dag.from_diagram(diagram), xs, ys, diagram.observed, diagram=diagram)

    @classmethod
    def on_dag(
        cls,
        dag: Dag,
        treatment: Iterable[str],
        outcome: Iterable[str],
        observed: Iterable[str],
        diagram: Diagram | None = None,
    ) -> "Question":
        """The question asked of a bare graph (no document: for graphs derived from one).

        cn, forb and the proper back-door graph are computed once here
        (Perkovic et al. 2018, Definition 3.3; van der Zander et al. 2019).
        """
        xset, yset = frozenset(treatment), frozenset(outcome)
        cn = frozenset(dag.causal_nodes(xset, yset))
        forb = frozenset(dag.descendants(cn) | xset)
        pbd = dag.without_edges((x, w) for x in xset for w in dag.children[x] if w in cn)
        return cls(diagram, dag, xset, yset, frozenset(observed), cn, forb, pbd)

    @property
    def document(self) -> Diagram:
        """The diagram asked about (every question made by :meth:`of` has one)."""
        if self.diagram is None:
            raise ValueError("this question was asked of a bare graph, not of a diagram")
        return self.diagram

    @property
    def relevant(self) -> set[str]:
        """Inner nodes on at least one proper treatment-outcome path (computed once)."""
        cached = self.__dict__.get("_relevant")
        if cached is None:
            cached = relevant_nodes(self.dag, set(self.xs), set(self.ys))
            self.__dict__["_relevant"] = cached
        return cached

    def name_set(self, names: Iterable[str]) -> str:
        names = sorted(names)
        return "{" + ", ".join(names) + "}"


# ---------------------------------------------------------------------------
# Adjustment
# ---------------------------------------------------------------------------

def is_adjustment_set(q: Question, zs: Iterable[str]) -> bool:
    zs = set(zs)
    if zs & (q.xs | q.ys) or zs & q.forb or zs - q.observed:
        return False
    return q.pbd.is_d_separated(q.xs, q.ys, zs)


def has_adjustment_set(q: Question) -> bool:
    """Does any adjustment set over measured variables exist?

    Some set exists iff (an(X u Y) n observed) minus (X u Y u forb) is one
    (van der Zander, Liskiewicz & Textor 2019, the constructive set Adjust(X, Y),
    restricted to measured variables). Linear time.
    """
    canonical = (q.dag.ancestors(q.xs | q.ys) & q.observed) - q.xs - q.ys - q.forb
    return is_adjustment_set(q, canonical)


def answer_question(q: Question, *, set_cap: int = SET_CAP) -> dict:
    """Whether and how the effect is identified, for a prepared question: the minimal
    adjustment sets, the optimal set, and the front-door sets and instruments when no
    adjustment set exists (the cheap part of :func:`analyze`)."""
    return _identify(q, set_cap)


def check_adjustment(q: Question, zs: Iterable[str]) -> dict:
    """Check Z against the complete adjustment criterion and say why it fails."""
    zs = set(zs)
    for z in sorted(zs):
        q.document.variable(z)  # raises UnknownVariable with the name
    reasons: list[str] = []
    for z in sorted(zs & q.xs):
        reasons.append(f"{z} is a treatment variable and cannot also be adjusted for")
    for z in sorted(zs & q.ys):
        reasons.append(f"{z} is an outcome variable and cannot also be adjusted for")
    for z in sorted(zs - q.observed):
        reasons.append(f"{z} is unmeasured (latent), so it cannot be adjusted for")
    for z in sorted((zs & q.forb) - q.xs - q.ys):
        reasons.append(_forbidden_reason(q, z))
    rest = zs - q.xs - q.ys
    open_path = None
    if not q.pbd.is_d_separated(q.xs, q.ys, rest):
        open_path = _find_open_path(q.pbd, q, rest)
        if open_path is not None:
            reasons.append(
                f"the non-causal path {arrow_text(q.dag, open_path)} stays open "
                f"given {q.name_set(rest)}"
            )
        else:
            reasons.append(
                f"a non-causal path from {q.name_set(q.xs)} to {q.name_set(q.ys)} stays open "
                f"given {q.name_set(rest)} (too many paths to single one out)"
            )
    out = {"set": sorted(zs), "valid": not reasons, "reasons": reasons}
    if open_path is not None:
        out["open_path"] = open_path
    return out


def _forbidden_reason(q: Question, z: str) -> str:
    if z in q.cn:
        return (
            f"{z} lies on a causal path from {q.name_set(q.xs)} to {q.name_set(q.ys)} "
            "(a mediator); adjusting for it removes part of the effect"
        )
    ancestors = sorted(q.dag.ancestors([z]) & q.cn)
    via = next((a for a in ancestors if a in q.ys), ancestors[0])
    if via in q.ys:
        return f"{z} is a descendant of the outcome {via}; adjusting for it biases the estimate"
    return (
        f"{z} is a descendant of {via}, which lies on a causal path; "
        "adjusting for it biases the estimate"
    )


def _find_open_path(dag: Dag, q: Question, given: set[str]) -> list[str] | None:
    opened = dag.ancestors(given)
    allowed = set(dag.nodes) - q.xs - q.ys
    for path in iter_paths(dag, set(q.xs), set(q.ys), allowed=allowed, given=given,
                           opened=opened, budget=[PATH_STEP_BUDGET]):
        return path
    return None


def _reduced_back_door_graph(q: Question, extra_forbidden: Iterable[str] = ()) -> dict:
    area = q.dag.ancestors(q.xs | q.ys)
    adj = moral_graph(q.pbd, area)
    allowed = (area & q.observed) - q.xs - q.ys - q.forb - set(extra_forbidden)
    return reduce_graph(adj, set(q.xs), set(q.ys), allowed, _A, _B)


def minimal_adjustment_sets(q: Question, cap: int = SET_CAP) -> tuple[list[list[str]], bool]:
    """All minimal adjustment sets over observed variables (up to ``cap``)."""
    reduced = _reduced_back_door_graph(q)
    found: list[list[str]] = []
    for sep in iter_minimal_separators(reduced, _A, _B):
        if len(found) == cap:
            return sorted(found), True
        found.append(sorted(sep))
    return sorted(found), False


def optimal_adjustment_set(q: Question, any_valid: bool | None = None) -> tuple[list[str] | None, str]:
    """The O-set of Henckel, Perkovic & Maathuis (2022), or None with the reason."""
    parents = set()
    for w in q.cn:
        parents |= q.dag.parents[w]
    o_set = parents - q.forb
    if any_valid is None:
        any_valid = bool(minimal_adjustment_sets(q, cap=1)[0])
    if not any_valid:
        return None, "no adjustment set over measured variables exists, so there is no optimal one"
    hidden = sorted(o_set - q.observed)
    if hidden and q.cn and len(q.xs) == 1 and len(q.ys) == 1:
        return _optimal_among_measured(q, hidden)
    if hidden:
        return None, (
            "the optimal set would contain unmeasured "
            + ", ".join(hidden)
            + "; with several treatments or outcomes use one of the minimal adjustment sets"
        )
    if not q.cn:
        return None, (
            "the diagram has no causal path from treatment to outcome, "
            "so the effect is zero and no set is more efficient than another"
        )
    if not is_adjustment_set(q, o_set):  # pragma: no cover - guaranteed by the theorem
        return None, "the optimal set is not valid here"
    return sorted(o_set), (
        "parents of the mediators and the outcome that are not themselves affected by the "
        "treatment; among valid sets it gives the smallest variance for linear estimators"
    )


def _optimal_among_measured(q: Question, hidden: list[str]) -> tuple[list[str] | None, str]:
    """The optimal set when pa(cn) \\ forb has unmeasured variables (:mod:`app.graph.efficiency`)."""
    parents, extension = efficiency.measured_optimal_candidate(
        q.dag, set(q.xs), set(q.ys), set(q.observed), set(q.cn), set(q.forb))
    candidate = parents | extension
    unmeasured = ", ".join(hidden)
    why = ("the measured parents of the mediators and the outcome (through unmeasured variables too)"
           + (f", and {q.name_set(extension)}, which share an unmeasured cause with them or with those"
              if extension else ""))
    if is_adjustment_set(q, candidate):
        verdict = efficiency.is_candidate_optimal(q.dag, set(q.xs), parents, extension,
                                                  lambda zs: is_adjustment_set(q, zs))
        if verdict:
            return sorted(candidate), (
                f"the unmeasured {unmeasured} cannot be adjusted for; among measured variables this set "
                f"gives the smallest variance for linear estimators: {why}"
            )
        if verdict is None:
            return None, (f"the unmeasured {unmeasured} cannot be adjusted for, and the best measured set "
                          f"was not decided: {len(extension)} variables share unmeasured causes, too many to compare")
    return None, (
        f"the unmeasured {unmeasured} cannot be adjusted for, and no measured set has the smallest "
        "variance in every linear model: which is best depends on the strengths of the arrows"
    )


def most_efficient_minimal_set(q: Question, sets: list[list[str]]) -> tuple[list[str] | None, str]:
    """Among the minimal adjustment sets, one at least as efficient as each of the others
    in every linear model (Henckel et al. 2022, graphical comparison), with the reason."""
    if len(sets) < 2:
        return (list(sets[0]), "the only minimal adjustment set") if sets else (None, "")
    best = efficiency.most_efficient_minimal(q.dag, set(q.xs), set(q.ys), sets)
    if best is None:
        return None, "no minimal set is more efficient than the others in every linear model"
    return best, ("among the minimal sets, the one with the smallest variance for linear estimators "
                  "(it predicts the outcome at least as well and the treatment no better)")


# ---------------------------------------------------------------------------
# Front door and instruments
# ---------------------------------------------------------------------------

def is_front_door_set(q: Question, zs: Iterable[str]) -> bool:
    zs = set(zs)
    if not zs or zs & (q.xs | q.ys) or zs - q.observed:
        return False
    # (i) Z intercepts every directed path from X to Y.
    reach = q.dag.descendants([c for x in q.xs for c in q.dag.children[x] if c not in zs], avoid=zs)
    if reach & q.ys:
        return False
    # (ii) no open back-door path from X to Z.
    if not q.dag.without_edges_out_of(q.xs).is_d_separated(q.xs, zs, ()):
        return False
    # (iii) every back-door path from Z to Y is blocked by X.
    return q.dag.without_edges_out_of(zs).is_d_separated(zs, q.ys, q.xs)


def front_door_sets(q: Question, cap: int = FRONT_DOOR_CAP) -> tuple[list[list[str]], bool]:
    """Minimal front-door sets among observed variables, smallest first."""
    # Condition (ii) holds element by element, so it filters candidates first.
    # Mediators come first; other variables can be needed to satisfy (iii).
    back_door_reachable = q.dag.without_edges_out_of(q.xs).d_connected(q.xs, ())
    pool = q.observed - q.xs - q.ys - back_door_reachable - q.dag.descendants(q.ys)
    candidates = sorted(pool & q.cn) + sorted(pool - q.cn)
    if not pool & q.cn:
        return [], False
    found: list[frozenset[str]] = []
    checks = 0
    for size in range(1, len(candidates) + 1):
        for combo in combinations(candidates, size):
            chosen = frozenset(combo)
            if any(f <= chosen for f in found):
                continue
            checks += 1
            if checks > FRONT_DOOR_CHECK_BUDGET:
                return sorted(sorted(f) for f in found), True
            if is_front_door_set(q, chosen):
                if len(found) == cap:
                    return sorted(sorted(f) for f in found), True
                found.append(chosen)
    return sorted(sorted(f) for f in found), False


def is_instrument(q: Question, z: str, given: Iterable[str]) -> bool:
    given = set(given)
    if len(q.xs) != 1 or len(q.ys) != 1:
        return False
    (x,) = q.xs
    if z in q.xs | q.ys or z in given or z not in q.observed or given - q.observed:
        return False
    non_desc = set(q.dag.nodes) - q.dag.descendants(q.xs)
    if z not in non_desc or not given <= non_desc:
        return False
    if q.pbd.is_d_separated([z], q.ys, given):
        return q.dag.d_connected([z], given).__contains__(x)
    return False


def instruments(q: Question, conditional: bool = True) -> list[dict]:
    """Each observed variable that can serve as an instrument, with a conditioning set.

    Unconditional instruments (given nothing) are always listed; ``analyze``
    searches conditional ones only when no adjustment set exists (they are
    then the fallback). A conditional instrument is searched among ancestral
    conditioning sets, in polynomial time (:func:`find_instrument_conditioning`).

    Returns
    -------
    list of dict
        ``{"instrument": z, "given": sorted conditioning set}``, by name.
    """
    if len(q.xs) != 1 or len(q.ys) != 1 or not q.cn:
        return []
    (x,) = q.xs
    connected_x = q.dag.d_connected([x], ())
    connected_y = q.pbd.d_connected(q.ys, ())
    found = []
    for z in instrument_candidates(q):
        if z in connected_x and z not in connected_y:
            found.append({"instrument": z, "given": []})
        elif conditional:
            given = find_instrument_conditioning(q, z)
            if given is not None:
                found.append({"instrument": z, "given": sorted(given)})
    return found


def instrument_candidates(q: Question) -> list[str]:
    """Measured variables that are neither descendants of the treatment nor outcomes
    (an instrument must be one), sorted; empty unless one treatment, one outcome and a
    causal path between them."""
    if len(q.xs) != 1 or len(q.ys) != 1 or not q.cn:
        return []
    return sorted(q.observed - q.dag.descendants(q.xs) - q.ys)


def instrument_for(q: Question, z: str) -> dict | None:
    """:func:`instruments`' entry for the one variable ``z`` (None when it is none)."""
    if z not in instrument_candidates(q):
        return None
    (x,) = q.xs
    if q.pbd.is_d_separated([z], q.ys, ()) and not q.dag.is_d_separated([z], [x], ()):
        return {"instrument": z, "given": []}
    given = find_instrument_conditioning(q, z)
    return None if given is None else {"instrument": z, "given": sorted(given)}


def is_separable_from_outcome(q: Question, z: str) -> bool:
    """Can some allowed set inside an(z u Y) of the proper back-door graph d-separate z
    from Y there? Only then can z be an instrument (:func:`find_instrument_conditioning`);
    adding arrows never makes an inseparable variable separable (they add paths and
    descendants of the treatment)."""
    area = q.pbd.ancestors(q.ys | {z})
    allowed = (area & q.observed) - q.dag.descendants(q.xs) - q.ys - {z}
    return q.pbd.is_d_separated([z], q.ys, allowed)


def find_instrument_conditioning(q: Question, z: str) -> set[str] | None:
    """A set W that makes ``z`` an instrument, searched among W inside an(z u Y) of the
    proper back-door graph; None when no such W exists.

    Parameters
    ----------
    q : Question
        One treatment x and one outcome Y.
    z : str
        A measured variable that is not a descendant of x.

    Returns
    -------
    set of str or None
        The minimal z-Y separator nearest to Y among the allowed variables
        (measured, not descendants of x, not z or Y) in the moral graph of
        H[an_H(z u Y)], H the proper back-door graph, when it leaves z
        d-connected to x; else None.

    Notes
    -----
    After the nearest-separator construction of van der Zander, Textor &
    Liskiewicz (2015) for ancestral instruments. Why it is complete for
    W inside T = an_H(z u Y): such W d-separates z and Y in H exactly when it
    separates them in M, the moral graph of H[T] (an(z u Y u W) = T;
    Lauritzen et al. 1990). A path d-connecting z and x given W never uses an
    arrow out of x (W has no descendant of x), so it runs inside T up to a
    node t outside W, then down a directed path to x through an(x) minus T.
    Its part in T is a path in M avoiding W, so t lies in z's component of
    M - W, which is inside z's component of M - N for the separator N nearest
    to Y. Conversely a path from z to t in M - N avoids Y's component, and
    every node of T outside an(z u t u N), with the moral edges it adds,
    lies there; so that path is one in the moral graph of an(z u t u N),
    and z is d-connected to t, hence to x, given N. O(n + m) per variable
    beyond building M.

    References
    ----------
    van der Zander, B., Textor, J., Liskiewicz, M. (2015). Efficiently finding
      conditional instruments for causal inference. IJCAI.
    Brito, C., Pearl, J. (2002). Generalized instrumental variables. UAI.
    """
    (x,) = q.xs
    area = q.pbd.ancestors(q.ys | {z})
    allowed = (area & q.observed) - q.dag.descendants(q.xs) - q.ys - {z}
    moral = moral_graph(q.pbd, area)
    y_side = _component(moral, set(q.ys), allowed)
    if z in y_side:
        return None  # even every allowed variable leaves z and Y connected
    nearest = {w for v in y_side for w in moral[v] if w in allowed}
    z_side = _component(moral, {z}, nearest)
    given = {w for w in nearest if moral[w] & z_side}
    return given if x in q.dag.d_connected([z], given) else None


def _component(adj: dict[str, set[str]], start: set[str], blocked: set[str]) -> set[str]:
    """Vertices reachable from ``start`` in ``adj`` without entering ``blocked``."""
    seen, stack = set(start), list(start)
    while stack:
        for w in adj[stack.pop()]:
            if w not in seen and w not in blocked:
                seen.add(w)
                stack.append(w)
    return seen


# ---------------------------------------------------------------------------
# Implied independencies
# ---------------------------------------------------------------------------

def implications(diagram: Diagram, cap: int = IMPLICATION_CAP) -> tuple[list[dict], int, bool]:
    """One conditional independence per separable non-adjacent measured pair.

    See :mod:`app.graph.implications` (ordered local Markov statements of the
    latent projection). Returns (listed, total, capped).
    """
    listed, total = implied_independencies(Dag.from_diagram(diagram), diagram.observed, cap)
    return listed, total, total > len(listed)


# ---------------------------------------------------------------------------
# Paths and roles
# ---------------------------------------------------------------------------

def list_paths(q: Question, given: Iterable[str] = (), cap: int = PATH_CAP) -> tuple[list[dict], int, bool]:
    """Proper paths from X to Y, open ones first; (listed, counted, capped)."""
    given = set(given)
    opened = q.dag.ancestors(given)
    allowed = q.relevant
    seen: set[tuple[str, ...]] = set()
    reports: list[PathReport] = []
    # First the open paths (pruned search), so the ones that matter are listed.
    for nodes in iter_paths(q.dag, set(q.xs), set(q.ys), allowed=allowed, given=given,
                            opened=opened, budget=[PATH_STEP_BUDGET]):
        if len(reports) >= cap:
            break
        seen.add(tuple(nodes))
        reports.append(describe_path(q.dag, nodes, given, opened))
    budget = [PATH_STEP_BUDGET]
    count = 0
    for nodes in iter_paths(q.dag, set(q.xs), set(q.ys), allowed=allowed, budget=budget):
        count += 1
        if len(reports) < cap and tuple(nodes) not in seen:
            seen.add(tuple(nodes))
            reports.append(describe_path(q.dag, nodes, given, opened))
    capped = budget[0] <= 0
    count = max(count, len(reports))
    reports.sort(key=lambda r: (not r.open, r.causal, len(r.nodes), r.nodes))
    return [r.to_json(q.dag) for r in reports], count, capped or count > cap


def roles(
    q: Question, instrument_names: Iterable[str] = (), paths: Iterable[dict] = ()
) -> dict[str, list[str]]:
    """Each variable's roles for this question. ``paths`` (as from :func:`list_paths`)
    only saves work: colliders seen on them need no further search."""
    dag = q.dag
    an_x = dag.ancestors(q.xs)
    an_y_not_via_x = dag.ancestors(q.ys, avoid=q.xs)
    de_x = dag.descendants(q.xs)
    de_y = dag.descendants(q.ys)
    seen = set()
    for path in paths:
        nodes = path["nodes"]
        for i in range(1, len(nodes) - 1):
            if nodes[i] in dag.children[nodes[i - 1]] and nodes[i] in dag.children[nodes[i + 1]]:
                seen.add(nodes[i])
    colliders = _colliders_on_paths(q, seen)
    instruments_ = set(instrument_names)
    out: dict[str, list[str]] = {}
    for v in sorted(dag.nodes):
        if v in q.xs:
            out[v] = ["treatment"]
            continue
        if v in q.ys:
            out[v] = ["outcome"]
            continue
        r = []
        if v in an_x and v in an_y_not_via_x:
            r.append("confounder")
        elif v in an_x:
            r.append("treatment_cause")
        elif v in an_y_not_via_x and v not in de_x:
            r.append("outcome_cause")
        if v in q.cn:
            r.append("mediator")
        if v in colliders:
            r.append("collider")
        if v in de_x:
            r.append("treatment_descendant")
        if v in de_y:
            r.append("outcome_descendant")
        if v in instruments_:
            r.append("instrument")
        out[v] = r or ["unrelated"]
    return out


def _colliders_on_paths(q: Question, known: set[str]) -> set[str]:
    return colliders_on_paths(q.dag, set(q.xs), set(q.ys), q.relevant, known)


# ---------------------------------------------------------------------------
# Everything at once
# ---------------------------------------------------------------------------

def _identify(q: Question, set_cap: int) -> dict:
    sets, more = minimal_adjustment_sets(q, cap=set_cap)
    optimal, note = optimal_adjustment_set(q, any_valid=bool(sets))
    out = {
        "treatment": sorted(q.xs),
        "outcome": sorted(q.ys),
        "minimal_adjustment_sets": sets,
        "more_sets_exist": more,
        "optimal_adjustment_set": optimal,
        "optimal_note": note,
        "best_minimal_set": None,
        "best_minimal_note": "",
        "front_door_sets": [],
        "front_door_more": False,
        "instruments": [],
    }
    if sets and optimal is None and q.cn and not more:  # the comparison needs every minimal set
        out["best_minimal_set"], out["best_minimal_note"] = most_efficient_minimal_set(q, sets)
    if sets:
        out["identifiable"], out["strategy"] = True, "adjustment"
        out["instruments"] = instruments(q, conditional=False)
    else:
        fd, fd_more = front_door_sets(q)
        out["front_door_sets"], out["front_door_more"] = fd, fd_more
        out["instruments"] = instruments(q)
        if fd:
            out["identifiable"], out["strategy"] = True, "front-door"
        elif out["instruments"]:
            out["identifiable"], out["strategy"] = True, "instrument"
        else:
            out["identifiable"], out["strategy"] = False, None
    return out


def analyze(
    diagram: Diagram,
    adjust: Iterable[str] | None = None,
    *,
    treatment: Iterable[str] | None = None,
    outcome: Iterable[str] | None = None,
) -> dict:
    """The full analysis of the diagram for its question (JSON-ready)."""
    q = Question.of(diagram, treatment, outcome)
    out = _identify(q, SET_CAP)
    given = set(adjust) if adjust is not None else set()
    if adjust is not None:
        out["adjustment_check"] = check_adjustment(q, given)
    paths, total, capped = list_paths(q, given - q.xs - q.ys)
    out["paths"], out["paths_total"], out["paths_capped"] = paths, total, capped
    listed, imp_total, incomplete = implications(q.document)
    out["implications"] = listed
    out["implications_total"] = imp_total
    out["implications_capped"] = incomplete or imp_total > len(listed)
    out["roles"] = roles(q, (i["instrument"] for i in out["instruments"]), paths)
    out["causal_path_exists"] = bool(q.cn)
    out["summary"] = _summary(q, out)
    return out


def _summary(q: Question, out: dict) -> str:
    x, y = ", ".join(sorted(q.xs)), ", ".join(sorted(q.ys))
    if len(q.xs) > 1:
        x = f"{q.name_set(q.xs)} (jointly)"
    if not q.cn:
        lead = f"The diagram has no causal path from {x} to {y}: it says the effect is zero. "
    else:
        lead = ""
    if out["strategy"] == "adjustment":
        sets = out["minimal_adjustment_sets"]
        n = f"{len(sets)}{'+' if out['more_sets_exist'] else ''}"
        if sets == [[]]:
            return lead + f"The effect of {x} on {y} is identified without adjusting for anything."
        best = out["optimal_adjustment_set"]
        tail = f" The most precise valid set is {q.name_set(best)}." if best is not None else ""
        if best is None and out.get("best_minimal_set") is not None:
            tail = f" Among the minimal sets, {q.name_set(out['best_minimal_set'])} is the most precise."
        return lead + (
            f"The effect of {x} on {y} is identified by adjustment; "
            f"{n} minimal adjustment set(s), e.g. {q.name_set(sets[0])}.{tail}"
        )
    if out["strategy"] == "front-door":
        return (
            f"No adjustment set exists, but the effect of {x} on {y} is identified by the "
            f"front-door criterion through {q.name_set(out['front_door_sets'][0])}."
        )
    if out["strategy"] == "instrument":
        first = out["instruments"][0]
        given = f" given {q.name_set(first['given'])}" if first["given"] else ""
        return (
            f"No adjustment or front-door set exists; {first['instrument']} can serve as an "
            f"instrument{given}. That identifies the effect only under extra assumptions "
            "(for example a linear, homogeneous effect)."
        )
    return (
        f"The effect of {x} on {y} is not identified by adjustment, the front-door criterion "
        "or an instrument in this diagram: measuring more variables or changing the design is needed."
    )
