"""Laplace maximum likelihood for binomial (logistic) mixed models.

Private helper of :mod:`twofold.analysis.mixed` (``fit_glmm(..., method="laplace")``).

The model is ``k_i ~ Binomial(m_i, expit(eta_i))`` with ``eta = X beta + Z Lambda(theta) u`` and
``u ~ N(0, I)`` (random-effects layout and ``theta`` in :mod:`._design`). For given
``(theta, beta)`` penalised iteratively reweighted least squares (PIRLS; Newton's method with
step halving) finds the conditional mode ``u~`` of

    g(u) = -2 log p(k | u) + |u|^2,

and the Laplace approximation of ``-2`` times the marginal log-likelihood is

    d(theta, beta) = g(u~) + log |L|^2,    L L' = Lambda' Z' W Z Lambda + I,

with ``W = diag(m_i mu_i (1 - mu_i))`` at ``u~`` (Bates, Mächler, Bolker & Walker 2015,
J. Stat. Softw. 67(1), section 5, and the lme4 glmer vignette). ``-2 log p(k | u)`` includes the
binomial coefficients, so ``-d / 2`` is the log-likelihood printed by lme4.

Fitting runs in two stages like lme4's ``glmer``: (1) ``theta`` alone is optimised with ``beta``
and ``u`` found jointly by PIRLS (lme4's ``nAGQ = 0``), then (2) ``d`` is minimised over
``(theta, beta)`` together from there (L-BFGS-B, bounds ``theta_diag >= 0``). Both stages use the
analytic gradient of their criterion (``LaplaceModel._grad``: implicit differentiation of the
mode, with the leverages of the random effects), and every evaluation starts PIRLS from the
previous conditional modes, so a fit takes a few dozen evaluations. Standard errors of ``beta``
come from the observed information: the Hessian of ``d`` over ``(theta, beta)`` by central
differences of the analytic gradient (step 1e-4 relative, as lme4's ``deriv12``),
``cov = 2 H^-1`` restricted to ``beta`` — as lme4 does by default. ``theta`` coordinates at the
boundary (a zero SD) are held fixed in that Hessian.

An optional normal penalty ``sum_j beta_j^2 / s^2`` on the non-intercept fixed effects (a weakly
informative prior; Gelman, Jakulin, Pittau & Su 2008, Ann. Appl. Stat. 2(4)) keeps the estimates
finite under separation; it is never applied unless asked for.

Cost of one evaluation of ``d``: a few PIRLS steps (usually 2-4 from the previous mode), each one
factorisation of cost given in :mod:`._design`.
"""

from __future__ import annotations

import dataclasses
import warnings
from collections.abc import Callable
from typing import Any

import numpy as np
from scipy import linalg, optimize, special, stats

from ._design import BlockCholesky, RandomDesign

# PIRLS stops when the squared Newton decrement is below _DECREMENT_TOL, or below _NOISE_TOL and
# no longer falling (rounding floor). The log-determinant is first-order sensitive to the mode, so
# a decrement of 1e-16 still moves the deviance by ~1e-7 — too much for numerical Hessians.
_DECREMENT_TOL = 1e-22
_NOISE_TOL = 1e-12
# During the search a looser decrement is enough: the gradient's error is then far below the
# optimiser's tolerance; the estimate and the Hessian are evaluated with _DECREMENT_TOL.
_SEARCH_TOL = 1e-14
_MAX_PIRLS = 60


class NotIdentifiedError(np.linalg.LinAlgError):
    """The fixed-effects design is rank deficient."""


