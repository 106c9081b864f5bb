"""Votes on proposals and on arrows, their tallies, and which arrows are in dispute."""

from __future__ import annotations

from typing import Any

from .models import VOTE_CHOICES, Proposal, Vote, Workshop, arrow_key, parse_arrow_key

__all__ = ["tally", "votes_public", "disputed_items", "MAX_VOTE_REASON"]

MAX_VOTE_REASON = 200


def tally(votes: dict[str, Vote] | None) -> dict[str, int]:
    """Count agree / disagree / unsure votes (one per member)."""
    counts = {choice: 0 for choice in VOTE_CHOICES}
    for vote in (votes or {}).values():
        counts[vote.choice] += 1
    counts["total"] = sum(counts[c] for c in VOTE_CHOICES)
    return counts


def votes_public(workshop: Workshop, subject: str) -> list[dict[str, Any]]:
    by = workshop.votes.get(subject, {})
    return [
        {"member": mid, "name": workshop.member_name(mid), "choice": v.choice,
         "reason": v.reason, "at": v.at}
        for mid, v in sorted(by.items(), key=lambda item: item[1].at)
    ]


def is_contested(votes: dict[str, Vote] | None) -> bool:
    """An arrow is contested once anyone disagrees with it."""
    return any(v.choice == "disagree" for v in (votes or {}).values())


def disputed_items(workshop: Workshop) -> list[dict[str, Any]]:
    """The arrows the room has not settled, as alternatives for the dispute analysis.

    Each item is ``{"pair": [a, b], "options": [...], "current": i, "why": [...]}``
    where an option is ``None`` (no arrow between a and b) or ``[from, to]``.
    Sources: open and disputed proposals, arrows the facilitator marked
    disputed, and drawn arrows someone voted against (unless the facilitator
    marked them settled).
    """
    items: dict[frozenset, dict[str, Any]] = {}

    def item_for(a: str, b: str) -> dict[str, Any]:
        key = frozenset((a, b))
        if key not in items:
            if (a, b) in workshop.arrows:
                current = [a, b]
            elif (b, a) in workshop.arrows:
                current = [b, a]
            else:
                current = None
            items[key] = {"pair": sorted((a, b)), "options": [current], "why": []}
        return items[key]

    def add_option(item: dict[str, Any], option) -> None:
        if option not in item["options"]:
            item["options"].append(option)

    names = {v["name"] for v in workshop.variables}
    for p in workshop.proposals.values():
        if not p.is_pending or p.source not in names or p.target not in names:
            continue
        item = item_for(p.source, p.target)
        if p.kind == "add":
            add_option(item, [p.source, p.target])
        elif p.kind == "remove":
            add_option(item, None)
        else:
            add_option(item, [p.target, p.source])
        item["why"].append(f"proposal #{p.id} ({p.status}): {p.describe()}")
    for a, b in workshop.arrows:
        key = arrow_key(a, b)
        flag = workshop.arrow_flags.get(key)
        if flag == "settled":
            continue
        contested = is_contested(workshop.votes.get(f"arrow:{key}"))
        if flag == "disputed" or contested:
            item = item_for(a, b)
            add_option(item, None)
            item["why"].append(
                f"arrow {a} → {b} " + ("marked disputed" if flag == "disputed" else "voted against")
            )
    out = []
    for item in items.values():
        if len(item["options"]) < 2:
            continue
        item["current"] = 0
        out.append(item)
    out.sort(key=lambda it: it["pair"])
    return out


def flagged_arrows(workshop: Workshop) -> list[tuple[str, str, str]]:
    return [(*parse_arrow_key(k), flag) for k, flag in sorted(workshop.arrow_flags.items())]


def proposal_public(workshop: Workshop, p: Proposal) -> dict[str, Any]:
    return {
        "id": p.id, "kind": p.kind, "from": p.source, "to": p.target, "by": p.by,
        "by_name": workshop.member_name(p.by), "reason": p.reason, "status": p.status,
        "created": p.created, "settled_by": p.settled_by,
        "settled_by_name": workshop.member_name(p.settled_by) if p.settled_by else None,
        "settled_at": p.settled_at, "summary": p.describe(),
        "tally": tally(workshop.votes.get(p.subject)),
        "votes": votes_public(workshop, p.subject),
    }
