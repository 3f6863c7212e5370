"""Profiled (RE)ML for linear mixed models by penalised least squares.

Private helper of :mod:`twofold.analysis.mixed` (``fit_lmm(..., engine="pls")``).

The model is ``y = X beta + Z b + e`` with ``b = Lambda(theta) u``, ``u ~ N(0, sigma^2 I)``,
``e ~ N(0, sigma^2 I)``; ``Z`` holds one indicator block per grouping factor (crossed or nested)
and ``Lambda = diag(theta_k repeated over the levels of factor k)``, so ``theta_k`` is the SD of
factor ``k``'s intercepts relative to the residual SD. For a given ``theta`` the penalised
least-squares problem

    min over (u, beta) of ||y - X beta - Z Lambda u||^2 + ||u||^2

is solved from cross-products computed once (``Z'Z``, ``Z'X``, ``Z'y``, ``X'X``, ``X'y``,
``y'y``) with the sparse Cholesky factor ``L L' = Lambda Z'Z Lambda + I`` replaced by a dense
one, and ``sigma`` and ``beta`` are profiled out:

* ML:   ``d(theta) = log|L|^2 + n (1 + log(2 pi r^2 / n))``
* REML: ``d(theta) = log|L|^2 + log|R_X|^2 + (n - p) (1 + log(2 pi r^2 / (n - p)))``

where ``r^2`` is the penalised residual sum of squares and ``R_X' R_X`` the Schur complement
``X'X - R_ZX' R_ZX``. ``d`` is minimised over ``theta >= 0`` (L-BFGS-B on ``theta**2`` from a
few starts).

The factor with the most levels is placed first: its block of ``Lambda Z'Z Lambda + I`` is
diagonal, so it is eliminated in closed form and only the remaining levels form a dense matrix
(for respondents x items the dense part is the smaller of the two).

References
----------
Bates, D., Mächler, M., Bolker, B., & Walker, S. (2015). Fitting linear mixed-effects models
using lme4. J. Stat. Softw. 67(1), section 3. doi:10.18637/jss.v067.i01
"""

from __future__ import annotations

import contextlib
import dataclasses

import numpy as np
from scipy import linalg, optimize, sparse

_LOG_2PI = float(np.log(2 * np.pi))
_THREADED_ABOVE = 1500  # dense levels above which multi-threaded BLAS pays off


class NotIdentifiedError(np.linalg.LinAlgError):
    """The fixed-effects design is rank deficient given the random effects."""


@dataclasses.dataclass(frozen=True)
class PLSFit:
    """A profiled (RE)ML fit (the ``raw`` attribute of a ``fit_lmm(..., engine="pls")`` result).

    Attributes
    ----------
    theta : numpy.ndarray
        Relative SD (random-intercept SD / residual SD) per grouping factor, in input order.
    beta : numpy.ndarray
        Fixed effects.
    cov_beta : numpy.ndarray
        Their covariance, ``sigma^2 (R_X' R_X)^-1`` at the estimate.
    sigma2 : float
        Residual variance (``r^2 / (n - p)`` for REML, ``r^2 / n`` for ML).
    variances : numpy.ndarray
        Random-intercept variance per factor, ``sigma2 * theta**2``.
    deviance : float
        The minimised criterion: ``-2`` times the (REML) log-likelihood.
    reml : bool
    converged : bool
    n_eval : int
        Criterion evaluations used by the optimiser.
    modes : tuple of numpy.ndarray
        Conditional modes (BLUPs) of the random intercepts per factor, in level order (with
        random slopes: arrays of shape ``(levels, terms)``).
    covariances : tuple of numpy.ndarray
        With random slopes (:class:`DesignCrossProducts`): the covariance matrix of each
        factor's random effects, ``sigma2 T_k T_k'``; ``variances`` then holds their diagonals,
        factor after factor, and ``theta`` the lower triangles of the ``T_k`` (lme4's layout).
    """

    theta: np.ndarray
    beta: np.ndarray
    cov_beta: np.ndarray
    sigma2: float
    variances: np.ndarray
    deviance: float
    reml: bool
    converged: bool
    n_eval: int
    modes: tuple[np.ndarray, ...]
    covariances: tuple[np.ndarray, ...] = ()