@dataclasses.dataclass(frozen=True)
class LaplaceFit:
    """A Laplace ML fit (the ``raw`` attribute of ``fit_glmm(..., method="laplace")``).

    Attributes
    ----------
    theta : numpy.ndarray
        Lower triangles of the relative covariance factors, factor by factor (lme4's layout).
    beta : numpy.ndarray
        Fixed effects.
    cov_beta : numpy.ndarray
        Their covariance from the observed information.
    cov_params : numpy.ndarray
        Covariance of ``(theta_free, beta)`` (``2 H^-1``), ``theta_free`` the coordinates of
        ``theta`` not at a bound.
    theta_free : numpy.ndarray
        Boolean mask of those coordinates.
    deviance : float
        ``-2`` times the Laplace log-likelihood.
    deviance_stage1 : float
        The stage-1 criterion (joint modes of ``u`` and ``beta``).
    converged : bool
    grad_norm : float
        Largest projected gradient of the deviance at the estimate.
    n_eval : int
        Deviance evaluations (both stages, Hessian and profiles excluded).
    modes : tuple of numpy.ndarray
        Conditional modes of the random effects ``b = Lambda u`` per factor, shape
        ``(levels, terms)``, input order.
    covariances : tuple of numpy.ndarray
        Random-effect covariance matrix per factor.
    model : LaplaceModel
        The model that was fitted (for profile intervals after the fit).
    se_conditional : bool
        True when the Hessian over ``(theta, beta)`` was not positive definite and ``cov_beta``
        is the inverse information about ``beta`` given ``theta``.
    """

    theta: np.ndarray
    beta: np.ndarray
    cov_beta: np.ndarray
    cov_params: np.ndarray
    theta_free: np.ndarray
    deviance: float
    deviance_stage1: float
    converged: bool
    grad_norm: float
    n_eval: int
    modes: tuple[np.ndarray, ...]
    covariances: tuple[np.ndarray, ...]
    se_conditional: bool = False
    model: Any = dataclasses.field(default=None, repr=False, compare=False)


