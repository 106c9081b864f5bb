"""The room's stated hidden causes.

During the workshop each member may say how strong the strongest hidden
(unmeasured) common cause of treatment and outcome could be, compared with a
measured variable of the diagram: "about as strong as fitness", "twice as
strong as age". One statement per member (a new one replaces the old); the
facilitator sees the spread, the estimation stage reads them against the
estimate (``app.estimation.sensitivity.room_reading``).

"As strong as X" means: it explains as much of the treatment, and as much of
the outcome, as X does beyond the other measured variables.
"""

from __future__ import annotations

from typing import Any

from .models import Workshop

__all__ = ["STRENGTH_CHOICES", "MAX_TIMES", "check_statement", "statements_public", "statements_for_estimate",
           "strength_words"]

# (times, words) in the order the form offers them
STRENGTH_CHOICES = ((0.5, "half as strong as"), (1.0, "about as strong as"), (2.0, "twice as strong as"),
                    (3.0, "three times as strong as"), (5.0, "five times as strong as"))
MAX_TIMES = 10.0
MEANING = ("As strong as a measured variable: it would explain as much of the treatment, and as much "
           "of the outcome, as that variable does beyond the other measured variables.")


def strength_words(times: float) -> str:
    return dict(STRENGTH_CHOICES).get(float(times)) or f"{times:g} times as strong as"


def check_statement(w: Workshop, variable: str, times: Any) -> tuple[str, float]:
    """Validate a statement; returns (variable, times) or raises ValueError with a message."""
    if w.variable(variable) is None:
        raise ValueError(f"there is no variable {variable!r} to compare with")
    if variable in w.treatment or variable in w.outcome:
        raise ValueError(f"{variable} is the treatment or the outcome; compare the hidden cause "
                         "with another measured variable")
    if w.variable(variable).get("latent"):
        raise ValueError(f"{variable} is marked unmeasured; compare with a measured variable, "
                         "whose strength the data can show")
    if isinstance(times, bool) or not isinstance(times, (int, float)) or not 0 < times <= MAX_TIMES:
        raise ValueError(f"'times' must be a number above 0 and at most {MAX_TIMES:g}")
    return variable, float(times)


def statements_public(w: Workshop) -> dict[str, Any]:
    """What every member sees: each statement with its author's name, and the choices."""
    rows = []
    for member_id, s in w.hidden_causes.items():
        present = w.variable(s["variable"]) is not None
        rows.append({"member": member_id, "by": w.member_name(member_id), "variable": s["variable"],
                     "times": s["times"], "words": f"{strength_words(s['times'])} {s['variable']}",
                     "at": s.get("at"), "in_diagram": present})
    rows.sort(key=lambda r: (r["times"], r["variable"], r["by"]))
    return {"statements": rows, "choices": [list(c) for c in STRENGTH_CHOICES], "meaning": MEANING}


def statements_for_estimate(w: Workshop) -> list[dict[str, Any]]:
    """``[{"by", "variable", "times", "words"}]`` as the sensitivity analysis takes them."""
    return [{"by": r["by"], "variable": r["variable"], "times": r["times"], "words": r["words"]}
            for r in statements_public(w)["statements"]]