def _fixed_step(xtx, xty, yty: float, cu: np.ndarray, rzx: np.ndarray):
    """The fixed-effects block of the PLS system once the random effects are eliminated.

    Returns ``(lx, cb, r2)``: the Cholesky factor of ``X'X - RZX'RZX``, the fixed effects'
    triangular right-hand side and the penalised residual sum of squares (kept positive).
    """
    a = xtx - rzx.T @ rzx
    try:
        lx = linalg.cholesky(a, lower=True, check_finite=False)
    except linalg.LinAlgError as err:
        raise NotIdentifiedError(
            "the fixed-effects design is rank deficient (X'X minus its random-effects part "
            "is not positive definite)"
        ) from err
    cb = linalg.solve_triangular(lx, xty - rzx.T @ cu, lower=True, check_finite=False)
    r2 = max(yty - float(cu @ cu) - float(cb @ cb), np.finfo(float).tiny)
    return lx, cb, r2


class CrossProducts:
    """Cross-products of one model, computed once; evaluates the profiled criterion.

    Parameters
    ----------
    x : (n, p) array
        Fixed-effects design.
    y : (n,) array
        Response.
    codes : sequence of (n,) integer arrays
        Level codes ``0 .. n_levels[k] - 1`` of each grouping factor.
    n_levels : sequence of int
    """

    def __init__(self, x, y, codes, n_levels) -> None:
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        n, p = x.shape
        self.n, self.p, self.k = n, p, len(codes)
        if p and np.linalg.matrix_rank(x) < p:
            raise NotIdentifiedError(
                f"the fixed-effects design has {p} columns but rank {np.linalg.matrix_rank(x)}"
            )
        # Work with y minus its least-squares fit on X: the mixed-model estimates are linear in
        # y, so beta is recovered by adding the shift back, and r^2 = y'y - |c_u|^2 - |c_b|^2
        # then loses no digits to a large mean (log times near 7.5, yields near 1500).
        self.beta_ols = np.linalg.lstsq(x, y, rcond=None)[0]
        y = y - x @ self.beta_ols
        # Eliminate the factor with the most levels first (its block of Z'Z is diagonal).
        self.order = sorted(range(self.k), key=lambda j: -int(n_levels[j]))
        sizes = [int(n_levels[j]) for j in self.order]
        self.sizes = sizes
        self.q1 = sizes[0]
        self.qc = sum(sizes[1:])
        rows = np.arange(n)
        blocks = [
            sparse.csc_array(
                (np.ones(n), (rows, np.asarray(codes[j], dtype=np.int64))), shape=(n, sz)
            )
            for j, sz in zip(self.order, sizes, strict=True)
        ]
        z = sparse.hstack(blocks, format="csc")
        zt = z.T.tocsr()
        yx = np.column_stack([y, x])
        self.zt_yx = np.asarray(zt @ yx)  # (q, 1 + p)
        ztz = zt @ z
        self.d1 = np.asarray(ztz[: self.q1, : self.q1].diagonal(), dtype=float)
        self.n1c = np.asarray(ztz[: self.q1, self.q1 :].toarray(), dtype=float)
        self.ncc = np.asarray(ztz[self.q1 :, self.q1 :].toarray(), dtype=float)
        self.xtx = x.T @ x
        self.xty = x.T @ y
        self.yty = float(y @ y)

    # -- one evaluation ------------------------------------------------------------------------
    def _lam(self, theta_ordered: np.ndarray) -> np.ndarray:
        return np.repeat(theta_ordered, self.sizes)

    def _factor(self, theta_ordered: np.ndarray):
        """Block Cholesky factor of Lambda Z'Z Lambda + I: (sqrt(D), L21, L22)."""
        lam = self._lam(theta_ordered)
        l1, lc = lam[: self.q1], lam[self.q1 :]
        sd = np.sqrt(l1 * l1 * self.d1 + 1.0)
        if self.qc == 0:
            return lam, sd, np.zeros((0, self.q1)), np.zeros((0, 0))
        l21 = (self.n1c * (l1 / sd)[:, None] * lc[None, :]).T  # (qc, q1)
        s = self.ncc * lc[:, None] * lc[None, :]
        s[np.diag_indices_from(s)] += 1.0
        s -= l21 @ l21.T
        l22 = linalg.cholesky(s, lower=True, check_finite=False)
        return lam, sd, l21, l22

    def _forward(self, sd, l21, l22, m: np.ndarray) -> np.ndarray:
        w1 = m[: self.q1] / sd[:, None]
        if self.qc == 0:
            return w1
        w2 = linalg.solve_triangular(l22, m[self.q1 :] - l21 @ w1, lower=True, check_finite=False)
        return np.vstack([w1, w2])

    def _backward(self, sd, l21, l22, r: np.ndarray) -> np.ndarray:
        if self.qc == 0:
            return r / sd
        v2 = linalg.solve_triangular(l22, r[self.q1 :], lower=True, trans="T", check_finite=False)
        v1 = (r[: self.q1] - l21.T @ v2) / sd
        return np.concatenate([v1, v2])

    def _solve(self, theta_ordered: np.ndarray):
        lam, sd, l21, l22 = self._factor(theta_ordered)
        w = self._forward(sd, l21, l22, lam[:, None] * self.zt_yx)
        cu, rzx = w[:, 0], w[:, 1:]
        lx, cb, r2 = _fixed_step(self.xtx, self.xty, self.yty, cu, rzx)
        logdet_l = 2.0 * float(np.log(sd).sum())
        if self.qc:
            logdet_l += 2.0 * float(np.log(np.diag(l22)).sum())
        logdet_x = 2.0 * float(np.log(np.diag(lx)).sum())
        return lam, sd, l21, l22, cu, rzx, lx, cb, r2, logdet_l, logdet_x

    def deviance(self, theta_ordered: np.ndarray, reml: bool) -> float:
        """Profiled deviance (ML) or REML criterion at ``theta`` (in elimination order)."""
        *_, r2, logdet_l, logdet_x = self._solve(np.asarray(theta_ordered, dtype=float))
        if reml:
            nr = self.n - self.p
            return logdet_l + logdet_x + nr * (1.0 + _LOG_2PI + np.log(r2 / nr))
        return logdet_l + self.n * (1.0 + _LOG_2PI + np.log(r2 / self.n))

    # -- the fit -------------------------------------------------------------------------------
    def fit(self, *, reml: bool, starts=(1.0, 0.25, 3.0)) -> PLSFit:
        """Minimise the criterion over theta >= 0 from each start; keep the best.

        The search runs over ``psi = theta**2``: the criterion is even in each ``theta_k``, so
        its gradient in ``theta`` vanishes at 0 and a gradient method that lands on the bound
        would stop there even when a positive variance fits better; in ``psi`` the slope at 0
        has the sign that matters.
        """
        n_eval = 0

        def fun(psi):
            nonlocal n_eval
            n_eval += 1
            return self.deviance(np.sqrt(np.clip(psi, 0.0, None)), reml)

        best = None
        bounds = [(0.0, None)] * self.k
        for s in starts:
            res = optimize.minimize(
                fun,
                np.full(self.k, float(s) ** 2),
                method="L-BFGS-B",
                jac="3-point",
                bounds=bounds,
                options={"ftol": 1e-15, "gtol": 1e-10, "maxiter": 500},
            )
            if best is None or res.fun < best.fun - 1e-10:
                best = res
        assert best is not None
        psi = np.clip(best.x, 0.0, None)
        dev = fun(psi)
        converged = bool(best.success) or self._stationary(fun, psi, dev)
        return self._result(np.sqrt(psi), dev, reml, converged, n_eval)

    @staticmethod
    def _stationary(fun, psi: np.ndarray, dev: float) -> bool:
        """No feasible step of relative size 1e-4 in any psi lowers the criterion by 1e-8."""
        return _stationary_theta(fun, psi, dev, np.zeros(len(psi)))

    def _result(self, theta_o, dev, reml, converged, n_eval) -> PLSFit:
        lam, sd, l21, l22, cu, rzx, lx, cb, r2, _, _ = self._solve(theta_o)
        beta_shift = linalg.solve_triangular(lx, cb, lower=True, trans="T", check_finite=False)
        u = self._backward(sd, l21, l22, cu - rzx @ beta_shift)
        sigma2 = r2 / (self.n - self.p if reml else self.n)
        inv_lx = linalg.solve_triangular(lx, np.eye(self.p), lower=True, check_finite=False)
        cov = sigma2 * (inv_lx.T @ inv_lx)
        b = lam * u
        cuts = np.cumsum([0, *self.sizes])
        modes_o = [b[cuts[i] : cuts[i + 1]] for i in range(self.k)]
        theta = np.empty(self.k)
        modes: list[np.ndarray] = [np.empty(0)] * self.k
        for pos, j in enumerate(self.order):
            theta[j] = theta_o[pos]
            modes[j] = modes_o[pos]
        return PLSFit(
            theta=theta,
            beta=self.beta_ols + beta_shift,
            cov_beta=cov,
            sigma2=float(sigma2),
            variances=sigma2 * theta**2,
            deviance=float(dev),
            reml=reml,
            converged=converged,
            n_eval=n_eval,
            modes=tuple(modes),
        )