class LaplaceModel:
    """One binomial mixed model: data, design and the deviance functions.

    Parameters
    ----------
    x : (n, p) array
        Fixed-effects design.
    k, m : (n,) arrays
        Successes and trials per row (``m = 1`` for 0/1 rows).
    design : RandomDesign
    penalty : (p,) array, optional
        Precision of a normal penalty per fixed effect (0 for none).
    """

    def __init__(self, x, k, m, design: RandomDesign, penalty=None) -> None:
        self.x = np.asarray(x, dtype=float)
        self.k = np.asarray(k, dtype=float)
        self.m = np.asarray(m, dtype=float)
        self.d = design
        self.n, self.p = self.x.shape
        if self.p and np.linalg.matrix_rank(self.x) < self.p:
            raise NotIdentifiedError(
                f"the fixed-effects design has {self.p} columns but rank "
                f"{np.linalg.matrix_rank(self.x)}"
            )
        self.pen = np.zeros(self.p) if penalty is None else np.asarray(penalty, dtype=float)
        self.const = float(
            (special.gammaln(self.m + 1) - special.gammaln(self.k + 1)).sum()
            - special.gammaln(self.m - self.k + 1).sum()
        )
        self.q = design.q1 + design.qc
        self.u = np.zeros(self.q)  # warm start, updated by every evaluation
        self.dec_tol = _DECREMENT_TOL
        # (Lambda blocks, eta, factor, joint-system factors or None) of the last evaluation
        self._state: tuple[list[np.ndarray], np.ndarray, BlockCholesky, Any] | None = None
        # (key, value, gradient) of the last value_grad call: optimisers ask twice for a point
        self._last: tuple[tuple[str, float, bytes], float, np.ndarray] | None = None
        self.beta_joint = np.zeros(self.p)
        self.n_eval = 0

    # -- pieces --------------------------------------------------------------------------------
    def _cond(self, eta: np.ndarray) -> float:
        """``-2 log p(k | u)`` including the binomial coefficients."""
        # log(1 - expit(eta)) = log expit(eta) - eta: one log_expit pass instead of two
        ll = self.m @ special.log_expit(eta) - (self.m - self.k) @ eta
        return -2.0 * (float(ll) + self.const)

    def _zlam(self, ts, u: np.ndarray) -> np.ndarray:
        return self.d.z_times(self.d.lam(ts, u[:, None])[:, 0])

    def _lamz(self, ts, v: np.ndarray) -> np.ndarray:
        return self.d.lam_t(ts, self.d.zt_times(v).reshape(self.q, -1))

    # -- PIRLS for u given (theta, beta) -----------------------------------------------------
    def pirls(self, theta: np.ndarray, beta: np.ndarray) -> tuple[float, BlockCholesky, float]:
        """Conditional mode of ``u``; returns ``(g(u~), factor at u~, log|L|^2)``."""
        ts = self.d._ordered_t(theta)
        off = self.x @ beta
        u = self.u.copy()
        eta = off + self._zlam(ts, u)
        obj = self._cond(eta) + u @ u
        prev = np.inf
        for _ in range(_MAX_PIRLS):
            mu = special.expit(eta)
            w = self.m * mu * (1.0 - mu)
            chol = BlockCholesky(self.d, ts, *self.d.cross(w))
            grad = self._lamz(ts, self.k - self.m * mu)[:, 0] - u
            wv = chol.forward(grad)
            dec = float(wv @ wv)
            if dec < self.dec_tol or (dec < _NOISE_TOL and dec > 0.1 * prev):
                break
            prev = dec
            delta = chol.backward(wv)
            step = 1.0
            while True:
                u_new = u + step * delta
                eta_new = off + self._zlam(ts, u_new)
                obj_new = self._cond(eta_new) + u_new @ u_new
                if obj_new <= obj + 1e-12 * abs(obj) or step < 1e-8:
                    break
                step *= 0.5
            u, eta, obj = u_new, eta_new, obj_new
        self.u = u
        self._state = (ts, eta, chol, None)
        return float(obj), chol, chol.logdet()

    def deviance(self, theta: np.ndarray, beta: np.ndarray) -> float:
        """The Laplace deviance ``d(theta, beta)`` (plus the penalty, if any)."""
        self.n_eval += 1
        obj, _, logdet = self.pirls(theta, beta)
        return obj + logdet + float(self.pen @ (beta * beta))

    # -- joint PIRLS for (u, beta) given theta (stage 1) -------------------------------------
    def deviance_joint(self, theta: np.ndarray) -> float:
        """lme4's ``nAGQ = 0`` criterion: ``g`` at the joint mode of ``(u, beta)`` + log|L|^2."""
        self.n_eval += 1
        ts = self.d._ordered_t(theta)
        u, beta = self.u.copy(), self.beta_joint.copy()
        eta = self.x @ beta + self._zlam(ts, u)
        obj = self._cond(eta) + u @ u + float(self.pen @ (beta * beta))
        prev = np.inf
        for _ in range(_MAX_PIRLS):
            mu = special.expit(eta)
            w = self.m * mu * (1.0 - mu)
            chol = BlockCholesky(self.d, ts, *self.d.cross(w))
            r = self.k - self.m * mu
            g_u = self._lamz(ts, r)[:, 0] - u
            g_b = self.x.T @ r - self.pen * beta
            mzx = self._lamz(ts, w[:, None] * self.x)  # Lambda' Z' W X
            rzx = chol.forward(mzx)
            a = self.x.T @ (w[:, None] * self.x) + np.diag(self.pen) - rzx.T @ rzx
            lx = _chol_ridge(a)
            wu = chol.forward(g_u)
            wb = linalg.solve_triangular(lx, g_b - rzx.T @ wu, lower=True, check_finite=False)
            dec = float(wu @ wu + wb @ wb)
            if dec < self.dec_tol or (dec < _NOISE_TOL and dec > 0.1 * prev):
                break
            prev = dec
            db = linalg.solve_triangular(lx, wb, lower=True, trans="T", check_finite=False)
            du = chol.backward(wu - rzx @ db)
            step = 1.0
            while True:
                u_new, b_new = u + step * du, beta + step * db
                eta_new = self.x @ b_new + self._zlam(ts, u_new)
                obj_new = self._cond(eta_new) + u_new @ u_new + float(self.pen @ (b_new * b_new))
                if obj_new <= obj + 1e-12 * abs(obj) or step < 1e-8:
                    break
                step *= 0.5
            u, beta, eta, obj = u_new, b_new, eta_new, obj_new
        self.u, self.beta_joint = u, beta
        self._state = (ts, eta, chol, (rzx, lx))
        return float(obj) + chol.logdet()

    # -- analytic gradients --------------------------------------------------------------------
    def _grad(self, beta: np.ndarray | None) -> tuple[np.ndarray, np.ndarray]:
        """Gradient of the criterion last evaluated, over ``theta`` and over ``beta``.

        For a parameter ``phi`` (an element of ``theta`` or ``beta``) the mode ``u~`` moves
        with ``phi``, but ``g`` is stationary in ``u`` there, so only the explicit derivative of
        ``g`` counts; ``log|H|`` changes through ``Lambda`` and through the weights at the
        moving mode. With ``r = k - m mu``, ``w' = m mu (1 - mu)(1 - 2 mu)``, the leverages
        ``a_i = z_i' Lambda H^-1 Lambda' z_i``, ``c = w' a`` and ``Lambda_j = dLambda/dtheta_j``:

            d d / d beta    = -2 X'r + X'e
            d d / d theta_j = -2 t'Lambda_j u + s'Lambda_j u + t'Lambda_j v
                              + 2 sum_i w_i (Z Lambda_j)_i H^-1 Lambda' z_i

        where ``v = H^-1 Lambda'Z'c``, ``e = c - W Z Lambda v``, ``t = Z'r`` and ``s = Z'e``
        (implicit differentiation of ``u~ = Lambda'Z'r``). For the stage-1 criterion
        (``beta is None``) ``(u, beta)`` move together and ``v`` (with ``v_beta``) solves the
        joint system instead; ``e = c - W (Z Lambda v + X v_beta)``. One evaluation of the
        gradient costs about one PIRLS step plus ``O(qc^2 q1)``, against ``2 (n_theta + p)``
        deviance evaluations for central differences.
        """
        d = self.d
        assert self._state is not None, "evaluate the criterion first"
        ts, eta, chol, joint = self._state
        u = self.u
        mu = special.expit(eta)
        w = self.m * mu * (1.0 - mu)
        r = self.k - self.m * mu
        v_tr, y_tr = d.trial_solves(ts, chol)
        lev = sum((vk * yk).sum(axis=1) for vk, yk in zip(v_tr, y_tr, strict=True))
        c = w * (1.0 - 2.0 * mu) * lev
        bu = self._lamz(ts, c)[:, 0]
        if beta is None:
            assert joint is not None
            rzx, lx = joint
            wu = chol.forward(bu)
            wb = linalg.solve_triangular(
                lx, self.x.T @ c - rzx.T @ wu, lower=True, check_finite=False
            )
            vb = linalg.solve_triangular(lx, wb, lower=True, trans="T", check_finite=False)
            v = chol.backward(wu - rzx @ vb)
            e = c - w * (self._zlam(ts, v) + self.x @ vb)
        else:
            v = chol.backward(chol.forward(bu))
            e = c - w * self._zlam(ts, v)
        t_all = d.zt_times(r)
        s_all = d.zt_times(e)
        g_theta = np.empty(d.n_theta)
        facs = [d.first, *d.rest]
        offs = [0, *(d.q1 + o for o in d.rest_off)]
        for j, (sl, (rr, cc)) in enumerate(zip(d.theta_slices, d.tril, strict=True)):
            k = d.pos[j]
            f, off = facs[k], offs[k]

            def blk(vec: np.ndarray, f=f, off=off) -> np.ndarray:
                return vec[off : off + f.q].reshape(f.n_levels, f.p)

            tt, ss, uu, vv = blk(t_all), blk(s_all), blk(u), blk(v)
            trace = np.einsum("n,na,nb->ab", w, f.zx, y_tr[k])
            gm = -2.0 * tt.T @ uu + ss.T @ uu + tt.T @ vv + 2.0 * trace
            g_theta[sl] = gm[rr, cc]
        if beta is None:
            return g_theta, np.empty(0)
        g_beta = -2.0 * self.x.T @ r + self.x.T @ e + 2.0 * self.pen * beta
        return g_theta, g_beta

    def value_grad(self, z: np.ndarray) -> tuple[float, np.ndarray]:
        """``d(theta, beta)`` and its analytic gradient at ``z = (theta, beta)``."""
        key = ("d", self.dec_tol, np.asarray(z, dtype=float).tobytes())
        if self._last is not None and self._last[0] == key:
            return self._last[1], self._last[2].copy()
        nt = self.d.n_theta
        theta, beta = z[:nt], z[nt:]
        dev = self.deviance(theta, beta)
        gt, gb = self._grad(beta)
        grad = np.concatenate([gt, gb])
        self._last = (key, dev, grad.copy())
        return dev, grad

    def value_grad_joint(self, theta: np.ndarray) -> tuple[float, np.ndarray]:
        """Stage-1 criterion and its analytic gradient over ``theta``."""
        key = ("j", self.dec_tol, np.asarray(theta, dtype=float).tobytes())
        if self._last is not None and self._last[0] == key:
            return self._last[1], self._last[2].copy()
        dev = self.deviance_joint(theta)
        grad = self._grad(None)[0]
        self._last = (key, dev, grad.copy())
        return dev, grad

    def modes(self, theta: np.ndarray, beta: np.ndarray) -> tuple[np.ndarray, ...]:
        """Conditional modes ``b = Lambda u~`` per factor (input order)."""
        self.pirls(theta, beta)
        ts = self.d._ordered_t(theta)
        b = self.d.lam(ts, self.u[:, None])[:, 0]
        return tuple(self.d.to_input_order(b))


