"""Checks that can contradict the agreed diagram, and one verdict over them.

Every check below tests something the diagram claims and the data can deny;
each is shown in the tests to fail on data from a structure the diagram gets
wrong. None can show that the diagram is right.

``set-agreement``
    Every valid adjustment set estimates the same effect. The set in use and
    the other valid sets (minimal and optimal, up to a cap) are estimated on
    the same rows; each difference from the set in use is tested with a
    paired bootstrap (all sets refitted on the same resamples, so the
    differences carry their correlation; Efron & Tibshirani 1993, ch. 6 and
    16) and a normal reference, with Holm's (1979) correction over the
    differences. This is the contrast of Hausman (1978) without his
    efficiency assumption. Resamples are Poisson(1) row weights (Hanley &
    MacGibbon 2006), which can be drawn chunk by chunk; for linear regression
    all sets come from one weighted cross-product matrix per resample.
``control-outcomes`` / ``control-exposures``
    Variables the diagram says the treatment cannot affect and the set
    separates from it, and variables it says cannot affect the outcome given
    treatment and set (:mod:`app.graph.controls`; Lipsitch, Tchetgen
    Tchetgen & Cohen 2010). Their "effects" are estimated with the same
    method and must be zero; Holm over the controls.
``implications-each`` / ``implications-together``
    The implication tests (:mod:`.implications`) one by one after their
    correction, and combined as Fisher's C = −2 Σ ln pᵢ against χ² with 2k
    degrees of freedom over the basis set (Shipley 2000).

The verdict: checks that ran are held together by Holm's correction over their
smallest p-values, so the chance that a right diagram is called contradicted
stays at the level chosen (5 % by default) however many checks ran.

References
----------
Hausman JA (1978). Specification tests in econometrics. Econometrica 46(6).
Efron B, Tibshirani RJ (1993). An Introduction to the Bootstrap. Chapman & Hall.
Hanley JA, MacGibbon B (2006). Creating non-parametric bootstrap samples using
  Poisson frequencies. Computer Methods and Programs in Biomedicine 83(1).
Holm S (1979). A simple sequentially rejective multiple test procedure. Scand J Stat 6(2).
Lipsitch M, Tchetgen Tchetgen E, Cohen T (2010). Negative controls. Epidemiology 21(3).
Shipley B (2000). A new inferential test for path models based on directed
  acyclic graphs. Structural Equation Modeling 7(2).
"""

from __future__ import annotations

import math
from typing import Callable

import numpy as np
import pandas as pd
from scipy import stats

from app.graph.controls import control_exposures, control_outcomes
from app.graph.dag import Dag
from app.graph.document import Arrow, Diagram
from app.graph.identification import Question, check_adjustment
from app.graph.implications import independence_text
from app.graph.paths import arrow_text
from app.graph.repairs import arrows_linking, arrows_splitting_sets

from . import estimators
from .design import Design, build_design
from .errors import DataError
from .implications import adjust_p_values

__all__ = [
    "CHECK_LABELS", "VERDICTS", "SET_CAP", "RESAMPLES", "Cancelled",
    "poisson_counts", "paired_differences", "set_agreement", "controls_check",
    "fisher_c", "implication_items", "verdict", "run_checks",
]

CHECK_LABELS = {
    "set-agreement": "Every valid adjustment set gives the same answer",
    "control-outcomes": "Control outcomes show no effect of the treatment",
    "control-exposures": "Control exposures show no effect on the outcome",
    "implications-each": "Each implied independence, tested alone",
    "implications-together": "All implied independences together (Fisher's C)",
}
VERDICTS = ("no contradiction found", "contradicted", "not enough to judge")
SET_CAP = 6
CONTROL_CAP = 6
RESAMPLES = 200
SEED = 20_260
CHUNK = 8192
EVIDENCE_LIMIT = 200  # a proposal's reason holds at most this many characters
# Poisson(1) counts by table look-up of the inverse CDF at 2^20 evenly spaced levels (each
# probability exact to 1e-6; counts above 9, of probability 1e-7, are not drawn).
_LEVELS = 1 << 20
_POISSON_TABLE = np.searchsorted(stats.poisson.cdf(np.arange(30), 1.0), (np.arange(_LEVELS) + 0.5) / _LEVELS,
                                 side="right").astype(np.uint8)