class DesignCrossProducts:
    """Profiled (RE)ML for any random-effects design of :mod:`._design` (intercepts and
    correlated slopes, crossed or nested factors).

    The same criterion as :class:`CrossProducts` with ``Lambda`` block diagonal (one
    lower-triangular ``T_k`` per level of factor ``k``): the cross-products ``Z'Z`` (per-level
    blocks of the largest factor, its cross block with the others, the others' block), ``Z'y``,
    ``Z'X``, ``X'X``, ``X'y`` and ``y'y`` are formed once, in ``O(n s^2)``; each evaluation
    factors ``Lambda'Z'Z Lambda + I`` by :class:`._design.BlockCholesky` (cost model there).
    ``theta`` is searched by L-BFGS-B with the diagonal elements bounded below by 0.
    """

    def __init__(self, x, y, design) -> None:
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        n, p = x.shape
        self.n, self.p, self.d = n, p, design
        if p and np.linalg.matrix_rank(x) < p:
            raise NotIdentifiedError(
                f"the fixed-effects design has {p} columns but rank {np.linalg.matrix_rank(x)}"
            )
        # centre y on its least-squares fit (see CrossProducts)
        self.beta_ols = np.linalg.lstsq(x, y, rcond=None)[0]
        y = y - x @ self.beta_ols
        self.cross = design.cross(np.ones(n))
        self.zt_yx = design.zt_times(np.column_stack([y, x]))
        self.xtx = x.T @ x
        self.xty = x.T @ y
        self.yty = float(y @ y)

    def _solve(self, theta: np.ndarray):
        from ._design import BlockCholesky

        d = self.d
        ts = d._ordered_t(theta)
        chol = BlockCholesky(d, ts, *self.cross)
        w = chol.forward(d.lam_t(ts, self.zt_yx))
        cu, rzx = w[:, 0], w[:, 1:]
        lx, cb, r2 = _fixed_step(self.xtx, self.xty, self.yty, cu, rzx)
        logdet_x = 2.0 * float(np.log(np.diag(lx)).sum())
        return ts, chol, cu, rzx, lx, cb, r2, chol.logdet(), logdet_x

    def deviance(self, theta: np.ndarray, reml: bool) -> float:
        """Profiled deviance (ML) or REML criterion at ``theta`` (lme4's layout)."""
        *_, r2, logdet_l, logdet_x = self._solve(np.asarray(theta, dtype=float))
        if reml:
            nr = self.n - self.p
            return logdet_l + logdet_x + nr * (1.0 + _LOG_2PI + np.log(r2 / nr))
        return logdet_l + self.n * (1.0 + _LOG_2PI + np.log(r2 / self.n))

    def fit(self, *, reml: bool, starts=(1.0, 0.25, 3.0)) -> PLSFit:
        """Minimise the criterion from each start (the identity ``T_k`` scaled); keep the best."""
        d = self.d
        n_eval = 0

        def fun(theta):
            nonlocal n_eval
            n_eval += 1
            return self.deviance(theta, reml)

        lower = d.theta_lower
        bounds = [(None if not np.isfinite(lo) else lo, None) for lo in lower]
        best = None
        for s in starts:
            res = optimize.minimize(
                fun,
                d.theta_start * float(s),
                method="L-BFGS-B",
                jac="3-point",
                bounds=bounds,
                options={"ftol": 1e-15, "gtol": 1e-10, "maxiter": 1000},
            )
            if best is None or res.fun < best.fun - 1e-10:
                best = res
        assert best is not None
        theta = np.where(np.isfinite(lower), np.maximum(best.x, lower), best.x)
        dev = fun(theta)
        converged = bool(best.success) or _stationary_theta(fun, theta, dev, lower)
        ts, chol, cu, rzx, lx, cb, r2, _, _ = self._solve(theta)
        beta_shift = linalg.solve_triangular(lx, cb, lower=True, trans="T", check_finite=False)
        u = chol.backward(cu - rzx @ beta_shift)
        sigma2 = r2 / (self.n - self.p if reml else self.n)
        inv_lx = linalg.solve_triangular(lx, np.eye(self.p), lower=True, check_finite=False)
        b = d.lam(ts, u[:, None])[:, 0]
        covs = tuple(sigma2 * c for c in d.covariances(theta))
        return PLSFit(
            theta=theta,
            beta=self.beta_ols + beta_shift,
            cov_beta=sigma2 * (inv_lx.T @ inv_lx),
            sigma2=float(sigma2),
            variances=np.concatenate([np.diag(c) for c in covs]),
            deviance=float(dev),
            reml=reml,
            converged=converged,
            n_eval=n_eval,
            modes=tuple(d.to_input_order(b)),
            covariances=covs,
        )