def _minimise(
    fun: Callable[[np.ndarray], tuple[float, np.ndarray]],
    x0,
    lower,
    *,
    ftol: float = 1e-13,
    gtol: float = 1e-7,
) -> optimize.OptimizeResult:
    """L-BFGS-B on a function returning its value and analytic gradient."""
    lower = np.asarray(lower, dtype=float)
    bounds = [(None if not np.isfinite(lo) else lo, None) for lo in lower]
    return optimize.minimize(
        fun,
        x0,
        method="L-BFGS-B",
        jac=True,
        bounds=bounds,
        options={"ftol": ftol, "gtol": gtol, "maxiter": 1000, "maxls": 40},
    )


def hessian(grad: Callable[[np.ndarray], np.ndarray], x: np.ndarray, h: np.ndarray) -> np.ndarray:
    """Hessian by central differences of an analytic gradient (``2 d`` gradient calls), steps
    ``h`` per coordinate, symmetrised."""
    d = len(x)
    hs = np.empty((d, d))
    for i in range(d):
        e = np.zeros(d)
        e[i] = h[i]
        hs[:, i] = (grad(x + e) - grad(x - e)) / (2 * h[i])
    return 0.5 * (hs + hs.T)


def _chol_ridge(a: np.ndarray) -> np.ndarray:
    """Cholesky factor, with a growing ridge when the weights vanish (separated rows)."""
    ridge = 0.0
    scale = max(float(np.abs(np.diag(a)).max()), 1e-300)
    while True:
        try:
            return linalg.cholesky(a + ridge * np.eye(len(a)), lower=True, check_finite=False)
        except linalg.LinAlgError:
            ridge = max(10 * ridge, 1e-10 * scale)
            if ridge > scale:
                raise


