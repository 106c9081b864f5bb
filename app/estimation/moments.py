"""Sufficient statistics of a numeric design: the column means and the centred
cross-product matrix, accumulated in one pass over row chunks.

Every linear question about the columns (a partial correlation, the residual
sum of squares of a regression with an intercept) is a small solve on this
matrix, whatever the number of rows. Chunks are merged with the pairwise
update of Chan, Golub & LeVeque (1979): each chunk is centred at its own
mean, and the merge adds ``n_a n_b / n (m_a - m_b)(m_a - m_b)'``; this keeps
the accuracy of a two-pass computation (no sum of squares of raw values is
ever formed), so columns near 1e6 beside columns near 1e-3 lose nothing.
Solves are done on the correlation scale (each column divided by its
standard deviation), so they are as well conditioned as the data allow.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Moments", "accumulate", "CHUNK_ROWS"]

CHUNK_ROWS = 1 << 16


@dataclass
class Moments:
    n: int
    mean: np.ndarray         # (p,)
    cross: np.ndarray        # (p, p): sum over rows of (x - mean)(x - mean)'

    def merge(self, other: "Moments") -> "Moments":
        if self.n == 0:
            return other
        if other.n == 0:
            return self
        n = self.n + other.n
        delta = other.mean - self.mean
        mean = self.mean + delta * (other.n / n)
        cross = self.cross + other.cross + np.outer(delta, delta) * (self.n * other.n / n)
        return Moments(n, mean, cross)

    def residual_cross(self, targets: list[int], given: list[int]) -> np.ndarray:
        """Cross-products of the residuals of ``targets`` after regressing each on
        ``given`` and an intercept: S_tt - S_tg S_gg^+ S_gt (a Schur complement)."""
        t = np.asarray(targets, dtype=int)
        s_tt = self.cross[np.ix_(t, t)]
        if not given:
            return s_tt.copy()
        g = np.asarray(given, dtype=int)
        scale = np.sqrt(np.diag(self.cross))
        scale[scale == 0] = 1.0
        sg, st = scale[g], scale[t]
        s_gg = self.cross[np.ix_(g, g)] / np.outer(sg, sg)
        s_gt = self.cross[np.ix_(g, t)] / np.outer(sg, st)
        # least squares on the small normal equations: exact for a full-rank set, and the
        # minimum-norm answer (the same residuals) when the given columns are collinear
        coef = np.linalg.lstsq(s_gg, s_gt, rcond=1e-13)[0]
        reduced = s_tt / np.outer(st, st) - s_gt.T @ coef
        reduced = (reduced + reduced.T) / 2
        return reduced * np.outer(st, st)

    def residual_ss(self, response: int, given: list[int]) -> float:
        """Residual sum of squares of ``response`` on ``given`` and an intercept."""
        return max(0.0, float(self.residual_cross([response], given)[0, 0]))


def _chunk(block: np.ndarray, shift: np.ndarray) -> Moments:
    block = block - shift
    mean = block.mean(axis=0)
    centred = block - mean
    return Moments(block.shape[0], mean, centred.T @ centred)


def accumulate(x: np.ndarray, chunk: int = CHUNK_ROWS) -> Moments:
    """Means and centred cross-products of the columns of ``x``, by pairwise merging
    of row chunks (a balanced tree, so rounding grows with log of the chunk count).

    Every chunk is first shifted by the first chunk's mean, so that the differences of
    chunk means in the merge are small numbers known to full precision even for a
    column offset far from zero (the shifted-data algorithm)."""
    n, p = x.shape
    if n == 0:
        return Moments(0, np.zeros(p), np.zeros((p, p)))
    shift = x[:min(chunk, n)].mean(axis=0)
    parts = [_chunk(x[a:min(a + chunk, n)], shift) for a in range(0, n, chunk)]
    while len(parts) > 1:
        parts = [parts[i].merge(parts[i + 1]) if i + 1 < len(parts) else parts[i]
                 for i in range(0, len(parts), 2)]
    total = parts[0]
    return Moments(total.n, total.mean + shift, total.cross)