Progress = Callable[[int, str], None]


class Cancelled(Exception):
    """The analyst stopped the run."""


def _item(check: str, status: str, why: str, **extra) -> dict:
    return {"check": check, "label": CHECK_LABELS[check], "status": status, "why": why,
            "p_value": None, **extra}


def _name(zs) -> str:
    return "{" + ", ".join(zs) + "}"


# -- resampling ------------------------------------------------------------

def poisson_blocks(n: int, resamples: int, seed: int):
    """Row weights of every resample, chunk by chunk: (start, resamples x rows) Poisson(1) counts.

    Chunk ``c`` is drawn by its own generator seeded ``[seed, c]``, so a resample's weights
    do not depend on how the work is split."""
    for c, start in enumerate(range(0, n, CHUNK)):
        draws = np.random.default_rng([seed, c]).integers(0, _LEVELS, (resamples, min(CHUNK, n - start)),
                                                          dtype=np.uint32)
        yield start, _POISSON_TABLE[draws]


def poisson_counts(n: int, resamples: int, seed: int) -> np.ndarray:
    """All row weights as one (resamples x n) array of small counts."""
    out = np.empty((resamples, n), dtype=np.uint8)
    for start, block in poisson_blocks(n, resamples, seed):
        out[:, start:start + block.shape[1]] = block
    return out


def _union_matrix(designs: list[Design]) -> tuple[np.ndarray, list[list[int]], float]:
    """[1, t, every covariate column of any design], standardized; each design's column indices."""
    names: list[str] = []
    blocks = []
    for d in designs:
        for j, name in enumerate(d.covariate_names):
            if name not in names:
                names.append(name)
                blocks.append(d.covariates[:, j])
    n = designs[0].n
    u = np.empty((n, 2 + len(names)))
    u[:, 0] = 1.0
    u[:, 1] = designs[0].t
    for j, col in enumerate(blocks):
        u[:, 2 + j] = col
    centre = u[:, 1:].mean(axis=0)
    scale = u[:, 1:].std(axis=0)
    scale[scale == 0] = 1.0
    u[:, 1:] = (u[:, 1:] - centre) / scale
    index = [[0, 1] + [2 + names.index(c) for c in d.covariate_names] for d in designs]
    return u, index, float(scale[0])


def _regression_draws(designs: list[Design], resamples: int, seed: int, tick) -> tuple[np.ndarray, np.ndarray]:
    """Treatment coefficients of every set: on all rows and on each resample (B x sets)."""
    u, index, t_scale = _union_matrix(designs)
    y = designs[0].y
    n, k = u.shape
    upper = np.triu_indices(k)
    width = len(upper[0])
    acc = np.zeros((resamples, width + k))
    full = np.zeros(width + k)
    for c, (start, weights) in enumerate(poisson_blocks(n, resamples, seed)):
        block = u[start:start + CHUNK]
        feats = np.empty((len(block), width + k))
        feats[:, :width] = block[:, upper[0]] * block[:, upper[1]]
        feats[:, width:] = block * y[start:start + CHUNK, None]
        acc += weights.astype(float) @ feats
        full += feats.sum(axis=0)
        tick(c)

    def solve(rows: np.ndarray) -> np.ndarray:
        gram = np.zeros((rows.shape[0], k, k))
        gram[:, upper[0], upper[1]] = rows[:, :width]
        gram[:, upper[1], upper[0]] = rows[:, :width]
        cross = rows[:, width:]
        out = np.empty((rows.shape[0], len(index)))
        for s, cols in enumerate(index):
            sub = gram[:, cols][:, :, cols]
            out[:, s] = np.linalg.solve(sub, cross[:, cols][:, :, None])[:, 1, 0] / t_scale
        return out

    return solve(full[None, :])[0], solve(acc)