_RIDGE_RATIO = 1e-6


def _inverse_pd(h: np.ndarray) -> np.ndarray | None:
    """``2 H^-1`` if ``H`` is positive definite and not nearly singular, else None.

    A smallest eigenvalue below ``_RIDGE_RATIO`` times the largest is a flat ridge of the
    likelihood (e.g. a correlation near -1 on VerbAgg's by-item slope: 6e-5 against 1e3): its
    inverse would give meaningless variances, so the ridge is reported instead.
    """
    if not len(h):
        return h.copy()
    ev = np.linalg.eigvalsh(h)
    if ev[0] <= _RIDGE_RATIO * ev[-1]:
        return None
    return 2.0 * np.linalg.inv(h)


def fit_laplace(model: LaplaceModel, *, theta0=None) -> LaplaceFit:
    """Two-stage Laplace fit, then the observed-information covariance of the estimates."""
    d = model.d
    lower = d.theta_lower
    th0 = d.theta_start if theta0 is None else np.asarray(theta0, dtype=float)
    nt, p = d.n_theta, model.p
    # stage 1: theta only, (u, beta) at their joint mode; only a starting point for stage 2,
    # so a loose tolerance
    model.dec_tol = _SEARCH_TOL
    r1 = _minimise(model.value_grad_joint, th0, lower, ftol=1e-6)
    theta1 = np.where(np.isfinite(lower), np.maximum(r1.x, lower), r1.x)
    dev1 = model.deviance_joint(theta1)
    beta1 = model.beta_joint.copy()
    # stage 2: (theta, beta) together
    lower2 = np.concatenate([lower, np.full(p, -np.inf)])
    r2 = _minimise(model.value_grad, np.concatenate([theta1, beta1]), lower2, gtol=1e-5)
    z = np.where(np.isfinite(lower2), np.maximum(r2.x, lower2), r2.x)
    model.dec_tol = _DECREMENT_TOL
    dev, grad = model.value_grad(z)
    n_eval = model.n_eval
    # convergence: projected gradient small relative to the curvature scale
    at_bound = np.isfinite(lower2) & (z - lower2 < 1e-6) & (grad > 0)
    proj = np.where(at_bound, 0.0, grad)
    grad_norm = float(np.max(np.abs(proj))) if len(proj) else 0.0
    converged = bool(r2.success) or grad_norm < 1e-3
    # observed information over the free coordinates
    free = np.ones(nt + p, dtype=bool)
    free[:nt] = ~(np.isfinite(lower) & (z[:nt] - lower < 1e-4))
    zf = z[free]

    def g_free(v: np.ndarray) -> np.ndarray:
        zz = z.copy()
        zz[free] = v
        return model.value_grad(zz)[1][free]

    # the step of lme4's deriv12 (1e-4); central differences of the analytic gradient
    hs = hessian(g_free, zf, 1e-4 * np.maximum(1.0, np.abs(zf)))
    model.deviance(z[:nt], z[nt:])  # leave the warm start at the estimate
    n_free_theta = int(free[:nt].sum())
    cov = _inverse_pd(hs)
    conditional = False
    if cov is None:
        # A ridge in the covariance parameters (e.g. a correlation near -1): fall back to the
        # information about beta given theta.
        conditional = True
        cov = np.full_like(hs, np.nan)
        cb = _inverse_pd(hs[n_free_theta:, n_free_theta:])
        if cb is not None:
            cov[n_free_theta:, n_free_theta:] = cb
    cov_beta = cov[n_free_theta:, n_free_theta:]
    theta, beta = z[:nt], z[nt:]
    return LaplaceFit(
        theta=theta,
        beta=beta,
        cov_beta=cov_beta,
        cov_params=cov,
        theta_free=free[:nt],
        deviance=float(dev),
        deviance_stage1=float(dev1),
        converged=converged,
        grad_norm=grad_norm,
        n_eval=n_eval,
        modes=model.modes(theta, beta),
        covariances=tuple(d.covariances(theta)),
        se_conditional=conditional,
        model=model,
    )


