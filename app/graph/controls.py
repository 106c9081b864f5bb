"""Control outcomes and control exposures that a diagram supplies for one adjustment set.

For the effect of ``t`` on ``y`` estimated with adjustment set ``Z``:

control outcome    a measured ``n`` (not ``t``, ``y`` or in ``Z``) that ``t`` cannot
                   affect (not a descendant of ``t``) and that ``Z`` separates from
                   ``t`` (``t ⊥ n | Z``). Estimating the "effect" of ``t`` on ``n``
                   with ``Z`` must give zero if the diagram is right.
control exposure   a measured ``e`` (not ``t``, ``y`` or in ``Z``) that ``y`` cannot
                   affect (not a descendant of ``y``) and that ``{t} ∪ Z`` separates
                   from ``y`` (``e ⊥ y | t, Z``). Its "effect" on ``y`` given ``t`` and
                   ``Z`` must be zero.

Lipsitch, Tchetgen Tchetgen & Cohen (2010) use such variables to detect
confounding; read off the diagram they are the d-separation statements that
concern the set in use. Candidates that the diagram links to the treatment
(or outcome) by some path, so that the set has work to do, come first.

>>> from app.graph.dag import Dag
>>> dag = Dag(["a", "t", "y", "n", "e"],
...           [("a", "t"), ("a", "y"), ("t", "y"), ("a", "n"), ("e", "t")])
>>> control_outcomes(dag, "t", "y", {"a"}, {"a", "t", "y", "n", "e"})
['n']
>>> control_exposures(dag, "t", "y", {"a"}, {"a", "t", "y", "n", "e"})
['e', 'n']

Reference: Lipsitch M, Tchetgen Tchetgen E, Cohen T (2010). Negative controls:
a tool for detecting confounding and bias in observational studies.
Epidemiology 21(3).
"""

from __future__ import annotations

from typing import Iterable

from .dag import Dag

__all__ = ["control_outcomes", "control_exposures"]


def _ranked(dag: Dag, anchor: str, found: list[str]) -> list[str]:
    linked = dag.d_connected({anchor})
    return sorted(found, key=lambda v: (v not in linked, v))


def control_outcomes(dag: Dag, t: str, y: str, zs: Iterable[str], measured: Iterable[str]) -> list[str]:
    """Measured variables that ``t`` cannot affect and that ``zs`` separates from ``t``."""
    zs = set(zs)
    affected = dag.descendants([t])
    found = [n for n in measured if n not in zs | {t, y} and n not in affected
             and dag.is_d_separated({t}, {n}, zs)]
    return _ranked(dag, t, found)


def control_exposures(dag: Dag, t: str, y: str, zs: Iterable[str], measured: Iterable[str]) -> list[str]:
    """Measured variables that ``y`` cannot affect and that ``{t} ∪ zs`` separates from ``y``."""
    zs = set(zs)
    affected = dag.descendants([y])
    found = [e for e in measured if e not in zs | {t, y} and e not in affected
             and dag.is_d_separated({e}, {y}, zs | {t})]
    return _ranked(dag, y, found)
