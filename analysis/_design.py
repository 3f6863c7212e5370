"""Random-effects design and the block Cholesky factor shared by the mixed-model fits.

Private helper of :mod:`twofold.analysis._laplace` (logistic GLMMs) and usable by any
penalised least-squares fit (Bates, Mächler, Bolker & Walker 2015, J. Stat. Softw. 67(1),
sections 3.2-3.4 and 5).

A grouping factor ``k`` with ``L_k`` levels and ``p_k`` random-effect terms (``"1"``: one
intercept; ``"1 + kind"``: an intercept and a slope) contributes ``q_k = L_k p_k`` columns to
``Z``, ordered level-major (level ``l``, term ``j`` at ``l p_k + j``). The relative covariance
factor ``Lambda`` is block diagonal with one lower-triangular ``p_k x p_k`` block ``T_k`` per
level; ``theta`` holds the lower triangles of the ``T_k`` column by column (the layout of lme4,
so the values can be compared), and the random effects are ``b = Lambda u`` with
``u ~ N(0, I)`` (GLMM) or ``N(0, sigma^2 I)`` (LMM).

Everything below needs the weighted cross-products of ``Z`` for the current weights and the
Cholesky factor of ``H = Lambda' Z' W Z Lambda + I``.

Cost model (the reason for the layout)
--------------------------------------
The factor with the most levels (respondents, say ``R``) is put first. Its block of ``H`` is
block diagonal (``R`` blocks of ``p_1 x p_1``), so it is factored level by level in ``O(R p_1^3)``
and eliminated in closed form; only the remaining ``Q = sum_{k>1} L_k p_k`` columns (items, with
their slopes) form a dense Schur complement. One factorisation therefore costs

* ``O(n s^2)`` to form the weighted cross-products from the trials (``s = sum p_k``; one
  ``bincount`` per pair of columns, no ``n x q`` matrix is ever built),
* ``O(R p_1 Q^2)`` for the Schur complement ``L21 L21'`` and ``O(Q^3 / 3)`` for its Cholesky,

and ``O(R p_1 Q + Q^2)`` memory. For 5,000 respondents x 100 items (500k trials) that is a few
``10^7`` flops per factorisation: linear in trials, linear in respondents and cubic in the
item-side size only.
"""

from __future__ import annotations

import dataclasses

import numpy as np
from scipy import linalg


@dataclasses.dataclass
class Factor:
    """One grouping factor: level codes and the columns of its random-effects model matrix."""

    name: str
    codes: np.ndarray  # (n,) int64 in 0 .. n_levels - 1
    n_levels: int
    zx: np.ndarray  # (n, p) values of the random-effect terms (a column of ones for "1")
    terms: list[str]

    @property
    def p(self) -> int:
        return self.zx.shape[1]

    @property
    def q(self) -> int:
        return self.n_levels * self.p

    @property
    def n_theta(self) -> int:
        return self.p * (self.p + 1) // 2


def _tril(p: int) -> tuple[np.ndarray, np.ndarray]:
    """Row and column indices of a lower triangle, column by column (lme4's theta order)."""
    rows, cols = [], []
    for c in range(p):
        for r in range(c, p):
            rows.append(r)
            cols.append(c)
    return np.array(rows, dtype=int), np.array(cols, dtype=int)