def profile_interval(
    model: LaplaceModel, fit: LaplaceFit, factor: int, term: int, level: float
) -> tuple[float, float]:
    """Profile-likelihood interval of the SD of random-effect ``term`` of grouping ``factor``.

    That SD is the length of row ``term`` of the factor's ``T`` block (``theta`` holds its
    elements). The row is written as ``s * a / |a|``: the profile ``d(s) = min d`` over ``a``
    and every other parameter is compared with ``d_min + chi2_1(level)``, and the crossing
    points are found by Brent's method. For the first term the row is the single element
    ``theta_j = s``.
    """
    d = model.d
    sl = d.theta_slices[factor]
    rows, cols = d.tril[factor]
    idx = np.array([sl.start + t for t in range(len(rows)) if rows[t] == term])
    idx = idx[np.argsort(cols[rows == term])]  # diagonal element last
    z_hat = np.concatenate([fit.theta, fit.beta])
    lower2 = np.concatenate([d.theta_lower, np.full(model.p, -np.inf)])
    keep = np.ones(len(z_hat), dtype=bool)
    keep[idx] = False
    nk = int(keep.sum())
    row_hat = z_hat[idx]
    sd_hat = float(np.linalg.norm(row_hat))
    dir0 = row_hat / sd_hat if sd_hat > 1e-8 else np.eye(len(idx))[-1]
    # the direction's last (diagonal) component stays >= 0; none for a one-element row
    n_dir = len(idx) if len(idx) > 1 else 0
    lower_v = np.concatenate([lower2[keep], np.full(n_dir, -np.inf)])
    if n_dir:
        lower_v[-1] = 0.0
    v_hat = np.concatenate([z_hat[keep], dir0[:n_dir]])
    target = fit.deviance + stats.chi2.ppf(level, 1)
    start = {"v": v_hat.copy()}

    def prof(s: float) -> float:
        def f(v: np.ndarray) -> tuple[float, np.ndarray]:
            zz = np.empty(len(z_hat))
            zz[keep] = v[:nk]
            if n_dir:
                a_dir = v[nk:]
                nrm = max(float(np.linalg.norm(a_dir)), 1e-12)
                unit = a_dir / nrm
            else:
                unit = np.ones(1)
            zz[idx] = s * unit
            dev, grad = model.value_grad(zz)
            out = grad[keep]
            if n_dir:
                g_row = grad[idx]
                out = np.concatenate([out, s / nrm * (g_row - unit * (unit @ g_row))])
            return dev, out

        r = _minimise(f, start["v"], lower_v, ftol=1e-10)
        start["v"] = r.x
        return float(r.fun) - target

    step = max(0.25 * sd_hat, 0.05)
    a, b = sd_hat, sd_hat + step
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        while prof(b) < 0:
            a, step = b, 2 * step
            b = sd_hat + step
            if b > 1e3:
                model.deviance(fit.theta, fit.beta)
                return (np.nan, np.inf)
        start["v"] = v_hat.copy()
        upper = optimize.brentq(prof, a, b, xtol=1e-4 * max(sd_hat, 0.1))
        start["v"] = v_hat.copy()
        if sd_hat <= 1e-8 or prof(0.0) <= 0:
            low = 0.0
        else:
            start["v"] = v_hat.copy()
            low = optimize.brentq(prof, 0.0, sd_hat, xtol=1e-4 * max(sd_hat, 0.1))
    model.deviance(fit.theta, fit.beta)
    return low, upper


