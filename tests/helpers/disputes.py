"""Small diagrams as workshops, and the adjustment criterion written with networkx only."""

from __future__ import annotations

import networkx as nx

from app.workshop.commands import new_workshop

__all__ = ["nx_valid_adjustment", "dispute_document", "dispute_workshop"]


def nx_valid_adjustment(names, edges, x, y, z, latent=()):
    """The adjustment criterion written out with networkx calls only
    (Shpitser, VanderWeele & Robins 2010; Perkovic et al. 2018, Definition 3.3)."""
    g = nx.DiGraph()
    g.add_nodes_from(names)
    g.add_edges_from(edges)
    if set(z) & set(latent):
        return False
    no_in = g.copy()
    no_in.remove_edges_from(list(g.in_edges(x)))
    no_out = g.copy()
    no_out.remove_edges_from(list(g.out_edges(x)))
    cn = (nx.descendants(no_in, x)) & (nx.ancestors(no_out, y) | {y})
    forb = set().union(*(nx.descendants(g, c) | {c} for c in cn)) | {x} if cn else {x}
    if set(z) & forb:
        return False
    pbd = g.copy()
    pbd.remove_edges_from([(x, c) for c in g.successors(x) if c in cn])
    return nx.is_d_separator(pbd, {x}, {y}, set(z))


def dispute_document(names, edges, x="x", y="y", latent=()):
    return {"variables": [{"name": n, "latent": n in latent} for n in names],
            "arrows": [{"from": a, "to": b} for a, b in edges], "treatment": [x], "outcome": [y]}


def dispute_workshop(doc):
    w, _ = new_workshop(session_id="s", title="t", join_code="ABCDEF", facilitator_id="f",
                        facilitator_name="F", document=doc, now=0.0)
    return w, w.members["f"]
