"""Any sequence of commands leaves a valid diagram; a refused command changes nothing.

The invariants are checked with the graph document's own validator and with
networkx (networkx.is_directed_acyclic_graph) as the outside reference for acyclicity.
"""

from __future__ import annotations

import copy

import networkx as nx
from hypothesis import given, settings, strategies as st

from app.errors import AppError
from app.workshop.commands import add_member, apply_command, new_workshop
from app.workshop.disputes import analyse_workshop
from app.workshop.models import Workshop

NAMES = ["a", "b", "c", "d", "e"]
name = st.sampled_from(NAMES)
commands = st.one_of(
    st.builds(lambda n, x, y: {"type": "add_variable", "name": n, "x": x, "y": y},
              name, st.integers(0, 900), st.integers(0, 600)),
    st.builds(lambda a, b: {"type": "add_arrow", "from": a, "to": b}, name, name),
    st.builds(lambda a, b: {"type": "delete_arrow", "from": a, "to": b}, name, name),
    st.builds(lambda a, b: {"type": "reverse_arrow", "from": a, "to": b}, name, name),
    st.builds(lambda n: {"type": "delete_variable", "name": n}, name),
    st.builds(lambda n, new: {"type": "update_variable", "name": n, "new_name": new + "x"}, name, name),
    st.builds(lambda n, flag: {"type": "update_variable", "name": n, "latent": flag}, name, st.booleans()),
    st.builds(lambda t, o: {"type": "set_question", "treatment": [t], "outcome": [o]}, name, name),
    st.builds(lambda k, a, b: {"type": "propose", "kind": k, "from": a, "to": b},
              st.sampled_from(["add", "remove", "reverse"]), name, name),
    st.builds(lambda p, c: {"type": "vote", "proposal": p, "choice": c}, st.integers(1, 4),
              st.sampled_from(["agree", "disagree", "unsure"])),
    st.builds(lambda a, b, c: {"type": "vote", "from": a, "to": b, "choice": c}, name, name,
              st.sampled_from(["agree", "disagree", "unsure"])),
    st.builds(lambda p, d: {"type": "settle", "proposal": p, "decision": d}, st.integers(1, 4),
              st.sampled_from(["accept", "reject", "dispute"])),
    st.builds(lambda s: {"type": "set_stage", "stage": s, "reason": "checking"},
              st.sampled_from(["drafting", "debating", "agreed"])),
    st.just({"type": "undo"}),
    st.just({"type": "tidy"}),
)


@settings(max_examples=120, deadline=None)
@given(steps=st.lists(st.tuples(st.booleans(), commands), max_size=40))
def test_command_sequences_keep_the_workshop_sound(steps):
    w, _ = new_workshop(session_id="s", title="t", join_code="ABCDEF", facilitator_id="f",
                        facilitator_name="F", now=0.0)
    participant, _ = add_member(w, member_id="p", name="P", now=0.0)
    facilitator = w.members["f"]
    for as_facilitator, command in steps:
        who = facilitator if as_facilitator else participant
        before = copy.deepcopy(w.to_state())
        revision = w.revision
        try:
            event = apply_command(w, who, command, now=1.0)
        except AppError:
            assert w.to_state() == before, command
            continue
        assert w.revision == revision + 1 and event["revision"] == w.revision
        diagram = w.diagram()  # raises if the document were invalid
        graph = nx.DiGraph([(a.source, a.target) for a in diagram.arrows])
        graph.add_nodes_from(diagram.names)
        assert nx.is_directed_acyclic_graph(graph)
        assert set(w.treatment) <= set(diagram.names) and set(w.outcome) <= set(diagram.names)
        for p in w.proposals.values():
            if p.status in ("open", "disputed"):
                assert p.source in diagram.names and p.target in diagram.names
        # what the store would keep comes back the same
        again = Workshop.from_state(w.to_state())
        assert again.to_state() == w.to_state()
    if w.treatment and w.outcome:
        result = analyse_workshop(w)  # the dispute checks must cope with whatever is left
        assert result["problem"] is None or isinstance(result["problem"], str)