def _generic_draws(designs: list[Design], method: str, resamples: int, seed: int, tick):
    point = estimators.point_function(method)
    n = designs[0].n
    full = np.array([point(d) for d in designs])
    draws = np.full((resamples, len(designs)), np.nan)
    counts = poisson_counts(n, resamples, seed)
    for b in range(resamples):
        idx = np.repeat(np.arange(n), counts[b])
        for s, d in enumerate(designs):
            try:
                draws[b, s] = point(d.take(idx))
            except Exception:  # no fit on this resample (separation, an empty arm)
                pass
        tick(b)
    return full, draws


def paired_differences(full: np.ndarray, draws: np.ndarray, reference: int = 0, *,
                       alpha: float = 0.05) -> list[dict]:
    """Each column's difference from the reference column, with its paired-bootstrap test (Holm)."""
    rows = []
    for s in range(len(full)):
        if s == reference:
            continue
        ok = np.isfinite(draws[:, s]) & np.isfinite(draws[:, reference])
        diffs = draws[ok, s] - draws[ok, reference]
        se = float(np.std(diffs, ddof=1)) if ok.sum() > 2 else float("nan")
        diff = float(full[s] - full[reference])
        z = diff / se if se > 0 else (0.0 if diff == 0 else math.inf)
        rows.append({"index": s, "difference": diff, "difference_se": se, "resamples_used": int(ok.sum()),
                     "p_value": float(2 * stats.norm.sf(abs(z))) if math.isfinite(se) else None})
    tested = [r for r in rows if r["p_value"] is not None]
    for r, p in zip(tested, adjust_p_values([r["p_value"] for r in tested], "holm", alpha)):
        r["p_adjusted"] = p
    return rows


# -- the checks ------------------------------------------------------------

def set_agreement(frame: pd.DataFrame, mapping: dict, *, treatment: str, outcome: str,
                  sets: list[list[str]], method: str, more_sets: bool = False, cap: int = SET_CAP,
                  resamples: int = RESAMPLES, seed: int = SEED, alpha: float = 0.05,
                  explain: Callable[[list[str], list[str]], list[dict]] | None = None,
                  progress: Progress | None = None) -> dict:
    """Estimate with every set (the first is the one in use) on shared rows and test the differences."""
    check = "set-agreement"
    tried, skipped = sets[:cap], sets[cap:]
    entries = [{"set": s, "status": "not run", "why": f"beyond the cap of {cap} sets compared"} for s in skipped]
    if more_sets:
        entries.append({"set": None, "status": "not run",
                        "why": "the diagram accepts more minimal sets than the search lists"})
    if len(sets) < 2:
        return _item(check, "not run", "the diagram accepts only one adjustment set "
                     f"({_name(sets[0]) if sets else 'none'}), so there is nothing to compare", sets=entries)
    needed = sorted({treatment, outcome, *[v for s in tried for v in s]})
    cols = list(dict.fromkeys(mapping[v] for v in needed))
    rows = frame[cols].dropna()
    designs, kept = [], []
    for s in tried:
        try:
            designs.append(build_design(rows, mapping, treatment=treatment, outcome=outcome, adjust=s))
            kept.append(s)
        except DataError as exc:
            entries.insert(len(kept), {"set": s, "status": "not run", "why": exc.message})
    if not kept or kept[0] != tried[0]:
        return _item(check, "not run", "the set in use could not be estimated on the rows every set shares: "
                     + entries[0]["why"], sets=entries)
    if len(kept) < 2:
        return _item(check, "not run", "only the set in use could be estimated on the shared rows; "
                     "the others are listed with the reason", sets=entries)
    done = [0]

    def tick(_):
        done[0] += 1
        if progress:
            progress(done[0], "comparing adjustment sets")

    if method == "regression":
        full, draws = _regression_draws(designs, resamples, seed, tick)
    else:
        full, draws = _generic_draws(designs, method, resamples, seed, tick)
    spread = np.nanstd(draws, axis=0, ddof=1)
    diffs = paired_differences(full, draws, alpha=alpha)
    table = [{"set": kept[0], "status": "in use", "estimate": float(full[0]), "std_error": float(spread[0])}]
    worst, disagreements = None, []
    for d in diffs:
        s = kept[d["index"]]
        p_adj = d.get("p_adjusted")
        status = "not run" if p_adj is None else "differs" if p_adj < alpha else "agrees"
        row = {"set": s, "status": status, "estimate": float(full[d["index"]]),
               "std_error": float(spread[d["index"]]), **{k: v for k, v in d.items() if k != "index"}}
        table.append(row)
        if p_adj is not None and (worst is None or p_adj < worst):
            worst = p_adj
        if status == "differs":
            only_ref = sorted(set(kept[0]) - set(s))
            only_other = sorted(set(s) - set(kept[0]))
            disagreements.append({"sets": [kept[0], s], "only_in_use": only_ref, "only_other": only_other,
                                  "difference": row["difference"], "p_adjusted": p_adj,
                                  "explained_by": explain(kept[0], s) if explain else []})
    repairs = []
    for d in disagreements:
        for e in d["explained_by"]:
            u, v = e["arrow"]
            source, target = (u, v) if e["change"] == "added" else (v, u)
            repairs.append(_repair(
                "add" if e["change"] == "added" else "reverse", source, target,
                f"Data check: adjusting for {_name(d['sets'][1])} and {_name(d['sets'][0])} gives estimates "
                f"{d['difference']:+.3g} apart (adjusted p = {d['p_adjusted']:.2g}); with {u} → {v} only one "
                "of them stays valid."))
    out = _item(check, "contradicted" if disagreements else "holds", "", sets=table + entries,
                rows=int(len(rows)), resamples=resamples, seed=seed, cap=cap, disagreements=disagreements,
                repairs=_unique(repairs))
    out["p_value"] = worst
    if disagreements:
        d = disagreements[0]
        out["why"] = (f"adjusting for {_name(d['sets'][1])} gives {d['difference']:+.3g} against the set in use "
                      f"{_name(d['sets'][0])} (Holm-adjusted p = {d['p_adjusted']:.2g}); the diagram says both "
                      "are valid, so at least one of them is not" + _explained(d))
    else:
        out["why"] = (f"{len(kept)} valid sets compared on the same {len(rows):,} rows over {resamples} "
                      f"paired resamples; no difference from the set in use is clearly away from zero "
                      f"(smallest Holm-adjusted p = {worst:.2g})" if worst is not None else
                      "the differences could not be resampled")
        if worst is None:
            out["status"] = "not run"
    return out


