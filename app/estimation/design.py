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
    levels: tuple[str, ...] = ()  # for a text column, every level (sorted; the first is the reference)

    def to_json(self) -> dict:
        return {
            "variable": self.variable, "column": self.column, "kind": self.kind,
            "design_columns": list(self.names), "level_coded_1": self.treated_level,
            "reference_level": self.reference_level, "levels": list(self.levels),
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
    _x: np.ndarray | None = field(default=None, repr=False)

    @property
    def n(self) -> int:
        return int(self.y.shape[0])

    @property
    def x(self) -> np.ndarray:
        """The regression matrix [1, treatment, covariates] (built once)."""
        if self._x is None:
            x = np.empty((self.n, 2 + self.covariates.shape[1]))
            x[:, 0] = 1.0
            x[:, 1] = self.t
            x[:, 2:] = self.covariates
            self._x = x
        return self._x

    def take(self, index: np.ndarray) -> "Design":
        """The design restricted to (or resampled at) the given row positions."""
        if self._x is not None:  # index the one matrix; treatment and covariates are views of it
            x = self._x[index]
            return replace(
                self, y=self.y[index], t=x[:, 1], covariates=x[:, 2:],
                instruments=self.instruments[index] if self.instruments.size else self.instruments,
                mediators=self.mediators[index] if self.mediators.size else self.mediators,
                rows=None, _x=x,
            )
        return replace(
            self,
            y=self.y[index], t=self.t[index], covariates=self.covariates[index],
            instruments=self.instruments[index] if self.instruments.size else self.instruments,
            mediators=self.mediators[index] if self.mediators.size else self.mediators,
            rows=None, _x=None,
        )

    def with_treatment(self, t: np.ndarray) -> "Design":
        return replace(self, t=t, _x=None)

    def with_covariate(self, values: np.ndarray, name: str) -> "Design":
        cov = np.column_stack([self.covariates, values]) if self.covariates.size else values[:, None]
        groups = dict(self.groups)
        groups[name] = [cov.shape[1] - 1]
        return replace(self, covariates=cov, covariate_names=self.covariate_names + [name], groups=groups, _x=None)


def _all_missing(frame: pd.DataFrame, var: str, col: str) -> None:
    if frame[col].isna().all():
        raise AllMissingColumn(
            f"column {col!r} (mapped to {var!r}) has no values at all; map another column "
            "or leave the variable unmeasured",
            item=col,
        )


def _lines(series: pd.Series, bad: list) -> str:
    rows = np.flatnonzero(series.isin(bad).to_numpy())[:3]
    return ", ".join(str(int(i) + 2) for i in rows)  # +1 for the header, +1 for counting from 1


def _text_levels(series: pd.Series) -> tuple[pd.Series, list[str]]:
    """The column as stripped text (missing stays missing) and its sorted distinct values."""
    raw = [u for u in series.dropna().unique()]
    stripped = {u: str(u).strip() for u in raw}
    if any(k != v for k, v in stripped.items()) or not all(isinstance(u, str) for u in raw):
        series = series.map(stripped, na_action="ignore")
    return series, sorted(set(stripped.values()))


def _numbers(series: pd.Series) -> np.ndarray:
    return series.to_numpy(dtype=float, na_value=np.nan)


def _is_binary(values: np.ndarray) -> bool:
    head = values[:1000]
    head = head[~np.isnan(head)]
    if not ((head == 0) | (head == 1)).all():
        return False  # cheap rejection for ordinary numeric columns
    present = values[~np.isnan(values)]
    zero, one = present == 0, present == 1
    return bool(zero.any() and one.any() and (zero | one).all())


HUGE_VALUE = 1e100  # beyond this, sums of squares overflow double precision on large tables


def _as_number(series: pd.Series, var: str, col: str, role: str) -> tuple[np.ndarray, str, tuple[str, str] | None]:
    """A column that must be a number (or 0/1).

    Returns (values with NaN, kind, levels): for a two-valued column, levels is
    (the value coded 0, the value coded 1) as written in the data; else None.
    """
    if pd.api.types.is_bool_dtype(series) or pd.api.types.is_numeric_dtype(series):
        values = _numbers(series.astype(float) if pd.api.types.is_bool_dtype(series) else series)
        if np.isinf(values).any():
            raise NonNumericColumn(f"column {col!r} ({role} {var!r}) holds infinite values", item=col)
        largest = float(np.nanmax(np.abs(values))) if values.size and not np.isnan(values).all() else 0.0
        if largest > HUGE_VALUE:
            raise NonNumericColumn(
                f"column {col!r} ({role} {var!r}) holds values as large as {largest:.3g}; squares of "
                f"numbers beyond {HUGE_VALUE:.0e} overflow, so rescale the column (for example to "
                "thousands or millions of its unit) before estimating",
                item=col,
            )
        kind = "binary" if _is_binary(values) else "number"
        return values, kind, (("0", "1") if kind == "binary" else None)
    text, levels = _text_levels(series)
    if len(levels) == 2:
        low, high = levels
        if low.lower() in TRUE_WORDS and high.lower() not in TRUE_WORDS:
            low, high = high, low
        return _numbers(text.map({low: 0.0, high: 1.0}, na_action="ignore").astype(float)), "binary", (low, high)
    parsed = pd.to_numeric(pd.Series(levels, dtype=object), errors="coerce")
    bad = [lv for lv, num in zip(levels, parsed) if pd.isna(num)]
    shown = ", ".join(repr(v) for v in bad[:3])
    raise NonNumericColumn(
        f"column {col!r} ({role} {var!r}) must hold numbers, but has text such as {shown} "
        f"(file lines {_lines(text, bad)}); fix those cells or map another column",
        item=col,
    )


def _as_covariate(series: pd.Series, var: str, col: str) -> tuple[np.ndarray, list[str], str, list[str]]:
    """Numbers stay; text with few levels becomes indicator columns (first level omitted)."""
    if pd.api.types.is_bool_dtype(series) or pd.api.types.is_numeric_dtype(series):
        values, kind, _ = _as_number(series, var, col, "adjustment variable")
        return values[:, None], [col], kind, []
    text, levels = _text_levels(series)
    parsed = pd.to_numeric(pd.Series(levels, dtype=object), errors="coerce")
    if len(levels) > 2 and parsed.notna().mean() >= 0.5:
        bad = [lv for lv, num in zip(levels, parsed) if pd.isna(num)]
        shown = ", ".join(repr(v) for v in bad[:3])
        raise NonNumericColumn(
            f"column {col!r} (adjustment variable {var!r}) is mostly numbers but has text such as "
            f"{shown} (file lines {_lines(text, bad)}); fix those cells or map another column",
            item=col,
        )
    if len(levels) > MAX_LEVELS:
        raise NonNumericColumn(
            f"column {col!r} (adjustment variable {var!r}) has {len(levels)} different text values; "
            f"at most {MAX_LEVELS} categories can be adjusted for (is it an identifier?)",
            item=col,
        )
    found, uniques = pd.factorize(text)
    order = {lv: i for i, lv in enumerate(levels)}
    lookup = np.array([order[str(u)] for u in uniques] + [-1])
    codes = lookup[found]  # factorize marks missing as -1, which indexes the trailing -1
    block = np.empty((len(codes), len(levels) - 1))
    for j in range(1, len(levels)):
        block[:, j - 1] = codes == j
    block[codes < 0] = np.nan
    return block, [f"{col}={lv}" for lv in levels[1:]], "categorical", levels


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

    columns: dict[str, Column] = {}

    def number(var: str, role: str) -> np.ndarray:
        col = mapping[var]
        values, kind, levels = _as_number(frame[col], var, col, role)
        low, high = levels if levels is not None else (None, None)
        columns[var] = Column(var, col, kind, (f"{role}:{var}",), treated_level=high, reference_level=low,
                              levels=tuple(levels) if levels is not None else ())
        return values

    # Text covariates become indicator blocks first (their width is needed); numeric
    # columns are written straight into the one regression matrix, so the peak memory
    # is that matrix plus one column.
    cov_names: list[str] = []
    groups: dict[str, list[int]] = {}
    pending: list[tuple[str, np.ndarray | None]] = []
    for var in adjust:
        col = mapping[var]
        series = frame[col]
        if pd.api.types.is_bool_dtype(series) or pd.api.types.is_numeric_dtype(series):
            names, kind, levels, block = [col], None, [], None
        else:
            block, names, kind, levels = _as_covariate(series, var, col)
        groups[var] = list(range(len(cov_names), len(cov_names) + len(names)))
        cov_names.extend(names)
        pending.append((var, block))
        if kind is not None:
            columns[var] = Column(var, col, kind, tuple(names), reference_level=levels[0] if levels else None,
                                  levels=tuple(levels))

    n_total = len(frame)
    x = np.empty((n_total, 2 + len(cov_names)))
    x[:, 0] = 1.0
    x[:, 1] = number(treatment, "treatment")
    y = number(outcome, "outcome")
    for var, block in pending:
        at = 2 + groups[var][0]
        if block is None:
            col = mapping[var]
            values, kind, _ = _as_number(frame[col], var, col, "adjustment variable")
            x[:, at] = values
            columns[var] = Column(var, col, kind, (col,))
        else:
            x[:, at:at + block.shape[1]] = block
    del pending
    z = np.column_stack([number(v, "instrument") for v in instruments]) if instruments else np.empty((n_total, 0))
    m = np.column_stack([number(v, "mediator") for v in mediators]) if mediators else np.empty((n_total, 0))

    complete = ~np.isnan(y)
    for j in range(1, x.shape[1]):
        complete &= ~np.isnan(x[:, j])
    if z.size:
        complete &= ~np.isnan(z).any(axis=1)
    if m.size:
        complete &= ~np.isnan(m).any(axis=1)
    n_used = int(complete.sum())
    n_dropped = n_total - n_used
    if n_used < min_rows:
        raise TooFewRows(
            f"only {n_used} row(s) have every needed column filled in "
            f"({n_dropped} of {n_total} dropped for missing values); too few to estimate",
            item={"n_used": n_used, "n_dropped": n_dropped},
        )
    everything = n_dropped == 0
    if not everything:
        x, y = x[complete], y[complete]
        z = z[complete] if z.size else np.empty((n_used, 0))
        m = m[complete] if m.size else np.empty((n_used, 0))
    t = x[:, 1]
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
    cov = x[:, 2:]

    _refuse_collinear([f"treatment {mapping[treatment]!r}"] + [f"column {c!r}" for c in cov_names], t, cov)
    if m.size:
        _refuse_collinear([f"treatment {mapping[treatment]!r}"] + [f"mediator {mapping[v]!r}" for v in mediators],
                          t, m)
    return Design(
        y=y, t=t, covariates=cov, covariate_names=cov_names, groups=groups,
        instruments=z, instrument_names=list(instruments), mediators=m, mediator_names=list(mediators),
        columns=columns, t_binary=columns[treatment].kind == "binary",
        y_binary=columns[outcome].kind == "binary", n_dropped=n_dropped,
        rows=None if everything else np.flatnonzero(complete), _x=x,
    )


def _refuse_collinear(labels: list[str], first: np.ndarray, rest: np.ndarray, chunk: int = 65536) -> None:
    """Refuse constant or perfectly collinear columns (an intercept is always present).

    Works on the correlation matrix of [first, rest], accumulated over row
    chunks so no full-size centred copy is made.
    """
    n, k = len(first), 1 + rest.shape[1]
    means = np.concatenate([[first.mean()], rest.mean(axis=0)]) if rest.size else np.array([first.mean()])
    gram = np.zeros((k, k))
    for start in range(0, n, chunk):
        block = np.empty((min(chunk, n - start), k))
        block[:, 0] = first[start:start + chunk]
        if rest.size:
            block[:, 1:] = rest[start:start + chunk]
        block -= means
        gram += block.T @ block
    scale = np.sqrt(np.diag(gram) / n)
    spread = np.sqrt(np.abs(means) ** 2 + 1.0)
    for label, s, sp in zip(labels, scale, spread):
        if s <= 1e-12 * sp:
            raise CollinearColumns(
                f"{label} takes a single value on the rows used, so it cannot be adjusted for; "
                "remove it from the mapping or choose another adjustment set",
                item=label,
            )
    if k < 2:
        return
    corr = gram / n / np.outer(scale, scale)
    values, vectors = np.linalg.eigh(corr)
    if values[0] > 1e-9 * k:
        return
    weights = np.abs(vectors[:, 0])
    involved = [labels[i] for i in np.flatnonzero(weights > 1e-3 * weights.max())]
    raise CollinearColumns(
        "perfectly collinear columns: " + ", ".join(involved)
        + " (one is an exact linear combination of the others, with the intercept); "
        "drop one of them from the mapping or choose another adjustment set",
        item=involved,
    )
