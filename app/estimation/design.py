"""From a table and a measure mapping to the numeric arrays an estimator needs.

A *mapping* says which column measures which diagram variable. Variables with
no column are unmeasured. :func:`build_design` selects the columns for one
estimate, converts them (two-level text becomes 0/1, text covariates become
indicator columns), drops incomplete rows and refuses, naming the column,
whatever cannot be estimated: an all-missing column, a constant treatment,
text where a number is needed, perfectly collinear adjustment columns.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field, replace
from typing import Iterable, Mapping

import numpy as np
import pandas as pd

from .errors import (
    AllMissingColumn,
    BadMapping,
    CollinearColumns,
    ConstantColumn,
    NonNumericColumn,
    TooFewRows,
)

__all__ = ["propose_mapping", "check_mapping", "Column", "Design", "build_design", "MAX_LEVELS"]

MAX_LEVELS = 50
TRUE_WORDS = {"1", "yes", "y", "true", "t", "treated", "exposed", "joined"}


def _normalise(name: str) -> str:
    return re.sub(r"[^0-9a-z]", "", name.lower())


def propose_mapping(variables: Iterable[str], columns: Iterable[str]) -> dict[str, str]:
    """Match variables to columns: exact names first, then ignoring case and punctuation."""
    columns = list(columns)
    taken: set[str] = set()
    out: dict[str, str] = {}
    variables = list(variables)
    for var in variables:
        if var in columns:
            out[var] = var
            taken.add(var)
    loose: dict[str, list[str]] = {}
    for col in columns:
        if col not in taken:
            loose.setdefault(_normalise(col), []).append(col)
    for var in variables:
        if var in out:
            continue
        hits = loose.get(_normalise(var), [])
        if len(hits) == 1 and hits[0] not in taken:
            out[var] = hits[0]
            taken.add(hits[0])
    return out


def check_mapping(mapping: object, variables: Iterable[str], columns: Iterable[str]) -> dict[str, str]:
    """Validate a {variable: column} mapping; empty or null columns mean unmeasured."""
    if not isinstance(mapping, Mapping):
        raise BadMapping("the mapping must be an object of variable: column pairs")
    variables = set(variables)
    columns = list(columns)
    out: dict[str, str] = {}
    used: dict[str, str] = {}
    for var, col in mapping.items():
        if var not in variables:
            raise BadMapping(f"the mapping names {var!r}, which is not a variable of the diagram", item=var)
        if col is None or col == "":
            continue
        if not isinstance(col, str):
            raise BadMapping(f"the column for {var!r} must be a column name, got {col!r}", item=var)
        if col not in columns:
            raise BadMapping(
                f"variable {var!r} is mapped to column {col!r}, which is not in the data "
                f"(columns: {', '.join(columns[:12])}{', ...' if len(columns) > 12 else ''})",
                item=var,
            )
        if col in used:
            raise BadMapping(
                f"column {col!r} is mapped to both {used[col]!r} and {var!r}; "
                "each column can measure one variable",
                item=col,
            )
        used[col] = var
        out[var] = col
    return out


@dataclass(frozen=True)
class Column:
    """How one variable entered the design."""

    variable: str
    column: str
    kind: str  # 'number', 'binary' or 'categorical'
    names: tuple[str, ...]  # names of the design columns it became
    treated_level: str | None = None  # for a two-level text column, the level coded 1
    reference_level: str | None = None  # for indicators, the omitted level

    def to_json(self) -> dict:
        return {
            "variable": self.variable, "column": self.column, "kind": self.kind,
            "design_columns": list(self.names), "level_coded_1": self.treated_level,
            "reference_level": self.reference_level,
        }


@dataclass
class Design:
    """Numeric arrays for one estimate, all on the same complete rows."""

    y: np.ndarray
    t: np.ndarray
    covariates: np.ndarray  # n x p adjustment (or control) columns
    covariate_names: list[str]
    groups: dict[str, list[int]]  # variable -> its covariate column indices
    instruments: np.ndarray = field(default_factory=lambda: np.empty((0, 0)))
    instrument_names: list[str] = field(default_factory=list)
    mediators: np.ndarray = field(default_factory=lambda: np.empty((0, 0)))
    mediator_names: list[str] = field(default_factory=list)
    columns: dict[str, Column] = field(default_factory=dict)
    t_binary: bool = False
    y_binary: bool = False
    n_dropped: int = 0
    rows: np.ndarray | None = None  # positions of the used rows in the table

    @property
    def n(self) -> int:
        return int(self.y.shape[0])

    def take(self, index: np.ndarray) -> "Design":
        """The design restricted to (or resampled at) the given row positions."""
        return replace(
            self,
            y=self.y[index], t=self.t[index], covariates=self.covariates[index],
            instruments=self.instruments[index] if self.instruments.size else self.instruments,
            mediators=self.mediators[index] if self.mediators.size else self.mediators,
            rows=None,
        )

    def with_treatment(self, t: np.ndarray) -> "Design":
        return replace(self, t=t)

    def with_covariate(self, values: np.ndarray, name: str) -> "Design":
        cov = np.column_stack([self.covariates, values]) if self.covariates.size else values[:, None]
        groups = dict(self.groups)
        groups[name] = [cov.shape[1] - 1]
        return replace(self, covariates=cov, covariate_names=self.covariate_names + [name], groups=groups)


def _all_missing(frame: pd.DataFrame, var: str, col: str) -> None:
    if frame[col].isna().all():
        raise AllMissingColumn(
            f"column {col!r} (mapped to {var!r}) has no values at all; map another column "
            "or leave the variable unmeasured",
            item=col,
        )


def _as_number(series: pd.Series, var: str, col: str, role: str) -> tuple[pd.Series, str, str | None]:
    """A column that must be a number (or 0/1). Returns (values, kind, level coded 1)."""
    if pd.api.types.is_bool_dtype(series):
        return series.astype(float), "binary", "True"
    if pd.api.types.is_numeric_dtype(series):
        values = series.astype(float)
        if not np.isfinite(values.dropna()).all():
            raise NonNumericColumn(f"column {col!r} ({role} {var!r}) holds infinite values", item=col)
        kind = "binary" if set(np.unique(values.dropna())) <= {0.0, 1.0} and values.nunique() == 2 else "number"
        return values, kind, ("1" if kind == "binary" else None)
    present = series.dropna().astype(str).str.strip()
    levels = sorted(present.unique())
    if len(levels) == 2:
        low, high = levels
        if low.lower() in TRUE_WORDS and high.lower() not in TRUE_WORDS:
            low, high = high, low
        return series.map({low: 0.0, high: 1.0}, na_action="ignore").astype(float), "binary", high
    parsed = pd.to_numeric(present, errors="coerce")
    bad = present[parsed.isna()]
    shown = ", ".join(repr(v) for v in bad.unique()[:3])
    where = ", ".join(str(int(i) + 2) for i in bad.index[:3])
    raise NonNumericColumn(
        f"column {col!r} ({role} {var!r}) must hold numbers, but has text such as {shown} "
        f"(file lines {where}); fix those cells or map another column",
        item=col,
    )


def _as_covariate(series: pd.Series, var: str, col: str):
    """Numbers stay; text with few levels becomes indicator columns."""
    if pd.api.types.is_bool_dtype(series) or pd.api.types.is_numeric_dtype(series):
        values, kind, _ = _as_number(series, var, col, "adjustment variable")
        return values.to_frame(col), kind, None
    present = series.dropna().astype(str).str.strip()
    parsed = pd.to_numeric(present, errors="coerce")
    if parsed.notna().mean() >= 0.5:
        bad = present[parsed.isna()]
        shown = ", ".join(repr(v) for v in bad.unique()[:3])
        where = ", ".join(str(int(i) + 2) for i in bad.index[:3])
        raise NonNumericColumn(
            f"column {col!r} (adjustment variable {var!r}) is mostly numbers but has text such as "
            f"{shown} (file lines {where}); fix those cells or map another column",
            item=col,
        )
    levels = sorted(present.unique())
    if len(levels) > MAX_LEVELS:
        raise NonNumericColumn(
            f"column {col!r} (adjustment variable {var!r}) has {len(levels)} different text values; "
            f"at most {MAX_LEVELS} categories can be adjusted for (is it an identifier?)",
            item=col,
        )
    text = series.astype("object").where(series.isna(), series.astype(str).str.strip())
    dummies = pd.get_dummies(pd.Categorical(text, categories=levels), prefix=col, prefix_sep="=", dtype=float)
    dummies.index = series.index
    dummies[series.isna().to_numpy()] = np.nan
    return dummies.iloc[:, 1:], "categorical", levels[0]


def build_design(
    frame: pd.DataFrame,
    mapping: Mapping[str, str],
    *,
    treatment: str,
    outcome: str,
    adjust: Iterable[str] = (),
    instruments: Iterable[str] = (),
    mediators: Iterable[str] = (),
    min_rows: int = 3,
) -> Design:
    """Select, convert and check the columns for one estimate (complete cases)."""
    adjust, instruments, mediators = list(adjust), list(instruments), list(mediators)
    for var in [treatment, outcome, *adjust, *instruments, *mediators]:
        if var not in mapping:
            raise BadMapping(f"variable {var!r} is needed for this estimate but has no column", item=var)
        _all_missing(frame, var, mapping[var])

    parts: list[pd.DataFrame] = []
    columns: dict[str, Column] = {}

    def number(var: str, role: str) -> str:
        col = mapping[var]
        values, kind, level = _as_number(frame[col], var, col, role)
        key = f"{role}:{var}"
        parts.append(values.rename(key).to_frame())
        columns[var] = Column(var, col, kind, (key,), treated_level=level if kind == "binary" else None)
        return key

    t_key = number(treatment, "treatment")
    y_key = number(outcome, "outcome")
    z_keys = [number(v, "instrument") for v in instruments]
    m_keys = [number(v, "mediator") for v in mediators]
    cov_names: list[str] = []
    groups_by_var: dict[str, list[str]] = {}
    for var in adjust:
        col = mapping[var]
        block, kind, reference = _as_covariate(frame[col], var, col)
        block = block.copy()
        block.columns = [str(c) for c in block.columns]
        parts.append(block)
        cov_names.extend(block.columns)
        groups_by_var[var] = list(block.columns)
        columns[var] = Column(var, col, kind, tuple(block.columns), reference_level=reference)

    data = pd.concat(parts, axis=1) if len(parts) > 1 else parts[0]
    complete = data.notna().all(axis=1).to_numpy()
    n_total = len(data)
    used = data[complete] if not complete.all() else data
    n_used = len(used)
    n_dropped = n_total - n_used
    if n_used < min_rows:
        raise TooFewRows(
            f"only {n_used} row(s) have every needed column filled in "
            f"({n_dropped} of {n_total} dropped for missing values); too few to estimate",
            item={"n_used": n_used, "n_dropped": n_dropped},
        )

    t = used[t_key].to_numpy(dtype=float)
    y = used[y_key].to_numpy(dtype=float)
    if np.all(t == t[0]):
        raise ConstantColumn(
            f"the treatment column {mapping[treatment]!r} takes the single value {t[0]:g} on the "
            f"{n_used} rows used; an effect cannot be estimated without variation in the treatment",
            item=mapping[treatment],
        )
    if np.all(y == y[0]):
        raise ConstantColumn(
            f"the outcome column {mapping[outcome]!r} takes the single value {y[0]:g} on the "
            f"{n_used} rows used; there is nothing to explain",
            item=mapping[outcome],
        )
    cov = used[cov_names].to_numpy(dtype=float) if cov_names else np.empty((n_used, 0))
    groups = {var: [cov_names.index(c) for c in names] for var, names in groups_by_var.items()}
    z = used[z_keys].to_numpy(dtype=float) if z_keys else np.empty((n_used, 0))
    m = used[m_keys].to_numpy(dtype=float) if m_keys else np.empty((n_used, 0))

    labelled = [(f"treatment {mapping[treatment]!r}", t)] + [
        (f"column {c!r}", cov[:, i]) for i, c in enumerate(cov_names)
    ]
    _refuse_collinear(labelled, columns, groups_by_var)
    if m.size:
        _refuse_collinear(
            [(f"treatment {mapping[treatment]!r}", t)]
            + [(f"mediator {mapping[v]!r}", m[:, i]) for i, v in enumerate(mediators)],
            columns, {},
        )
    return Design(
        y=y, t=t, covariates=cov, covariate_names=cov_names, groups=groups,
        instruments=z, instrument_names=list(instruments), mediators=m, mediator_names=list(mediators),
        columns=columns, t_binary=columns[treatment].kind == "binary",
        y_binary=columns[outcome].kind == "binary", n_dropped=n_dropped,
        rows=np.flatnonzero(complete),
    )


def _refuse_collinear(labelled: list[tuple[str, np.ndarray]], columns, groups_by_var) -> None:
    """Refuse constant or perfectly collinear columns (an intercept is always present)."""
    if len(labelled) < 1:
        return
    matrix = np.column_stack([v for _, v in labelled])
    centred = matrix - matrix.mean(axis=0)
    scale = np.sqrt((centred ** 2).mean(axis=0))
    for (label, _), s in zip(labelled, scale):
        if s == 0:
            raise CollinearColumns(
                f"{label} takes a single value on the rows used, so it cannot be adjusted for; "
                "remove it from the mapping or choose another adjustment set",
                item=label,
            )
    if len(labelled) < 2:
        return
    z = centred / scale
    gram = (z.T @ z) / len(z)
    values, vectors = np.linalg.eigh(gram)
    if values[0] > 1e-9 * len(labelled):
        return
    weights = np.abs(vectors[:, 0])
    involved = [labelled[i][0] for i in np.flatnonzero(weights > 1e-3 * weights.max())]
    raise CollinearColumns(
        "perfectly collinear columns: " + ", ".join(involved)
        + " (one is an exact linear combination of the others, with the intercept); "
        "drop one of them from the mapping or choose another adjustment set",
        item=involved,
    )
