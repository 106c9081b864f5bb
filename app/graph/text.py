"""Plain-text rendering of an analysis, for the command line."""

from __future__ import annotations

from .implications import independence_text

__all__ = ["format_analysis"]


def _set(names) -> str:
    return "{" + ", ".join(names) + "}" if names else "{} (nothing)"


def format_analysis(result: dict) -> str:
    x = ", ".join(result["treatment"])
    y = ", ".join(result["outcome"])
    lines = [f"Effect of {x} on {y}", "=" * (len(x) + len(y) + 14), "", result["summary"], ""]
    strategy = result["strategy"] or "none"
    lines.append(f"Identified: {'yes' if result['identifiable'] else 'no'}    strategy: {strategy}")
    lines.append("")
    sets = result["minimal_adjustment_sets"]
    lines.append("Smallest sets to adjust for" + (" (more exist)" if result["more_sets_exist"] else "") + ":")
    if sets:
        lines.extend(f"  {_set(s)}" for s in sets)
    else:
        lines.append("  none over measured variables")
    optimal = result["optimal_adjustment_set"]
    lines.append("The most precise set to adjust for: " + (_set(optimal) if optimal is not None else "none"))
    lines.append(f"  {result['optimal_note']}")
    if optimal is None and result.get("best_minimal_set") is not None:
        lines.append("Most precise minimal set: " + _set(result["best_minimal_set"]))
        lines.append(f"  {result['best_minimal_note']}")
    if result.get("front_door_sets"):
        lines.append("Through mediators (front-door criterion): " + ", ".join(_set(s) for s in result["front_door_sets"]))
    if result.get("instruments"):
        parts = [
            i["instrument"] + (f" given {_set(i['given'])}" if i["given"] else "")
            for i in result["instruments"]
        ]
        lines.append("Possible instruments: " + "; ".join(parts))
    check = result.get("adjustment_check")
    if check is not None:
        lines.append("")
        verdict = "valid" if check["valid"] else "NOT valid"
        lines.append(f"Proposed adjustment set {_set(check['set'])}: {verdict}")
        lines.extend(f"  - {reason}" for reason in check["reasons"])
    lines.append("")
    total = result["paths_total"]
    more = "+" if result.get("paths_capped") else ""
    lines.append(f"Paths between treatment and outcome ({total}{more} in all, {len(result['paths'])} listed):")
    for path in result["paths"]:
        kind = "causal    " if path["causal"] else "non-causal"
        state = "open   " if path["open"] else "blocked"
        lines.append(f"  [{state}] {kind}  {path['text']}")
        lines.append(f"             {path['why']}")
    lines.append("")
    lines.append("What each variable is for this question:")
    width = max((len(n) for n in result["roles"]), default=0)
    for name, roles in result["roles"].items():
        lines.append(f"  {name.ljust(width)}  {', '.join(r.replace('_', ' ') for r in roles)}")
    lines.append("")
    implied = result["implications"]
    total_imp = result.get("implications_total", len(implied))
    lines.append(f"What the data could contradict ({total_imp} in all, {len(implied)} listed):")
    lines.extend(f"  {independence_text(imp['x'], imp['y'], imp['given'])}" for imp in implied)
    return "\n".join(lines)