def _explained(d: dict) -> str:
    arrows = d["explained_by"][:3]
    if not arrows:
        return ""
    parts = [f"{a['arrow'][0]} → {a['arrow'][1]}" + (" (reversed)" if a["change"] == "reversed" else "")
             for a in arrows]
    return "; an arrow the diagram lacks would explain it, for example " + " or ".join(parts)


def _fit_control(frame, mapping, method: str, *, treatment: str, outcome: str, adjust: list[str]) -> dict:
    design = build_design(frame, mapping, treatment=treatment, outcome=outcome, adjust=adjust)
    used = method
    if method in ("weighting", "doubly-robust") and not design.t_binary:
        used = "regression"
    if method == "standardization" and not (design.t_binary and design.y_binary):
        used = "regression"
    fit = estimators.METHODS[used](design)
    est, se = float(fit["estimate"]), float(fit["std_error"])
    if not (math.isfinite(est) and math.isfinite(se) and se > 0):
        raise DataError("the estimate is not a finite number")
    return {"estimate": est, "std_error": se, "ci": fit["ci"], "method": used, "n": design.n,
            "p_value": float(2 * stats.norm.sf(abs(est / se)))}


def controls_check(kind: str, frame: pd.DataFrame, mapping: dict, *, treatment: str, outcome: str,
                   adjustment_set: list[str], candidates: list[str], method: str, alpha: float = 0.05,
                   cap: int = CONTROL_CAP, explain: Callable[[str], list[dict]] | None = None,
                   progress: Progress | None = None) -> dict:
    """Estimate the "effect" of the treatment on each control outcome, or of each control exposure."""
    check = "control-outcomes" if kind == "outcome" else "control-exposures"
    zs = list(adjustment_set)
    if not candidates:
        what = ("that the treatment cannot affect and that the set in use separates from it"
                if kind == "outcome" else "that cannot affect the outcome once treatment and set are given")
        return _item(check, "not run", f"the diagram supplies no measured variable {what}", controls=[])
    rows = []
    for i, v in enumerate(candidates[:cap]):
        entry = {"variable": v, "column": mapping[v], "status": "not run"}
        try:
            if kind == "outcome":
                entry.update(_fit_control(frame, mapping, method, treatment=treatment, outcome=v, adjust=zs))
            else:
                entry.update(_fit_control(frame, mapping, method, treatment=v, outcome=outcome,
                                          adjust=[*zs, treatment]))
        except DataError as exc:
            entry["why"] = exc.message
        rows.append(entry)
        if progress:
            progress(i + 1, "estimating control variables")
    rows += [{"variable": v, "column": mapping[v], "status": "not run",
              "why": f"beyond the cap of {cap} controls"} for v in candidates[cap:]]
    fitted = [r for r in rows if "p_value" in r]
    if not fitted:
        return _item(check, "not run", "no control could be estimated: " + rows[0]["why"], controls=rows)
    for r, p in zip(fitted, adjust_p_values([r["p_value"] for r in fitted], "holm", alpha)):
        r["p_adjusted"] = p
        r["status"] = "contradicted" if p < alpha else "holds"
        if r["status"] == "contradicted" and explain:
            r["explained_by"] = explain(r["variable"])
    bad = [r for r in fitted if r["status"] == "contradicted"]
    repairs = []
    for r in bad:
        shown = (f"{treatment}'s 'effect' on {r['variable']}" if kind == "outcome"
                 else f"{r['variable']}'s 'effect' on {outcome}")
        repairs += [_repair("add", e["arrow"][0], e["arrow"][1],
                            f"Data check: {shown} is {r['estimate']:.3g} (adjusted p = {r['p_adjusted']:.2g}), "
                            "where the diagram says zero; this arrow would explain it"
                            + (f" and open {e['opens']}." if e.get("opens") else "."))
                    for e in r.get("explained_by") or []]
    out = _item(check, "contradicted" if bad else "holds", "", controls=rows, repairs=_unique(repairs))
    out["p_value"] = min(r["p_adjusted"] for r in fitted)
    if bad:
        r = bad[0]
        if kind == "outcome":
            claim = (f"{treatment} cannot affect {r['variable']} and "
                     + (f"{_name(zs)} separates them" if zs else "the two are unrelated"))
        else:
            claim = (f"{r['variable']} cannot affect {outcome} once {treatment}"
                     + (f" and {_name(zs)} are given" if zs else " is given"))
        out["why"] = (f"the diagram says {claim}, but the estimated effect is {r['estimate']:.3g} "
                      f"[{r['ci'][0]:.3g}, {r['ci'][1]:.3g}] (Holm-adjusted p = {r['p_adjusted']:.2g})"
                      + _revealed(r.get("explained_by") or []))
    else:
        out["why"] = (f"{len(fitted)} control {'outcome' if kind == 'outcome' else 'exposure'}(s) estimated with "
                      f"the same method; none clearly away from zero (smallest Holm-adjusted p = "
                      f"{out['p_value']:.2g})")
    return out