class RandomDesign:
    """Random-effects design of one model: factors in input order, eliminated largest first."""

    def __init__(self, factors: list[Factor]) -> None:
        self.factors = factors
        self.n = len(factors[0].codes)
        self.order = sorted(range(len(factors)), key=lambda j: -factors[j].q)
        self.first = factors[self.order[0]]
        self.rest = [factors[j] for j in self.order[1:]]
        self.q1 = self.first.q
        offs = np.cumsum([0] + [f.q for f in self.rest])
        self.rest_off = offs[:-1]
        self.qc = int(offs[-1])
        # theta slices in input order
        t_off = np.cumsum([0] + [f.n_theta for f in factors])
        self.theta_slices = [slice(t_off[i], t_off[i + 1]) for i in range(len(factors))]
        self.n_theta = int(t_off[-1])
        self.tril = [_tril(f.p) for f in factors]
        lower: list[float] = []
        for r, c in self.tril:
            lower.extend(0.0 if ri == ci else -np.inf for ri, ci in zip(r, c, strict=True))
        self.theta_lower = np.array(lower)
        self.theta_start = np.array([1.0 if lo == 0.0 else 0.0 for lo in lower])
        # index of each factor in elimination order
        self.pos = {j: i for i, j in enumerate(self.order)}

    # -- Lambda ------------------------------------------------------------------------------
    def t_blocks(self, theta: np.ndarray) -> list[np.ndarray]:
        """The lower-triangular blocks ``T_k`` per factor (input order)."""
        out = []
        for f, sl, (r, c) in zip(self.factors, self.theta_slices, self.tril, strict=True):
            t = np.zeros((f.p, f.p))
            t[r, c] = theta[sl]
            out.append(t)
        return out

    def covariances(self, theta: np.ndarray) -> list[np.ndarray]:
        """Relative covariance ``T_k T_k'`` of each factor's random effects (input order)."""
        return [t @ t.T for t in self.t_blocks(theta)]

    def _ordered_t(self, theta: np.ndarray) -> list[np.ndarray]:
        ts = self.t_blocks(theta)
        return [ts[j] for j in self.order]

    @staticmethod
    def _lam_t(t: np.ndarray, m: np.ndarray, levels: int) -> np.ndarray:
        """``Lambda_k' M`` for the rows of one factor (``M`` of shape (levels * p, cols))."""
        p = t.shape[0]
        if p == 1:
            return m * t[0, 0]
        mm = m.reshape(levels, p, -1)
        return np.einsum("ba,lbc->lac", t, mm).reshape(m.shape)

    @staticmethod
    def _lam(t: np.ndarray, m: np.ndarray, levels: int) -> np.ndarray:
        """``Lambda_k M`` for the rows of one factor."""
        p = t.shape[0]
        if p == 1:
            return m * t[0, 0]
        mm = m.reshape(levels, p, -1)
        return np.einsum("ab,lbc->lac", t, mm).reshape(m.shape)

    def lam_t(self, ts: list[np.ndarray], m: np.ndarray) -> np.ndarray:
        """``Lambda' M`` for ``M`` with rows in elimination order (first factor, then the rest)."""
        out = np.empty_like(m, dtype=float)
        out[: self.q1] = self._lam_t(ts[0], m[: self.q1], self.first.n_levels)
        for f, off, t in zip(self.rest, self.rest_off, ts[1:], strict=True):
            out[self.q1 + off : self.q1 + off + f.q] = self._lam_t(
                t, m[self.q1 + off : self.q1 + off + f.q], f.n_levels
            )
        return out

    def lam(self, ts: list[np.ndarray], m: np.ndarray) -> np.ndarray:
        """``Lambda M`` for ``M`` with rows in elimination order."""
        out = np.empty_like(m, dtype=float)
        out[: self.q1] = self._lam(ts[0], m[: self.q1], self.first.n_levels)
        for f, off, t in zip(self.rest, self.rest_off, ts[1:], strict=True):
            out[self.q1 + off : self.q1 + off + f.q] = self._lam(
                t, m[self.q1 + off : self.q1 + off + f.q], f.n_levels
            )
        return out

    # -- products with Z -----------------------------------------------------------------------
    def z_times(self, b: np.ndarray) -> np.ndarray:
        """``Z b`` for ``b`` in elimination order (length q)."""
        f = self.first
        out = np.einsum("np,np->n", f.zx, b[: self.q1].reshape(f.n_levels, f.p)[f.codes])
        for g, off in zip(self.rest, self.rest_off, strict=True):
            bb = b[self.q1 + off : self.q1 + off + g.q].reshape(g.n_levels, g.p)
            out += np.einsum("np,np->n", g.zx, bb[g.codes])
        return out

    def zt_times(self, v: np.ndarray) -> np.ndarray:
        """``Z' V`` for ``V`` of shape (n,) or (n, m); rows of the result in elimination order."""
        v2 = v.reshape(self.n, -1)
        m = v2.shape[1]
        parts = []
        for f in [self.first, *self.rest]:
            blk = np.empty((f.n_levels, f.p, m))
            for a in range(f.p):
                for c in range(m):
                    blk[:, a, c] = np.bincount(
                        f.codes, weights=f.zx[:, a] * v2[:, c], minlength=f.n_levels
                    )
            parts.append(blk.reshape(f.q, m))
        out = np.vstack(parts)
        return out[:, 0] if v.ndim == 1 else out

    def cross(self, w: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Weighted cross-products of ``Z``: per-level blocks of the first factor, its cross
        block with the rest (q1 x qc) and the rest's block (qc x qc)."""
        f = self.first
        a1 = np.empty((f.n_levels, f.p, f.p))
        for a in range(f.p):
            for b in range(a + 1):
                v = np.bincount(f.codes, weights=w * f.zx[:, a] * f.zx[:, b], minlength=f.n_levels)
                a1[:, a, b] = v
                a1[:, b, a] = v
        c = np.zeros((self.q1, self.qc))
        s = np.zeros((self.qc, self.qc))
        c3 = c.reshape(f.n_levels, f.p, self.qc)
        for g, off in zip(self.rest, self.rest_off, strict=True):
            key = f.codes.astype(np.int64) * g.n_levels + g.codes
            for a in range(f.p):
                wa = w * f.zx[:, a]
                for b in range(g.p):
                    v = np.bincount(key, weights=wa * g.zx[:, b], minlength=f.n_levels * g.n_levels)
                    c3[:, a, off + b : off + g.q : g.p] = v.reshape(f.n_levels, g.n_levels)
        for i, (g, off) in enumerate(zip(self.rest, self.rest_off, strict=True)):
            idx = off + np.arange(g.q).reshape(g.n_levels, g.p)
            for a in range(g.p):
                for b in range(a + 1):
                    v = np.bincount(
                        g.codes, weights=w * g.zx[:, a] * g.zx[:, b], minlength=g.n_levels
                    )
                    s[idx[:, a], idx[:, b]] = v
                    s[idx[:, b], idx[:, a]] = v
            for h, off2 in zip(self.rest[i + 1 :], self.rest_off[i + 1 :], strict=True):
                key = g.codes.astype(np.int64) * h.n_levels + h.codes
                for a in range(g.p):
                    for b in range(h.p):
                        v = np.bincount(
                            key,
                            weights=w * g.zx[:, a] * h.zx[:, b],
                            minlength=g.n_levels * h.n_levels,
                        ).reshape(g.n_levels, h.n_levels)
                        rows = off + np.arange(g.n_levels) * g.p + a
                        cols = off2 + np.arange(h.n_levels) * h.p + b
                        s[np.ix_(rows, cols)] = v
                        s[np.ix_(cols, rows)] = v.T
        return a1, c, s

    def trial_solves(
        self, ts: list[np.ndarray], chol: BlockCholesky
    ) -> tuple[list[np.ndarray], list[np.ndarray]]:
        """Per trial ``i``: ``v_i = Lambda' z_i`` and ``y_i = H^-1 v_i`` on the levels it touches.

        Both are returned factor by factor in elimination order as ``(n, p_k)`` arrays. The
        leverages ``a_i = z_i' Lambda H^-1 Lambda' z_i`` are ``sum_k (v_k * y_k).sum(1)``; the
        analytic gradient of the Laplace deviance needs them. ``O(n s^2)`` after
        :meth:`BlockCholesky.inverse_blocks`.
        """
        facs = [self.first, *self.rest]
        v = [f.zx @ t for f, t in zip(facs, ts, strict=True)]
        a, bt, c = chol.inverse_blocks()
        f1 = self.first
        y = [np.einsum("nab,nb->na", a[f1.codes], v[0])]
        if bt is None or c is None:
            return v, y
        bt3 = bt.reshape(self.qc, f1.n_levels, f1.p)
        rows = [
            off + g.codes[:, None] * g.p + np.arange(g.p)[None, :]
            for g, off in zip(self.rest, self.rest_off, strict=True)
        ]
        for gi in range(len(self.rest)):
            bg = bt3[rows[gi], f1.codes[:, None], :]  # (n, p_g, p1)
            y[0] += np.einsum("nba,nb->na", bg, v[1 + gi])
            yg = np.einsum("nba,na->nb", bg, v[0])
            for hi in range(len(self.rest)):
                cgh = c[rows[gi][:, :, None], rows[hi][:, None, :]]  # (n, p_g, p_h)
                yg += np.einsum("nab,nb->na", cgh, v[1 + hi])
            y.append(yg)
        return v, y

    # -- the factor of H ------------------------------------------------------------------------
    def factor(self, theta: np.ndarray, w: np.ndarray) -> BlockCholesky:
        """Cholesky factor of ``Lambda' Z' W Z Lambda + I`` at ``theta`` and weights ``w``."""
        return BlockCholesky(self, self._ordered_t(theta), *self.cross(w))

    def to_input_order(self, v: np.ndarray) -> list[np.ndarray]:
        """Split a q-vector (elimination order) into (levels, p) arrays per factor, input order."""
        parts = [v[: self.q1].reshape(self.first.n_levels, self.first.p)]
        for g, off in zip(self.rest, self.rest_off, strict=True):
            parts.append(v[self.q1 + off : self.q1 + off + g.q].reshape(g.n_levels, g.p))
        out: list[np.ndarray] = [np.empty(0)] * len(self.factors)
        for pos, j in enumerate(self.order):
            out[j] = parts[pos]
        return out


class BlockCholesky:
    """``L`` with ``L L' = Lambda' Z' W Z Lambda + I``, first factor eliminated level by level."""

    def __init__(self, design: RandomDesign, ts, a1, c, s) -> None:
        self.d = design
        self.ts = ts
        f = design.first
        p1 = f.p
        t1 = ts[0]
        h11 = np.einsum("ba,lbc,cd->lad", t1, a1, t1) if p1 > 1 else a1 * t1[0, 0] ** 2
        h11 = h11 + np.eye(p1)
        self.r1 = np.linalg.cholesky(h11)  # (L1, p1, p1) lower
        self.r1_inv = np.linalg.inv(self.r1) if p1 > 1 else 1.0 / self.r1
        if design.qc == 0:
            self.l21 = np.zeros((0, design.q1))
            self.l22 = np.zeros((0, 0))
        else:
            h12 = design._lam_t(t1, c, f.n_levels)  # Lambda_1' C
            h21 = self._rest_lam_t(h12.T)  # Lambda_c' C' Lambda_1
            h3 = h21.reshape(design.qc, f.n_levels, p1)
            self.l21 = np.einsum("qla,lba->qlb", h3, self.r1_inv).reshape(design.qc, design.q1)
            sm = self._rest_lam_t(self._rest_lam_t(s).T)
            sm[np.diag_indices_from(sm)] += 1.0
            sm -= self.l21 @ self.l21.T
            self.l22 = linalg.cholesky(sm, lower=True, check_finite=False)

    def _rest_lam_t(self, m: np.ndarray) -> np.ndarray:
        d = self.d
        out = np.empty_like(m)
        for g, off, t in zip(d.rest, d.rest_off, self.ts[1:], strict=True):
            out[off : off + g.q] = d._lam_t(t, m[off : off + g.q], g.n_levels)
        return out

    def inverse_blocks(self) -> tuple[np.ndarray, np.ndarray | None, np.ndarray | None]:
        """The parts of ``H^-1`` that single trials touch (``H = L L'``).

        With ``L = [[R1, 0], [L21, L22]]`` and ``G = L22^-1 L21 R1^-1``,
        ``H^-1 = [[R1^-T R1^-1 + G'G, -G' L22^-1], [-L22^-T G, (L22 L22')^-1]]``. Returned: the
        diagonal blocks of the first factor, shape ``(L1, p1, p1)``; the lower-left block
        ``-L22^-T G`` (``qc x q1``); and ``(L22 L22')^-1`` (``qc x qc``); None for the last two
        with one grouping factor. Cost ``O(qc^2 q1 + qc^3)``.
        """
        d = self.d
        f = d.first
        r1_inv = np.broadcast_to(self.r1_inv, self.r1.shape)
        a = np.einsum("lba,lbc->lac", r1_inv, r1_inv)
        if d.qc == 0:
            return a, None, None
        lr = np.einsum("qla,lab->qlb", self.l21.reshape(d.qc, f.n_levels, f.p), r1_inv)
        g = linalg.solve_triangular(
            self.l22, lr.reshape(d.qc, d.q1), lower=True, check_finite=False
        )
        g3 = g.reshape(d.qc, f.n_levels, f.p)
        a = a + np.einsum("qla,qlb->lab", g3, g3)
        bt = -linalg.solve_triangular(self.l22, g, lower=True, trans="T", check_finite=False)
        c = linalg.cho_solve((self.l22, True), np.eye(d.qc), check_finite=False)
        return a, bt, c

    def logdet(self) -> float:
        """``log |L|^2``."""
        v = 2.0 * float(np.log(np.einsum("lii->li", self.r1)).sum())
        if self.d.qc:
            v += 2.0 * float(np.log(np.diag(self.l22)).sum())
        return v

    def forward(self, m: np.ndarray) -> np.ndarray:
        """``L^{-1} M`` (rows of M in elimination order)."""
        d = self.d
        m2 = m.reshape(m.shape[0], -1)
        f = d.first
        w1 = np.einsum("lab,lbc->lac", self.r1_inv, m2[: d.q1].reshape(f.n_levels, f.p, -1))
        w1 = w1.reshape(d.q1, -1)
        if d.qc == 0:
            return w1.reshape(m.shape)
        w2 = linalg.solve_triangular(
            self.l22, m2[d.q1 :] - self.l21 @ w1, lower=True, check_finite=False
        )
        return np.vstack([w1, w2]).reshape(m.shape)

    def backward(self, r: np.ndarray) -> np.ndarray:
        """``L'^{-1} r`` (r in elimination order)."""
        d = self.d
        r2 = r.reshape(r.shape[0], -1)
        f = d.first
        if d.qc:
            v2 = linalg.solve_triangular(
                self.l22, r2[d.q1 :], lower=True, trans="T", check_finite=False
            )
            rhs1 = r2[: d.q1] - self.l21.T @ v2
        else:
            v2 = np.zeros((0, r2.shape[1]))
            rhs1 = r2[: d.q1]
        v1 = np.einsum("lba,lbc->lac", self.r1_inv, rhs1.reshape(f.n_levels, f.p, -1))
        return np.vstack([v1.reshape(d.q1, -1), v2]).reshape(r.shape)
