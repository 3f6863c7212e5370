"""Private numerical kernels for the item-response models in :mod:`twofold.analysis.irt`.

Everything here works on plain float64 arrays:

- ``X`` (persons x items): number of correct answers (0/1 for an ordinary response matrix,
  0 where the item was not seen);
- ``M`` (persons x items): number of attempts (1 where seen, 0 where not). Counts above 1 let a
  pooled respondent (several machine seeds) be scored with the same code.

The latent trait has a standard normal prior, integrated on a fixed grid (or Gauss-Hermite
nodes). Items are kept in slope-intercept form ``z = a * theta + d`` (``b = -d / a``).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
from numpy.polynomial.hermite_e import hermegauss
from scipy.special import expit

__all__ = [
    "EMOutcome",
    "Design",
    "chunks",
    "louis_information",
    "mle_theta",
    "QUADRATURES",
    "normal_quadrature",
    "posterior",
    "run_em",
]


QUADRATURES = ("gauss-hermite", "grid")
GRID_BOUND = 6.0


def normal_quadrature(n_points: int, kind: str = "grid") -> tuple[np.ndarray, np.ndarray]:
    """Nodes and log-weights (weights sum to 1) for a standard normal ability distribution.

    ``"grid"``: equally spaced nodes on [-6, 6] weighted by the normal density. ``"gauss-hermite"``:
    Gauss-Hermite nodes, exact for polynomials but spaced about 0.5 apart near 0, too coarse for
    the narrow posteriors of long tests (it biases slopes downwards there).
    """
    if kind == "gauss-hermite":
        nodes, weights = hermegauss(n_points)
        weights = weights / weights.sum()
        return nodes.astype(np.float64), np.log(weights)
    nodes = np.linspace(-GRID_BOUND, GRID_BOUND, n_points)
    logw = -0.5 * nodes * nodes
    logw -= np.log(np.exp(logw).sum())
    return nodes, logw


def _log1mp(z: np.ndarray) -> np.ndarray:
    """log(1 - expit(z)) computed without overflow."""
    return -np.logaddexp(0.0, z)


def posterior(
    X: np.ndarray,
    M: np.ndarray | None,
    a: np.ndarray,
    d: np.ndarray,
    nodes: np.ndarray,
    logw: np.ndarray,
) -> tuple[np.ndarray, np.ndarray]:
    """Posterior weights over the quadrature nodes and each person's marginal log-likelihood.

    ``M is None`` means every person saw every item once (saves one matrix product).
    Returns ``W`` (persons x nodes, rows sum to 1) and ``ll`` (persons,).
    """
    Z = np.outer(a, nodes)
    Z += d[:, None]
    L = X @ Z
    lq = _log1mp(Z)
    if M is None:
        L += lq.sum(axis=0) + logw
    else:
        L += M @ lq
        L += logw
    mx = L.max(axis=1, keepdims=True)
    L -= mx
    # floor far below machine precision: exp() of the floor is a normal number, not a subnormal
    # (subnormal weights make the next matrix products many times slower)
    np.maximum(L, -700.0, out=L)
    np.exp(L, out=L)
    s = L.sum(axis=1, keepdims=True)
    L /= s
    return L, mx[:, 0] + np.log(s[:, 0])


@dataclass(frozen=True)
class Design:
    """How the free parameters ``phi`` map to item slopes and intercepts.

    ``kind`` is ``"2pl"`` (phi = a_1..a_J, d_1..d_J), ``"rasch"`` (phi = d_1..d_J, a = 1) or
    ``"rasch_common"`` (phi = a, d_1..d_J).
    """

    kind: str
    n_items: int

    def unpack(self, phi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        J = self.n_items
        if self.kind == "2pl":
            return phi[:J], phi[J:]
        if self.kind == "rasch":
            return np.ones(J), phi
        return np.full(J, phi[0]), phi[1:]

    def jacobian(self) -> np.ndarray:
        """d(a_1..a_J, d_1..d_J) / d(phi), shape (2J, n_phi)."""
        J = self.n_items
        if self.kind == "2pl":
            return np.eye(2 * J)
        if self.kind == "rasch":
            return np.vstack([np.zeros((J, J)), np.eye(J)])
        A = np.zeros((2 * J, J + 1))
        A[:J, 0] = 1.0
        A[J:, 1:] = np.eye(J)
        return A


def mstep(
    design: Design,
    r: np.ndarray,
    n: np.ndarray,
    phi: np.ndarray,
    nodes: np.ndarray,
    *,
    newton_steps: int = 8,
    tol: float = 1e-9,
) -> np.ndarray:
    """Maximise the expected complete-data log-likelihood given expected counts.

    ``r`` and ``n`` (items x nodes) are the expected numbers correct and attempted at each node.
    Vectorised Newton-Raphson over items (2 x 2 systems for the 2PL, an arrowhead system for a
    common slope), with steps capped at 1 logit for stability.
    """
    phi = phi.copy()
    t = nodes
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        return _newton(design, r, n, phi, t, newton_steps, tol)


def _newton(design, r, n, phi, t, newton_steps, tol):
    for _ in range(newton_steps):
        a, d = design.unpack(phi)
        p = expit(np.outer(a, t) + d[:, None])
        res = r - n * p
        w = n * p * (1.0 - p)
        g0 = res.sum(axis=1)
        h00 = w.sum(axis=1)
        if design.kind == "rasch":
            step = g0 / h00
        else:
            g1 = res @ t
            h01 = w @ t
            h11 = w @ (t * t)
            if design.kind == "2pl":
                det = h11 * h00 - h01 * h01
                sa = (h00 * g1 - h01 * g0) / det
                sd = (h11 * g0 - h01 * g1) / det
                step = np.concatenate([sa, sd])
            else:
                # arrowhead system [[H11, h01^T], [h01, diag(h00)]] [sa, sd] = [G1, g0]
                G1, H11 = g1.sum(), h11.sum()
                schur = H11 - np.sum(h01 * h01 / h00)
                sa = (G1 - np.sum(h01 * g0 / h00)) / schur
                sd = (g0 - h01 * sa) / h00
                step = np.concatenate([[sa], sd])
        step = np.clip(np.nan_to_num(step), -1.0, 1.0)
        phi += step
        if np.max(np.abs(step)) < tol:
            break
    return phi


@dataclass
class EMOutcome:
    phi: np.ndarray
    loglik: float
    n_cycles: int
    n_estep: int
    converged: bool
    max_change: float
    W: np.ndarray
    person_ll: np.ndarray
    history: list[float] = field(default_factory=list)


def _expected_counts(
    X: np.ndarray, M: np.ndarray | None, W: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    r = X.T @ W
    if M is None:
        n = np.broadcast_to(W.sum(axis=0), r.shape)
    else:
        n = M.T @ W
    return r, n


def run_em(
    X: np.ndarray,
    M: np.ndarray | None,
    design: Design,
    phi0: np.ndarray,
    nodes: np.ndarray,
    logw: np.ndarray,
    *,
    max_iter: int,
    tol: float,
    accelerate: bool,
    callback: Callable[[int, float], None] | None = None,
) -> EMOutcome:
    """Bock-Aitkin EM, optionally accelerated with SQUAREM (Varadhan & Roland 2008, scheme S3).

    Converged when one plain EM step changes no parameter by more than ``tol``. Each SQUAREM cycle
    is monotone: an extrapolated point whose log-likelihood falls below that of the first EM step
    is replaced by the second EM step.
    """
    n_estep = 0
    history: list[float] = []

    def em_map(phi: np.ndarray) -> tuple[np.ndarray, float]:
        nonlocal n_estep
        a, d = design.unpack(phi)
        W, ll = posterior(X, M, a, d, nodes, logw)
        n_estep += 1
        r, n = _expected_counts(X, M, W)
        return mstep(design, r, n, phi, nodes), float(ll.sum())

    phi = phi0.astype(np.float64).copy()
    converged = False
    max_change = np.inf
    cycle = 0
    for cycle in range(1, max_iter + 1):
        phi1, ll0 = em_map(phi)
        history.append(ll0)
        if callback is not None:
            callback(cycle, ll0)
        max_change = float(np.max(np.abs(phi1 - phi)))
        if max_change < tol:
            phi = phi1
            converged = True
            break
        if not accelerate:
            phi = phi1
            continue
        phi2, ll1 = em_map(phi1)
        rr = phi1 - phi
        vv = phi2 - phi1 - rr
        nv = np.sqrt(vv @ vv)
        alpha = -np.sqrt(rr @ rr) / nv if nv > 0 else -1.0
        alpha = min(alpha, -1.0)
        phi_x = phi - 2.0 * alpha * rr + alpha * alpha * vv
        a, d = design.unpack(phi_x)
        W, llx = posterior(X, M, a, d, nodes, logw)
        n_estep += 1
        llx_sum = float(llx.sum())
        if not np.isfinite(llx_sum) or llx_sum < ll1:
            phi = phi2
        else:
            r, n = _expected_counts(X, M, W)
            phi = mstep(design, r, n, phi_x, nodes)
    a, d = design.unpack(phi)
    W, ll = posterior(X, M, a, d, nodes, logw)
    n_estep += 1
    return EMOutcome(
        phi=phi,
        loglik=float(ll.sum()),
        n_cycles=cycle,
        n_estep=n_estep,
        converged=converged,
        max_change=max_change,
        history=history,
        W=W,
        person_ll=ll,
    )


def score_vector(
    X: np.ndarray,
    M: np.ndarray | None,
    W: np.ndarray,
    a: np.ndarray,
    d: np.ndarray,
    nodes: np.ndarray,
) -> np.ndarray:
    """Gradient of the marginal log-likelihood with respect to (a_1..a_J, d_1..d_J)."""
    r, n = _expected_counts(X, M, W)
    res = r - n * expit(np.outer(a, nodes) + d[:, None])
    return np.concatenate([res @ nodes, res.sum(axis=1)])


def chunks(n_rows: int, n_cols: int, budget: int = 2_000_000) -> list[slice]:
    """Row slices whose blocks hold at most about ``budget`` cells (bounds peak memory)."""
    step = max(1, budget // max(n_cols, 1))
    return [slice(i, min(i + step, n_rows)) for i in range(0, n_rows, step)]


def louis_information(
    X: np.ndarray,
    M: np.ndarray | None,
    W: np.ndarray,
    a: np.ndarray,
    d: np.ndarray,
    nodes: np.ndarray,
) -> np.ndarray:
    """Observed information of the marginal log-likelihood in (a_1..a_J, d_1..d_J), exact.

    Louis (1982): ``I = E[-d2 l] - E[s s^T] + sum_i g_i g_i^T`` with expectations over each
    person's posterior on the quadrature grid. The person-by-node outer products are contracted
    through matrix products, so the cost is a few (items x persons x items) products, plus one per
    node when some responses are missing. Persons are processed in blocks to bound memory.
    """
    J = a.size
    P = expit(np.outer(a, nodes) + d[:, None])  # J x Q
    _, n = _expected_counts(X, M, W)
    pq = n * P * (1.0 - P)
    powers = [np.ones_like(nodes), nodes, nodes * nodes]
    info = np.zeros((2 * J, 2 * J))
    info[:J, :J] = np.diag(pq @ powers[2])
    info[:J, J:] = info[J:, :J] = np.diag(pq @ powers[1])
    info[J:, J:] += np.diag(pq @ powers[0])
    blocks = [
        (slice(None, J), slice(None, J), 2),
        (slice(None, J), slice(J, None), 1),
        (slice(J, None), slice(J, None), 0),
    ]
    for rows in chunks(X.shape[0], J):
        Xc, Wc = X[rows], W[rows]
        Mc = np.ones_like(Xc) if M is None else M[rows]
        c = [Wc @ tp for tp in powers]  # posterior moments per person
        C = []
        for e in range(3):
            MB = Mc * (Wc @ (powers[e][:, None] * P.T))
            XtMB = Xc.T @ MB
            term = (Xc * c[e][:, None]).T @ Xc - XtMB - XtMB.T
            if M is None:
                term += (P * (Wc.sum(axis=0) * powers[e])) @ P.T
            else:
                for k in range(nodes.size):
                    Pk = P[:, k]
                    term += (powers[e][k] * np.outer(Pk, Pk)) * ((Mc * Wc[:, k : k + 1]).T @ Mc)
            C.append(term)
            if e == 0:
                Gd = Xc - MB
            elif e == 1:
                Ga = Xc * c[1][:, None] - MB
            del MB
        G = {2: (Ga, Ga), 1: (Ga, Gd), 0: (Gd, Gd)}
        for r_sl, c_sl, e in blocks:
            info[r_sl, c_sl] += G[e][0].T @ G[e][1] - C[e]
    info[J:, :J] = info[:J, J:].T
    return info


def mle_theta(
    X: np.ndarray,
    M: np.ndarray,
    a: np.ndarray,
    d: np.ndarray,
    *,
    max_iter: int = 100,
    tol: float = 1e-8,
    bound: float = 15.0,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Maximum-likelihood abilities by vectorised Fisher scoring.

    Returns ``theta``, ``se`` and ``converged`` (persons,). Persons whose score is 0 or perfect
    (no finite maximum) get NaN; the caller decides how to report them.
    """
    n_obs = M.sum(1)
    n_cor = X.sum(1)
    finite = (n_cor > 0) & (n_cor < n_obs)
    theta = np.zeros(X.shape[0])
    done = ~finite
    full = M.strides == (0, 0)  # a broadcast 1: every item seen once
    for _ in range(max_iter):
        idx = ~done
        if not idx.any():
            break
        p = expit(np.outer(theta[idx], a) + d)
        m = 1.0 if full else M[idx]
        g = (X[idx] - m * p) @ a
        info = (m * p * (1.0 - p)) @ (a * a)
        step = np.clip(g / info, -1.0, 1.0)
        theta[idx] = np.clip(theta[idx] + step, -bound, bound)
        small = np.abs(step) < tol
        done[np.flatnonzero(idx)[small]] = True
    p = expit(np.outer(theta, a) + d)
    info = (M * p * (1.0 - p)) @ (a * a)
    se = 1.0 / np.sqrt(info)
    theta[~finite] = np.nan
    se[~finite] = np.nan
    converged = done & finite
    return theta, se, converged