def _revealed(explained: list[dict]) -> str:
    opening = [e for e in explained if e.get("opens")]
    if opening:
        e = opening[0]
        return (f"; with {e['arrow'][0]} → {e['arrow'][1]} added, the set in use would leave the back-door path "
                f"{e['opens']} open")
    if explained:
        return "; an arrow the diagram lacks, such as " + " or ".join(
            f"{e['arrow'][0]} → {e['arrow'][1]}" for e in explained[:3]) + ", would explain it"
    return ""


def fisher_c(p_values) -> dict:
    """Fisher's C = −2 Σ ln pᵢ over k independence tests, against χ² with 2k df (Shipley 2000)."""
    p = np.clip(np.asarray(p_values, dtype=float), 1e-300, 1.0)
    c = float(-2 * np.log(p).sum())
    df = 2 * len(p)
    return {"statistic": c, "df": df, "p_value": float(stats.chi2.sf(c, df))}


def _repair(kind: str, source: str, target: str, evidence: str) -> dict:
    """A change the facilitator can send to the debate as a proposal (``evidence`` is its reason)."""
    if len(evidence) > EVIDENCE_LIMIT:
        evidence = evidence[:EVIDENCE_LIMIT - 1].rstrip() + "…"
    return {"kind": kind, "from": source, "to": target, "evidence": evidence}