def separation(x: np.ndarray, k: np.ndarray, m: np.ndarray) -> np.ndarray | None:
    """A direction of complete or quasi-complete separation of the fixed effects, or None.

    Solves the linear programme of Konis (2007, DPhil thesis, Oxford; the method behind the
    usual separation checks): find ``d`` in ``[-1, 1]^p`` maximising ``sum_i s_i x_i'd`` subject
    to ``x_i'd >= 0`` on rows with successes only, ``<= 0`` on rows with failures only and
    ``= 0`` on rows with both (identical rows of ``X`` pooled first). A positive optimum means
    the likelihood increases without bound along ``d``: some estimates are infinite.
    """
    xs = np.round(np.asarray(x, dtype=float), 12)
    uniq, inv = np.unique(xs, axis=0, return_inverse=True)
    inv = inv.ravel()
    succ = np.bincount(inv, weights=k, minlength=len(uniq))
    fail_ = np.bincount(inv, weights=m - k, minlength=len(uniq))
    only_s = (succ > 0) & (fail_ == 0)
    only_f = (fail_ > 0) & (succ == 0)
    both = (succ > 0) & (fail_ > 0)
    sign = np.where(only_s, 1.0, np.where(only_f, -1.0, 0.0))
    c = -(sign[:, None] * uniq).sum(axis=0)
    one_sided = only_s | only_f
    a_ub = -(sign[one_sided, None] * uniq[one_sided])
    res = optimize.linprog(
        c,
        A_ub=a_ub if len(a_ub) else None,
        b_ub=np.zeros(len(a_ub)) if len(a_ub) else None,
        A_eq=uniq[both] if both.any() else None,
        b_eq=np.zeros(int(both.sum())) if both.any() else None,
        bounds=[(-1.0, 1.0)] * uniq.shape[1],
        method="highs",
    )
    if res.status != 0 or -res.fun <= 1e-7 * max(1.0, float(np.abs(uniq).max())):
        return None
    return np.where(np.abs(res.x) > 1e-7, res.x, 0.0)