def _stationary_theta(fun, theta: np.ndarray, dev: float, lower: np.ndarray) -> bool:
    """No feasible step of relative size 1e-4 in any theta lowers the criterion by 1e-8."""
    for j in range(len(theta)):
        for sign in (-1.0, 1.0):
            t = theta.copy()
            t[j] = max(lower[j], t[j] + sign * 1e-4 * max(abs(t[j]), 1e-2))
            if fun(t) < dev - 1e-8 * max(1.0, abs(dev)):
                return False
    return True


def _blas_limit(dense_size: int):
    """One BLAS thread for small dense factors.

    A criterion evaluation on a few hundred levels takes about a millisecond single-threaded;
    multi-threaded BLAS spends more than that on synchronisation, tens of times more when the
    cores are busy with other work.
    """
    if dense_size > _THREADED_ABOVE:
        return contextlib.nullcontext()
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # pragma: no cover - installed with scikit-learn (via pingouin)
        return contextlib.nullcontext()
    return threadpool_limits(limits=1, user_api="blas")


def fit_pls_design(x, y, design, *, reml: bool) -> PLSFit:
    """Fit ``y ~ X`` with the random effects of a :class:`._design.RandomDesign` (slopes too)."""
    with _blas_limit(design.qc):
        return DesignCrossProducts(x, y, design).fit(reml=reml)


def fit_pls(x, y, codes, n_levels, *, reml: bool) -> PLSFit:
    """Fit ``y ~ X + random intercepts`` by profiled (RE)ML; see the module docstring."""
    dense = sum(int(v) for v in n_levels) - max(int(v) for v in n_levels)
    with _blas_limit(dense):
        return CrossProducts(x, y, codes, n_levels).fit(reml=reml)