def _unique(repairs: list[dict]) -> list[dict]:
    seen, out = set(), []
    for r in repairs:
        if (r["kind"], r["from"], r["to"]) not in seen:
            seen.add((r["kind"], r["from"], r["to"]))
            out.append(r)
    return out


def implication_items(checks: dict | None, alpha: float = 0.05, dag: Dag | None = None) -> list[dict]:
    """The two implication items of the verdict from :func:`~.implications.test_implications` output.

    With ``dag``, each failing implication lists the single added arrows after which the
    diagram no longer implies it (:func:`~app.graph.repairs.arrows_linking`)."""
    if not checks or not checks.get("tested"):
        why = (checks or {}).get("summary") or "the implication tests were not run"
        if checks and not checks.get("listed"):
            why = "the diagram implies no independence among the measured variables"
        return [_item("implications-each", "not run", why), _item("implications-together", "not run", why)]
    tested = [t for t in checks["tests"] if t["p_value"] is not None]
    failing = [t for t in tested if t["verdict"] == "fails"]
    repairs = []
    for t in failing:
        found = arrows_linking(dag, t["x"], t["y"], t["given"]) if dag else []
        ends = {t["x"], t["y"]}
        t["repairs"] = [[u, v] for u, v in sorted(found, key=lambda a: set(a) != ends)]  # direct arrows first
        claim = t.get("text") or independence_text(t["x"], t["y"], t["given"])
        repairs += [_repair("add", u, v, f"Data contradict '{claim}' (adjusted p = {t['p_adjusted']:.2g}); "
                                          f"the arrow {u} → {v} would remove that claim.")
                    for u, v in t["repairs"]]
    each = _item("implications-each", "contradicted" if failing else "holds", checks["summary"],
                 tested=len(tested), failing=len(failing), repairs=_unique(repairs))
    each["p_value"] = min(t["p_adjusted"] for t in tested)
    combined = fisher_c([t["p_value"] for t in tested])
    basis = "" if checks.get("total", 0) <= checks.get("listed", 0) else (
        f" (over the {checks['listed']} listed of {checks['total']} implications)")
    together = _item("implications-together", "contradicted" if combined["p_value"] < alpha else "holds",
                     f"Fisher's C = {combined['statistic']:.3g} on {combined['df']} degrees of freedom, "
                     f"p = {combined['p_value']:.2g}{basis}", **{k: combined[k] for k in ("statistic", "df")})
    together["p_value"] = combined["p_value"]
    return [each, together]


def verdict(items: list[dict], alpha: float = 0.05) -> dict:
    """One verdict over the items; Holm across the checks that ran keeps the false-alarm rate at ``alpha``."""
    ran = [i for i in items if i["status"] != "not run" and i["p_value"] is not None]
    for i, p in zip(ran, adjust_p_values([i["p_value"] for i in ran], "holm", alpha)):
        i["p_across_checks"] = p
        if i["status"] == "contradicted" and p >= alpha:
            i["status"] = "holds"
            i["why"] += (f"; taken together with the other {len(ran) - 1} checks this is not clear enough "
                         f"(p = {p:.2g} after Holm across checks)")
    bad = [i for i in ran if i["status"] == "contradicted"]
    if bad:
        word = "contradicted"
        reading = (f"The data contradict the diagram on {len(bad)} of {len(ran)} checks ("
                   + "; ".join(i["label"] for i in bad) + "). The estimate rests on the diagram, so it "
                   "should not be used until the room has looked at the contradiction.")
    elif ran:
        word = "no contradiction found"
        reading = (f"None of the {len(ran)} checks that ran contradicts the diagram. That does not show the "
                   "diagram is right: these data cannot speak to every arrow, and a hidden common cause "
                   "can leave every check quiet.")
    else:
        word = "not enough to judge"
        reading = "No check could run on these data and this diagram, so nothing here speaks for or against it."
    return {"verdict": word, "run": len(ran), "contradicted": len(bad), "alpha": alpha,
            "reading": reading, "items": items}


# -- everything for one estimate ---------------------------------------------

def _link_explainer(diagram: Diagram, treatment: str, outcome: str, zs: list[str], kind: str):
    """For a control that shows an effect: the single arrows that would explain it, and the
    back-door path of the treatment each would open for the set in use."""
    from dataclasses import replace

    dag = Dag.from_diagram(diagram)

    def explain(v: str) -> list[dict]:
        if kind == "outcome":
            found = arrows_linking(dag, treatment, v, zs)
        else:
            found = arrows_linking(dag, v, outcome, [*zs, treatment])
        out = []
        for u, w in found:
            variant = replace(diagram, arrows=diagram.arrows + (Arrow(u, w),))
            q = Question.of(variant)
            check = check_adjustment(q, zs)
            path = check.get("open_path")
            out.append({"arrow": [u, w], "opens": arrow_text(q.dag, path) if path else None})
        ends = {treatment, v} if kind == "outcome" else {v, outcome}
        out.sort(key=lambda e: (e["opens"] is None, set(e["arrow"]) != ends))
        return out

    return explain


def run_checks(diagram: Diagram, frame: pd.DataFrame, mapping: dict, *, treatment: str, outcome: str,
               adjustment_set: list[str] | None, sets: list[list[str]], more_sets: bool, method: str,
               implication_checks: dict | None, resamples: int = RESAMPLES, set_cap: int = SET_CAP,
               seed: int = SEED, alpha: float = 0.05, progress: Progress | None = None,
               stop: Callable[[], bool] | None = None) -> dict:
    """Run every check for one estimate and return the verdict (see the module docstring).

    ``diagram`` marks the unmeasured variables latent; ``adjustment_set`` is the set in use
    (None for an instrument or front-door estimate); ``sets`` lists the valid sets, the set in
    use first. ``progress(done, total, step)`` is called as work completes; when ``stop()``
    returns true the run ends with :class:`Cancelled`.
    """
    n_controls = 2 * CONTROL_CAP
    total = resamples + n_controls + 1
    state = {"base": 0}

    def report(done: int, step: str) -> None:
        if stop and stop():
            raise Cancelled()
        if progress:
            progress(min(total, state["base"] + done), total, step)

    items = implication_items(implication_checks, alpha, Dag.from_diagram(diagram))
    report(1, "implications")
    state["base"] = 1
    if adjustment_set is None:
        why = "the estimate does not use an adjustment set (it uses an instrument or the front door)"
        items[:0] = [_item("set-agreement", "not run", why), _item("control-outcomes", "not run", why),
                     _item("control-exposures", "not run", why)]
        return verdict(items, alpha)
    agreement = set_agreement(
        frame, mapping, treatment=treatment, outcome=outcome, sets=sets, method=method, more_sets=more_sets,
        cap=set_cap, resamples=resamples, seed=seed, alpha=alpha,
        explain=lambda a, b: arrows_splitting_sets(diagram, a, b),
        progress=lambda done, step: report(done * resamples // max(1, _chunks(frame, method, resamples)), step))
    state["base"] = 1 + resamples
    dag = Dag.from_diagram(diagram)
    measured = sorted(mapping)
    found = []
    for kind, finder in (("outcome", control_outcomes), ("exposure", control_exposures)):
        found.append(controls_check(
            kind, frame, mapping, treatment=treatment, outcome=outcome, adjustment_set=adjustment_set,
            candidates=finder(dag, treatment, outcome, adjustment_set, measured), method=method, alpha=alpha,
            explain=_link_explainer(diagram, treatment, outcome, adjustment_set, kind),
            progress=lambda done, step: report(done, step)))
        state["base"] += CONTROL_CAP
    result = verdict([agreement, *found, *items], alpha)
    report(total, "done")
    return result


def _chunks(frame: pd.DataFrame, method: str, resamples: int) -> int:
    """How many progress ticks the set comparison gives (row chunks, or resamples)."""
    return -(-len(frame) // CHUNK) if method == "regression" else resamples
