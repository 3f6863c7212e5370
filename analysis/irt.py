"""Item-response models: Rasch, 1PL and 2PL by marginal maximum likelihood, abilities and fit.

The models (logistic, one latent trait ``theta ~ N(0, 1)``)::

    P(correct | theta) = 1 / (1 + exp(-(a_j * theta + d_j))),   b_j = -d_j / a_j

- ``"2pl"``: one slope ``a_j`` and intercept ``d_j`` per item;
- ``"rasch"``: every slope fixed at 1;
- ``"1pl"``: one common slope estimated for all items.

Item parameters are estimated by marginal maximum likelihood with the Bock-Aitkin EM algorithm
on a fixed quadrature grid, accelerated with SQUAREM; standard errors come from the exact observed
information (Louis 1982). Missing responses (NaN: the respondent did not see the item) are
allowed everywhere.

Machines are put on the human scale with :func:`score_on_human_scale`: items are calibrated on
human respondents only, then each machine respondent (each seed, and all seeds of one solver
pooled) is scored on that scale, with its person fit and the items where it departs most from
what its ability predicts.

References
----------
Bock, R. D., & Aitkin, M. (1981). Marginal maximum likelihood estimation of item parameters:
application of an EM algorithm. Psychometrika, 46, 443-459. doi:10.1007/BF02293801
Louis, T. A. (1982). Finding the observed information matrix when using the EM algorithm.
JRSS B, 44, 226-233.
Varadhan, R., & Roland, C. (2008). Simple and globally convergent methods for accelerating the
convergence of any EM algorithm. Scand. J. Statist., 35, 335-353.
Drasgow, F., Levine, M. V., & Williams, E. A. (1985). Appropriateness measurement with
polychotomous item response models and standardized indices. Br. J. Math. Stat. Psychol., 38,
67-86.
Wright, B. D., & Masters, G. N. (1982). Rating Scale Analysis. MESA Press (infit and outfit).
"""

from __future__ import annotations

import re
import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from scipy.special import expit
from twofold.study.checks import check_choice, check_int, check_number, fail
from twofold.study.exceptions import ConvergenceWarning, DegenerateWarning, InputError

from . import _quadrature as _q

__all__ = [
    "ABILITY_COLUMNS",
    "DEPARTURE_COLUMNS",
    "ITEM_COLUMNS",
    "MODELS",
    "HumanScaleResult",
    "IRTResult",
    "fit_irt",
    "information_curve",
    "item_fit",
    "item_information",
    "response_matrix",
    "score_abilities",
    "score_on_human_scale",
    "simulate_responses",
]

MODELS = ("1pl", "2pl", "rasch")
#: slopes beyond this are reported as not identified by the data (DegenerateWarning)
MAX_SLOPE = 10.0
_DESIGN = {"2pl": "2pl", "rasch": "rasch", "1pl": "rasch_common"}

#: columns of :attr:`IRTResult.items`
ITEM_COLUMNS = (
    "item",
    "a",
    "b",
    "d",
    "a_se",
    "b_se",
    "d_se",
    "n",
    "p_correct",
    "infit",
    "outfit",
)
#: columns of every abilities table
ABILITY_COLUMNS = ("respondent", "theta", "se", "method", "n_items", "n_correct", "lz")
#: columns of :attr:`HumanScaleResult.departures`
DEPARTURE_COLUMNS = (
    "respondent",
    "solver",
    "pooled",
    "item",
    "n",
    "observed",
    "expected",
    "residual",
    "z",
    "rank",
)
_SEED_ID = re.compile(r"^(?P<solver>.+)-s(?P<seed>\d+)$")


# ----------------------------------------------------------------------------- data preparation


def response_matrix(
    trials: pd.DataFrame,
    *,
    kind: str | None = None,
    duplicates: str = "raise",
    unscored: str = "missing",
) -> pd.DataFrame:
    """Build the respondents x items response matrix from a tidy trials table.

    Parameters
    ----------
    trials : pandas.DataFrame
        One row per trial with at least the columns ``respondent``, ``item`` and ``correct``
        (boolean; empty/NA when the trial was not scored), and ``kind`` when ``kind`` is given.
    kind : {"human", "machine"} or None, default None
        Keep only respondents of this kind; None keeps all.
    duplicates : {"raise", "first", "last"}, default "raise"
        What to do when one respondent answered one item more than once.
    unscored : {"missing", "incorrect"}, default "missing"
        How a trial with ``correct`` NA (timeout, invalid answer, failure) counts: as not seen
        (NaN) or as wrong (0).

    Returns
    -------
    pandas.DataFrame
        float64 values 1.0 (correct), 0.0 (wrong) or NaN (not seen); index ``respondent`` and
        columns ``item``, both sorted.
    """
    if not isinstance(trials, pd.DataFrame):
        raise fail("trials", trials, "a pandas DataFrame with respondent, item, correct")
    need = ["respondent", "item", "correct"] + (["kind"] if kind is not None else [])
    missing_cols = [c for c in need if c not in trials.columns]
    if missing_cols:
        raise fail("trials", sorted(trials.columns), f"a table with columns {', '.join(need)}")
    check_choice("duplicates", duplicates, ("raise", "first", "last"))
    check_choice("unscored", unscored, ("missing", "incorrect"))
    df = trials
    if kind is not None:
        check_choice("kind", kind, ("human", "machine"))
        df = df[df["kind"] == kind]
    try:
        correct = df["correct"].astype("boolean")
    except (TypeError, ValueError) as err:
        raise fail("correct", df["correct"].iloc[:3].tolist(), "booleans or NA") from err
    values = correct.astype("Float64").astype("float64")
    if unscored == "incorrect":
        values = values.fillna(0.0)
    tidy = pd.DataFrame(
        {
            "respondent": df["respondent"].astype(str).to_numpy(),
            "item": df["item"].astype(str).to_numpy(),
            "value": values.to_numpy(),
        }
    )
    dup = tidy.duplicated(["respondent", "item"], keep=False)
    if dup.any():
        if duplicates == "raise":
            first = tidy[dup].iloc[0]
            raise InputError(
                f"trials: respondent {first['respondent']!r} answered item {first['item']!r} "
                f"more than once ({int(dup.sum())} such rows); pass duplicates='first' or "
                "'last' to keep one",
                field="duplicates",
            )
        tidy = tidy.drop_duplicates(["respondent", "item"], keep=duplicates)
    wide = tidy.pivot(index="respondent", columns="item", values="value")
    wide = wide.sort_index().sort_index(axis=1).astype("float64")
    wide.index.name = "respondent"
    wide.columns.name = "item"
    return wide


def _as_matrix(data: Any, *, kind: str | None = None, name: str = "data") -> pd.DataFrame:
    """Accept a response matrix (DataFrame or 2-D array) or a tidy trials table."""
    if isinstance(data, pd.DataFrame):
        if {"respondent", "item", "correct"} <= set(data.columns):
            return response_matrix(data, kind=kind)
        try:
            arr = data.to_numpy(dtype=np.float64, na_value=np.nan)
        except (TypeError, ValueError) as err:
            raise fail(name, "non-numeric values", "0/1, True/False or NaN") from err
        frame = pd.DataFrame(arr, index=data.index, columns=data.columns, copy=False)
    else:
        arr = np.asarray(data)
        if arr.ndim != 2:
            raise fail(
                name,
                f"an array of shape {arr.shape}",
                "a 2-D respondents x items matrix or a trials DataFrame",
            )
        if arr.dtype != np.float64:
            try:
                arr = arr.astype(np.float64)
            except (TypeError, ValueError) as err:
                raise fail(name, "non-numeric values", "0/1, True/False or NaN") from err
        frame = pd.DataFrame(
            arr,
            index=[f"r{i + 1}" for i in range(arr.shape[0])],
            columns=[f"item{j + 1}" for j in range(arr.shape[1])],
            copy=False,
        )
    try:
        values = frame.astype("float64")
    except (TypeError, ValueError) as err:
        raise fail(name, "non-numeric values", "0/1, True/False or NaN") from err
    v = values.to_numpy()
    for rows in _q.chunks(v.shape[0], v.shape[1]):
        block = v[rows]
        bad = ~(np.isnan(block) | (block == 0.0) | (block == 1.0))
        if bad.any():
            raise fail(name, f"value {block[bad][0]!r}", "0/1, True/False or NaN (not seen)")
    values.index = values.index.astype(str)
    values.columns = values.columns.astype(str)
    values.index.name = "respondent"
    values.columns.name = "item"
    return values


def _split(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Correct-counts and seen-mask. Without missing values no copy is made and the mask is a
    read-only broadcast of 1 (no memory); :func:`_full` recognises it."""
    mask = ~np.isnan(values)
    if mask.all():
        return values, np.broadcast_to(np.float64(1.0), values.shape)
    return np.where(mask, values, 0.0), mask.astype(np.float64)


def _full(Mk: np.ndarray) -> bool:
    return Mk.ndim == 2 and Mk.strides == (0, 0)


def _seen(Mk: np.ndarray, axis: int) -> np.ndarray:
    """Mk.sum(axis) without a pass over a broadcast mask."""
    if _full(Mk):
        return np.full(Mk.shape[1 - axis], float(Mk.shape[axis]))
    return Mk.sum(axis)


# ---------------------------------------------------------------------------------- the result


@dataclass(frozen=True, eq=False)
class IRTResult:
    """A fitted item-response model (returned by :func:`fit_irt`).

    Attributes
    ----------
    model : str
        ``"2pl"``, ``"1pl"`` or ``"rasch"``.
    items : pandas.DataFrame
        One row per calibrated item, columns :data:`ITEM_COLUMNS`: ``item``; ``a`` slope
        (discrimination); ``b`` difficulty (``-d / a``); ``d`` intercept; ``a_se``, ``b_se``,
        ``d_se`` standard errors (NaN when not computed; ``a_se`` NaN for the Rasch model,
        whose slope is fixed); ``n`` respondents who saw the item; ``p_correct`` their proportion
        correct; ``infit``, ``outfit`` mean squares at the maximum-likelihood abilities (NaN when
        not computed).
    abilities : pandas.DataFrame
        EAP abilities of the calibration respondents (121-node grid), columns
        :data:`ABILITY_COLUMNS`; computed on first access (the result keeps a reference to the
        response matrix for this).
    loglik : float
        Marginal log-likelihood at the estimate.
    n_persons, n_items, n_params : int
        Respondents and items used, number of free parameters.
    converged : bool
        Whether a plain EM step changed no parameter by more than ``tol``.
    n_iter, n_estep : int
        EM (SQUAREM) cycles and E-steps used.
    max_change : float
        Largest parameter change in the last EM step.
    max_gradient : float
        Largest absolute score (gradient of the log-likelihood) at the estimate.
    history : tuple of float
        Log-likelihood at the start of each cycle.
    dropped_items, dropped_persons : tuple of str
        Items nobody answered or everybody answered the same way; respondents with no answers.
    cov : numpy.ndarray or None
        Covariance of the free parameters (slopes then intercepts for the 2PL; the common slope
        then intercepts for the 1PL; intercepts for the Rasch model).
    quadrature_points : int
        Number of quadrature nodes used in the fit.
    quadrature : str
        ``"grid"`` or ``"gauss-hermite"``.
    """

    model: str
    items: pd.DataFrame
    loglik: float
    n_persons: int
    n_items: int
    n_params: int
    converged: bool
    n_iter: int
    n_estep: int
    max_change: float
    max_gradient: float
    history: tuple[float, ...]
    dropped_items: tuple[str, ...]
    dropped_persons: tuple[str, ...]
    cov: np.ndarray | None = field(repr=False)
    quadrature_points: int = 41
    quadrature: str = "grid"
    #: (respondent index, counts X, mask Mk) of the calibration data, for ``abilities``
    _persons: tuple[Any, np.ndarray, np.ndarray] | None = field(default=None, repr=False)
    _cache: dict[str, pd.DataFrame] = field(default_factory=dict, repr=False)

    @property
    def abilities(self) -> pd.DataFrame:
        """EAP abilities of the calibration respondents (see the class docstring)."""
        if "abilities" not in self._cache:
            if self._persons is None:
                table = pd.DataFrame({c: [] for c in ABILITY_COLUMNS})
            else:
                index, X, Mk = self._persons
                theta, sd = _scores(X, Mk, self.a, self.d, "eap")
                table = _ability_table(index, theta, sd, "eap", X, Mk, self.a, self.d)
            self._cache["abilities"] = table
        return self._cache["abilities"]

    @classmethod
    def from_parameters(
        cls,
        *,
        a: Any = None,
        b: Any = None,
        d: Any = None,
        items: Sequence[str] | None = None,
        model: str = "2pl",
        quadrature_points: int = 41,
    ) -> IRTResult:
        """A result holding given item parameters (assumed or published), for scoring.

        Give slopes ``a`` (default 1) and either difficulties ``b`` or intercepts ``d``
        (``d = -a b``). Fit quantities (log-likelihood, standard errors...) are NaN.
        """
        check_choice("model", model, MODELS)
        if (b is None) == (d is None):
            raise fail(
                "b/d",
                "both" if b is not None else "neither",
                "exactly one of difficulties b or intercepts d",
            )
        given = np.atleast_1d(np.asarray(b if b is not None else d, dtype=np.float64))
        J = given.size
        slope = np.ones(J) if a is None else np.atleast_1d(np.asarray(a, dtype=np.float64))
        if slope.shape != given.shape:
            raise fail("a", f"{slope.size} values", f"one slope per item ({J})")
        inter = -slope * given if b is not None else given
        names = [f"item{j + 1}" for j in range(J)] if items is None else [str(i) for i in items]
        if len(names) != J:
            raise fail("items", f"{len(names)} names", f"one name per item ({J})")
        nan = np.full(J, np.nan)
        table = pd.DataFrame(
            {
                "item": names,
                "a": slope,
                "b": -inter / slope,
                "d": inter,
                "a_se": nan,
                "b_se": nan,
                "d_se": nan,
                "n": np.zeros(J, dtype=np.int64),
                "p_correct": nan,
                "infit": nan,
                "outfit": nan,
            }
        )
        return cls(
            model=model,
            items=table,
            loglik=np.nan,
            n_persons=0,
            n_items=J,
            n_params=0,
            converged=True,
            n_iter=0,
            n_estep=0,
            max_change=np.nan,
            max_gradient=np.nan,
            history=(),
            dropped_items=(),
            dropped_persons=(),
            cov=None,
            quadrature_points=quadrature_points,
        )

    @property
    def a(self) -> np.ndarray:
        """Item slopes in item order."""
        return self.items["a"].to_numpy(dtype=np.float64)

    @property
    def d(self) -> np.ndarray:
        """Item intercepts in item order."""
        return self.items["d"].to_numpy(dtype=np.float64)

    @property
    def item_names(self) -> list[str]:
        return self.items["item"].tolist()

    @property
    def aic(self) -> float:
        return -2.0 * self.loglik + 2.0 * self.n_params

    @property
    def bic(self) -> float:
        return -2.0 * self.loglik + np.log(self.n_persons) * self.n_params

    def probability(self, theta: Any) -> np.ndarray:
        """P(correct) for abilities ``theta`` (shape (n,)) on every item: shape (n, n_items)."""
        t = np.atleast_1d(np.asarray(theta, dtype=np.float64))
        return expit(np.outer(t, self.a) + self.d)

    def convergence(self) -> pd.DataFrame:
        """Convergence trace: columns ``iteration``, ``loglik``."""
        return pd.DataFrame(
            {"iteration": np.arange(1, len(self.history) + 1), "loglik": list(self.history)}
        )

    def summary(self) -> str:
        """A short plain-text report of the fit."""
        lines = [
            f"Item-response model: {self.model} (marginal ML, Bock-Aitkin EM, "
            f"{self.quadrature_points}-point {self.quadrature} quadrature)",
            f"respondents: {self.n_persons}   items: {self.n_items}   parameters: {self.n_params}",
            f"log-likelihood: {self.loglik:.3f}   AIC: {self.aic:.1f}   BIC: {self.bic:.1f}",
            f"converged: {self.converged}   cycles: {self.n_iter}   E-steps: {self.n_estep}   "
            f"last change: {self.max_change:.2e}   max gradient: {self.max_gradient:.2e}",
        ]
        if self.dropped_items:
            lines.append(
                f"dropped items ({len(self.dropped_items)}): " + ", ".join(self.dropped_items)
            )
        if self.dropped_persons:
            lines.append(f"dropped respondents with no answers: {len(self.dropped_persons)}")
        cols = ["item", "a", "b", "a_se", "b_se", "n", "p_correct", "infit", "outfit"]
        lines.append(self.items[cols].to_string(index=False, float_format=lambda x: f"{x:.3f}"))
        return "\n".join(lines)


# -------------------------------------------------------------------------------------- fitting


def _initial_phi(X: np.ndarray, Mk: np.ndarray, kind: str) -> np.ndarray:
    n_seen = _seen(Mk, 0)
    p = np.clip(X.sum(0) / n_seen, 0.01, 0.99)
    logit = np.log(p / (1 - p))
    if kind == "rasch":
        return 1.16 * logit
    if kind == "rasch_common":
        return np.concatenate([[1.0], 1.16 * logit])
    # slopes from item-rest correlations (rest = proportion correct on the other seen items),
    # through the normal-ogive relation a ~ 1.7 r / sqrt(1 - r^2); moments by matrix products
    t = X.sum(1)
    c = np.maximum(_seen(Mk, 1) - 1.0, 1.0)

    def mt(v):
        return np.full(X.shape[1], v.sum()) if _full(Mk) else Mk.T @ v

    sum_r = mt(t / c) - X.T @ (1.0 / c)
    sum_xr = X.T @ (t / c) - X.T @ (1.0 / c)
    sum_rr = mt(t * t / c**2) - 2.0 * X.T @ (t / c**2) + X.T @ (1.0 / c**2)
    mx = X.sum(0) / n_seen
    mr = sum_r / n_seen
    cov = sum_xr / n_seen - mx * mr
    var = mx * (1 - mx) * np.maximum(sum_rr / n_seen - mr * mr, 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        r = np.nan_to_num(cov / np.sqrt(var), nan=0.3)
    r = np.clip(r, 0.05, 0.9)
    a0 = np.clip(1.7 * r / np.sqrt(1 - r * r), 0.2, 3.0)
    return np.concatenate([a0, logit * np.sqrt(1 + 0.346 * a0 * a0)])


def fit_irt(
    data: Any,
    *,
    model: str = "2pl",
    kind: str | None = None,
    quadrature: str = "grid",
    quadrature_points: int = 41,
    max_iter: int = 500,
    tol: float = 1e-5,
    accelerate: bool = True,
    se: bool = True,
    fit_statistics: bool = True,
) -> IRTResult:
    """Fit a Rasch, 1PL or 2PL model by marginal maximum likelihood.

    Parameters
    ----------
    data : pandas.DataFrame or array_like
        Either a respondents x items matrix (1/0/NaN or booleans; NaN = not seen; a DataFrame's
        index and columns name respondents and items) or a tidy trials table with columns
        ``respondent``, ``item``, ``correct`` (and ``kind``), see :func:`response_matrix`.
    model : {"2pl", "1pl", "rasch"}, default "2pl"
        ``"rasch"`` fixes every slope at 1; ``"1pl"`` estimates one common slope.
    kind : {"human", "machine"} or None, default None
        With a trials table: calibrate on respondents of this kind only.
    quadrature : {"grid", "gauss-hermite"}, default "grid"
        How the N(0, 1) ability distribution is integrated: equally spaced nodes on [-6, 6]
        weighted by the normal density, or Gauss-Hermite nodes (accurate for short tests, but
        biased for long ones, whose posteriors are narrower than the node spacing).
    quadrature_points : int, default 41
        Number of nodes.
    max_iter : int, default 500
        Maximum EM (SQUAREM) cycles; a :class:`ConvergenceWarning` is issued when reached.
    tol : float, default 1e-5
        Convergence when one EM step changes no slope or intercept by more than this.
    accelerate : bool, default True
        Use SQUAREM extrapolation (three E-steps per cycle); False runs plain EM.
    se : bool, default True
        Compute standard errors from the observed information.
    fit_statistics : bool, default True
        Compute item infit and outfit at the maximum-likelihood abilities, respondents with
        every seen item right or every one wrong left out (see :func:`item_fit`).

    Returns
    -------
    IRTResult
        With the ``items`` and ``abilities`` tables described there.

    Raises
    ------
    InputError
        For an unknown model, a bad option or values other than 0/1/NaN.

    Warns
    -----
    DegenerateWarning
        When items without variation or respondents without answers are dropped.
    ConvergenceWarning
        When ``max_iter`` is reached first.

    Notes
    -----
    The E-step computes, for every respondent ``i`` and node ``k``,
    ``log L_ik = sum_j x_ij z_jk + m_ij log(1 - p_jk)`` as two matrix products (``m`` is the
    seen-mask), so missing responses cost no more than complete ones. The M-step solves each
    item's weighted logistic regression on the expected counts by Newton-Raphson.

    Examples
    --------
    >>> import numpy as np
    >>> from twofold.analysis.irt import fit_irt, simulate_responses
    >>> rng = np.random.default_rng(1)
    >>> x = simulate_responses(np.ones(8), np.linspace(-1.5, 1.5, 8), rng.normal(size=400), rng)
    >>> res = fit_irt(x, model="rasch")
    >>> bool(res.converged), res.items.shape[0]
    (True, 8)
    """
    check_choice("model", model, MODELS)
    check_choice("quadrature", quadrature, _q.QUADRATURES)
    check_int("quadrature_points", quadrature_points, low=5, high=401)
    check_int("max_iter", max_iter, low=1)
    check_number("tol", tol, low=0.0)
    frame = _as_matrix(data, kind=kind)
    values = frame.to_numpy(dtype=np.float64)
    nan = np.isnan(values)
    n_seen = values.shape[0] - nan.sum(axis=0)
    n_cor = np.nansum(values, axis=0) if nan.any() else values.sum(axis=0)
    bad_items = (n_seen == 0) | (n_cor == 0) | (n_cor == n_seen)
    dropped_items = tuple(str(c) for c in frame.columns[bad_items])
    if dropped_items:
        warnings.warn(
            f"dropped {len(dropped_items)} item(s) that nobody answered or everybody answered "
            f"the same way: {', '.join(dropped_items[:10])}",
            DegenerateWarning,
            stacklevel=2,
        )
    empty = (~nan[:, ~bad_items]).sum(axis=1) == 0
    dropped_persons = tuple(str(r) for r in frame.index[empty])
    if dropped_persons:
        warnings.warn(
            f"dropped {len(dropped_persons)} respondent(s) without any answer",
            DegenerateWarning,
            stacklevel=2,
        )
    del nan
    if dropped_items or dropped_persons:
        frame = frame.loc[~empty, ~bad_items]
        values = frame.to_numpy(dtype=np.float64)
    n_items = frame.shape[1]
    min_items = 1 if model == "rasch" else 2
    if n_items < min_items or frame.shape[0] < 2:
        raise fail(
            "data",
            f"{frame.shape[0]} respondents x {n_items} usable items",
            f"at least 2 respondents and {min_items} item(s) with variation",
        )
    X, Mk = _split(values)
    M = None if _full(Mk) else Mk
    design = _q.Design(_DESIGN[model], n_items)
    nodes, logw = _q.normal_quadrature(quadrature_points, quadrature)
    phi0 = _initial_phi(X, Mk, design.kind)
    out = _q.run_em(
        X, M, design, phi0, nodes, logw, max_iter=max_iter, tol=tol, accelerate=accelerate
    )
    if not out.converged:
        warnings.warn(
            f"EM stopped after max_iter={max_iter} cycles; last parameter change "
            f"{out.max_change:.2e} > tol={tol:g}",
            ConvergenceWarning,
            stacklevel=2,
        )
    a, d = design.unpack(out.phi)
    steep = np.abs(a) > MAX_SLOPE
    if steep.any():
        names = [str(c) for c in frame.columns[steep]]
        warnings.warn(
            f"{len(names)} item(s) have |slope| > {MAX_SLOPE:g}, a step the data cannot pin down "
            f"(usually too few respondents for this model; try model='1pl' or 'rasch'): "
            f"{', '.join(names[:10])}",
            DegenerateWarning,
            stacklevel=2,
        )
    A = design.jacobian()
    grad = A.T @ _q.score_vector(X, M, out.W, a, d, nodes)
    cov = None
    a_se = d_se = b_se = np.full(n_items, np.nan)
    if se:
        with np.errstate(all="ignore"):
            info = A.T @ _q.louis_information(X, M, out.W, a, d, nodes) @ A
        try:
            if not np.isfinite(info).all():
                raise np.linalg.LinAlgError("non-finite information")
            cov = np.linalg.inv(info)
        except np.linalg.LinAlgError:
            warnings.warn(
                "observed information is singular; standard errors are NaN",
                DegenerateWarning,
                stacklevel=2,
            )
        if cov is not None:
            full = A @ cov @ A.T  # covariance of (a_1..a_J, d_1..d_J)
            J = n_items
            var_a = np.diag(full)[:J]
            var_d = np.diag(full)[J:]
            cov_ad = np.diag(full[:J, J:])
            # delta method for b = -d / a
            with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
                var_b = var_d / a**2 + d**2 * var_a / a**4 - 2 * d * cov_ad / a**3
                a_se = np.sqrt(var_a) if model != "rasch" else np.full(J, np.nan)
                d_se = np.sqrt(var_d)
                b_se = np.where(var_b >= 0, np.sqrt(np.abs(var_b)), np.nan)
    items = pd.DataFrame(
        {
            "item": list(frame.columns),
            "a": a,
            "b": -d / a,
            "d": d,
            "a_se": a_se,
            "b_se": b_se,
            "d_se": d_se,
            "n": _seen(Mk, 0).astype(np.int64),
            "p_correct": X.sum(0) / _seen(Mk, 0),
            "infit": np.nan,
            "outfit": np.nan,
        }
    )
    if fit_statistics:
        theta_mle, _, _ = _q.mle_theta(X, Mk, a, d)
        fit = _item_fit_arrays(X, Mk, theta_mle, a, d, exclude_extreme=True)
        items["infit"], items["outfit"] = fit
    return IRTResult(
        model=model,
        items=items,
        loglik=out.loglik,
        n_persons=frame.shape[0],
        n_items=n_items,
        n_params=out.phi.size,
        converged=out.converged,
        n_iter=out.n_cycles,
        n_estep=out.n_estep,
        max_change=out.max_change,
        max_gradient=float(np.max(np.abs(grad))),
        history=tuple(out.history),
        dropped_items=dropped_items,
        dropped_persons=dropped_persons,
        cov=cov,
        quadrature_points=quadrature_points,
        quadrature=quadrature,
        _persons=(frame.index, X, Mk),
    )


# ---------------------------------------------------------------------------- abilities and fit


def _lz(X: np.ndarray, Mk: np.ndarray, theta: np.ndarray, a: np.ndarray, d: np.ndarray):
    """Standardised log-likelihood person fit (Drasgow et al. 1985) at ``theta``.

    With ``z = a theta + d``: ``l0 = sum x z + m log(1 - p)``, ``E l0 = sum m (p z + log(1 - p))``
    and ``Var l0 = sum m p (1 - p) z^2``.
    """
    t = np.where(np.isfinite(theta), theta, 0.0)
    l0 = np.empty(t.size)
    e = np.empty(t.size)
    v = np.empty(t.size)
    full = _full(Mk)
    for rows in _q.chunks(X.shape[0], X.shape[1]):
        z = np.outer(t[rows], a)
        z += d
        lq = np.logaddexp(0.0, z)
        lq *= -1.0
        p = expit(z)
        pz = p * z
        if full:
            sum_lq = lq.sum(1)
            l0[rows] = np.einsum("ij,ij->i", X[rows], z) + sum_lq
            e[rows] = pz.sum(1) + sum_lq
            v[rows] = np.einsum("ij,ij->i", pz * (1.0 - p), z)
        else:
            m = Mk[rows]
            l0[rows] = np.einsum("ij,ij->i", X[rows], z) + np.einsum("ij,ij->i", m, lq)
            e[rows] = np.einsum("ij,ij->i", m, pz + lq)
            v[rows] = np.einsum("ij,ij->i", m, pz * (1.0 - p) * z)
    with np.errstate(invalid="ignore", divide="ignore"):
        out = (l0 - e) / np.sqrt(v)
    out[~np.isfinite(theta) | (v <= 0)] = np.nan
    return out


def _ability_table(index, theta, se, method, X, Mk, a, d) -> pd.DataFrame:
    return pd.DataFrame(
        {
            "respondent": [str(i) for i in index],
            "theta": theta,
            "se": se,
            "method": method,
            "n_items": _seen(Mk, 1).astype(np.int64),
            "n_correct": X.sum(1).astype(np.int64),
            "lz": _lz(X, Mk, theta, a, d),
        }
    )


#: EAP scoring grid: 121 nodes on [-6, 6] (spacing 0.1), fine enough for long-test posteriors
EAP_POINTS = 121


def _scores(X, Mk, a, d, method, quadrature_points=EAP_POINTS):
    if method == "eap":
        nodes, logw = _q.normal_quadrature(quadrature_points, "grid")
        W, _ = _q.posterior(X, None if _full(Mk) else Mk, a, d, nodes, logw)
        theta = W @ nodes
        return theta, np.sqrt(np.maximum(W @ (nodes * nodes) - theta * theta, 0.0))
    theta, se, _ = _q.mle_theta(X, Mk, a, d)
    return theta, se


def _aligned(result: IRTResult, data: Any, name: str = "data") -> pd.DataFrame:
    frame = _as_matrix(data, name=name)
    if not isinstance(data, pd.DataFrame):
        if frame.shape[1] != result.n_items:
            raise fail(
                f"{name} columns",
                frame.shape[1],
                f"one column per calibrated item ({result.n_items}) for an array",
            )
        frame.columns = pd.Index(result.item_names, name="item")
    unknown = [c for c in frame.columns if c not in set(result.item_names)]
    if unknown:
        raise fail(f"{name} columns", unknown[:5], "items calibrated in the result")
    return frame.reindex(columns=result.item_names)


def score_abilities(
    result: IRTResult,
    data: Any,
    *,
    method: str = "eap",
    quadrature_points: int | None = None,
) -> pd.DataFrame:
    """Score respondents on the scale of a fitted model.

    Parameters
    ----------
    result : IRTResult
        The calibration (item parameters are held fixed).
    data : pandas.DataFrame or array_like
        Respondents x items matrix (1/0/NaN; columns a subset of the calibrated items, or in the
        calibration's item order for an array) or a tidy trials table.
    method : {"eap", "mle"}, default "eap"
        ``"eap"``: posterior mean and SD under the N(0, 1) prior. ``"mle"``: maximum likelihood
        with SE ``1 / sqrt(information)``; NaN (with a :class:`DegenerateWarning`) for
        respondents who got every seen item right or every one wrong.
    quadrature_points : int, default 121
        Nodes of the EAP grid on [-6, 6].

    Returns
    -------
    pandas.DataFrame
        Columns :data:`ABILITY_COLUMNS`: ``respondent``; ``theta``; ``se``; ``method``;
        ``n_items`` answered; ``n_correct``; ``lz`` the standardised person-fit statistic at
        ``theta`` (large negative values: a response pattern unlike what the model predicts,
        e.g. failing easy items while solving hard ones).
    """
    check_choice("method", method, ("eap", "mle"))
    frame = _aligned(result, data)
    X, Mk = _split(frame.to_numpy(dtype=np.float64))
    q = (
        EAP_POINTS
        if quadrature_points is None
        else check_int("quadrature_points", quadrature_points, low=5, high=2001)
    )
    theta, se = _scores(X, Mk, result.a, result.d, method, q)
    if method == "mle":
        _warn_extreme(theta)
    return _ability_table(frame.index, theta, se, method, X, Mk, result.a, result.d)


def _warn_extreme(theta: np.ndarray) -> None:
    n_bad = int(np.isnan(theta).sum())
    if n_bad:
        warnings.warn(
            f"{n_bad} respondent(s) answered every seen item right or every one wrong (or none): "
            "no finite maximum-likelihood ability, reported as NaN",
            DegenerateWarning,
            stacklevel=3,
        )


def _fit_rows(X, Mk, theta, exclude_extreme: bool) -> np.ndarray:
    keep = np.isfinite(theta)
    if exclude_extreme:
        n_cor = X.sum(1)
        keep &= (n_cor > 0) & (n_cor < _seen(Mk, 1))
    return keep


def _item_fit_arrays(X, Mk, theta, a, d, *, exclude_extreme: bool):
    keep = _fit_rows(X, Mk, theta, exclude_extreme)
    J = a.size
    sq_sum = np.zeros(J)
    var_sum = np.zeros(J)
    z2_sum = np.zeros(J)
    n_sum = np.zeros(J)
    for rows in _q.chunks(X.shape[0], J):
        k = keep[rows]
        x, m = X[rows][k], Mk[rows][k]
        p = expit(np.outer(theta[rows][k], a) + d)
        var = m * p * (1 - p)
        sq = (x - m * p) ** 2
        sq_sum += sq.sum(0)
        var_sum += var.sum(0)
        with np.errstate(invalid="ignore", divide="ignore"):
            z2_sum += np.where(m > 0, sq / var, 0.0).sum(0)
        n_sum += m.sum(0)
    with np.errstate(invalid="ignore", divide="ignore"):
        return sq_sum / var_sum, z2_sum / n_sum


def item_fit(
    result: IRTResult,
    data: Any,
    *,
    theta: Any = None,
    method: str = "mle",
    exclude_extreme: bool = True,
) -> pd.DataFrame:
    """Item infit and outfit mean squares.

    Parameters
    ----------
    result : IRTResult
        Item parameters to test.
    data : pandas.DataFrame or array_like
        Respondents x items matrix (or trials table) to compute the residuals on.
    theta : array_like, optional
        Abilities of the rows of ``data``; by default scored with ``method``.
    method : {"mle", "eap"}, default "mle"
        How abilities are scored when ``theta`` is not given. Maximum likelihood is the usual
        choice; EAP abilities are shrunk towards 0, which pulls both statistics below 1 on
        short tests.
    exclude_extreme : bool, default True
        Leave out respondents with every seen item right or every one wrong (common practice:
        their residuals carry no information about misfit).

    Returns
    -------
    pandas.DataFrame
        Columns ``item``, ``n`` (respondents used), ``infit``, ``outfit``.

    Notes
    -----
    With ``z_ij = (x_ij - p_ij) / sqrt(p_ij (1 - p_ij))`` over the respondents who saw item ``j``:
    outfit = mean of ``z_ij**2``; infit = ``sum (x_ij - p_ij)**2 / sum p_ij (1 - p_ij)``
    (information-weighted). Both have expectation 1 under the model.
    """
    check_choice("method", method, ("eap", "mle"))
    frame = _aligned(result, data)
    X, Mk = _split(frame.to_numpy(dtype=np.float64))
    if theta is None:
        t, _ = _scores(X, Mk, result.a, result.d, method)
    else:
        t = np.asarray(theta, dtype=np.float64).ravel()
        if t.size != X.shape[0]:
            raise fail("theta", f"{t.size} values", f"one ability per row of data ({X.shape[0]})")
    infit, outfit = _item_fit_arrays(X, Mk, t, result.a, result.d, exclude_extreme=exclude_extreme)
    keep = _fit_rows(X, Mk, t, exclude_extreme)
    return pd.DataFrame(
        {
            "item": result.item_names,
            "n": Mk[keep].sum(0).astype(np.int64),
            "infit": infit,
            "outfit": outfit,
        }
    )


def _theta_grid(theta: Any) -> np.ndarray:
    if theta is None:
        return np.linspace(-4.0, 4.0, 81)
    return np.atleast_1d(np.asarray(theta, dtype=np.float64))


def item_information(result: IRTResult, *, theta: Any = None) -> pd.DataFrame:
    """Fisher information of each item over an ability grid.

    Returns columns ``item``, ``theta``, ``information`` (``a**2 p (1 - p)``), one row per item
    and grid point (default grid: -4 to 4 in steps of 0.1).
    """
    t = _theta_grid(theta)
    p = result.probability(t)
    info = result.a**2 * p * (1 - p)  # grid x items
    return pd.DataFrame(
        {
            "item": np.repeat(result.item_names, t.size),
            "theta": np.tile(t, result.n_items),
            "information": info.T.ravel(),
        }
    )


def information_curve(result: IRTResult, *, theta: Any = None) -> pd.DataFrame:
    """Test information curve: the sum of the item informations.

    Returns columns ``theta``, ``information`` and ``se`` (``1 / sqrt(information)``, the
    standard error of a maximum-likelihood ability at that point).
    """
    t = _theta_grid(theta)
    p = result.probability(t)
    info = (result.a**2 * p * (1 - p)).sum(1)
    return pd.DataFrame({"theta": t, "information": info, "se": 1.0 / np.sqrt(info)})


# -------------------------------------------------------------------------------- the simulator


def simulate_responses(
    a: Any,
    b: Any,
    theta: Any,
    rng: np.random.Generator | int | None = None,
    *,
    missing: float | Any = 0.0,
) -> np.ndarray:
    """Simulate 2PL responses.

    Parameters
    ----------
    a, b : array_like, shape (n_items,)
        Slopes and difficulties; ``P(correct) = 1 / (1 + exp(-a (theta - b)))``.
    theta : array_like, shape (n_persons,)
        Abilities.
    rng : numpy.random.Generator, int or None
        Random generator or seed.
    missing : float or array_like of bool, default 0.0
        Probability that a response is not seen (independently per cell), or a boolean mask
        (n_persons x n_items) that is True where the item was not seen.

    Returns
    -------
    numpy.ndarray
        float64 (n_persons x n_items): 1.0, 0.0, or NaN where not seen.
    """
    a = np.atleast_1d(np.asarray(a, dtype=np.float64))
    b = np.atleast_1d(np.asarray(b, dtype=np.float64))
    theta = np.atleast_1d(np.asarray(theta, dtype=np.float64))
    if a.shape != b.shape or a.ndim != 1:
        raise fail("a", f"shape {a.shape} (b: {b.shape})", "two 1-D arrays of the same length")
    gen = rng if isinstance(rng, np.random.Generator) else np.random.default_rng(rng)
    p = expit(a * (theta[:, None] - b))
    out = (gen.random(p.shape) < p).astype(np.float64)
    if np.ndim(missing) == 0:
        rate = check_number("missing", float(missing), low=0.0, high=1.0)
        if rate > 0:
            out[gen.random(p.shape) < rate] = np.nan
    else:
        mask = np.asarray(missing, dtype=bool)
        if mask.shape != out.shape:
            raise fail(
                "missing",
                f"a mask of shape {mask.shape}",
                f"a probability or a boolean mask of shape {out.shape}",
            )
        out[mask] = np.nan
    return out


# ------------------------------------------------------------------------ machines on the scale


@dataclass(frozen=True, eq=False)
class HumanScaleResult:
    """Machines scored on a scale calibrated on people (see :func:`score_on_human_scale`).

    Attributes
    ----------
    calibration : IRTResult
        The model fitted on human respondents only.
    abilities : pandas.DataFrame
        Columns :data:`ABILITY_COLUMNS` plus ``kind`` (``"human"``/``"machine"``), ``solver``
        (the solver name; the respondent id for humans) and ``pooled`` (True for the row that
        pools all seeds of one solver; its ``respondent`` is the solver name).
    departures : pandas.DataFrame
        One row per machine row of ``abilities`` and calibrated item it answered, columns
        :data:`DEPARTURE_COLUMNS`: ``n`` answers, ``observed`` proportion correct, ``expected``
        probability at the machine's ability, ``residual`` (observed - expected), ``z``
        (standardised residual), ``rank`` (1 = largest ``|z|`` for that respondent).
    skipped_items : tuple of str
        Items the machines answered that were not calibrated (no usable human data).
    """

    calibration: IRTResult
    abilities: pd.DataFrame
    departures: pd.DataFrame
    skipped_items: tuple[str, ...] = ()

    def summary(self, *, top: int = 3) -> str:
        """Plain-text report: each machine's ability, fit and its most surprising items."""
        cal = self.calibration
        lines = [
            f"Human scale: {cal.model} fitted on {cal.n_persons} human respondents x "
            f"{cal.n_items} items (log-likelihood {cal.loglik:.2f})",
        ]
        humans = self.abilities[self.abilities["kind"] == "human"]
        if len(humans):
            lines.append(
                f"humans: theta mean {humans['theta'].mean():.2f}, SD {humans['theta'].std():.2f}"
            )
        mach = self.abilities[self.abilities["kind"] == "machine"]
        for row in mach.itertuples(index=False):
            tag = "pooled" if row.pooled else "seed"
            lines.append(
                f"{row.respondent} ({tag}): theta {row.theta:.2f} (SE {row.se:.2f}), "
                f"lz {row.lz:.2f}, {row.n_correct}/{row.n_items} correct"
            )
            dep = self.departures[
                (self.departures["respondent"] == row.respondent) & (self.departures["rank"] <= top)
            ]
            for drow in dep.sort_values("rank").itertuples(index=False):
                lines.append(
                    f"    {drow.item}: observed {drow.observed:.2f}, expected "
                    f"{drow.expected:.2f}, z {drow.z:.2f}"
                )
        if self.skipped_items:
            lines.append(f"uncalibrated items skipped: {len(self.skipped_items)}")
        return "\n".join(lines)


def _solver_of(respondent: str) -> str:
    m = _SEED_ID.match(respondent)
    return m.group("solver") if m else respondent


def score_on_human_scale(
    trials: pd.DataFrame,
    *,
    model: str = "2pl",
    method: str = "eap",
    pooled: bool = True,
    duplicates: str = "raise",
    **fit_options: Any,
) -> HumanScaleResult:
    """Calibrate items on human respondents, then score every machine respondent on that scale.

    Parameters
    ----------
    trials : pandas.DataFrame
        Tidy trials with columns ``respondent``, ``kind``, ``item``, ``correct``; optionally
        ``solver``. Without a ``solver`` column a machine's solver name is read from its
        respondent id ``<solver>-s<seed>`` (the trial-log convention), else the id itself.
    model : {"2pl", "1pl", "rasch"}, default "2pl"
        Calibration model (fitted on ``kind == "human"`` rows only).
    method : {"eap", "mle"}, default "eap"
        Ability scoring; see :func:`score_abilities`.
    pooled : bool, default True
        Also score each solver with all its seeds pooled (each seed's answer to an item counts
        as one more observation of that item).
    duplicates : {"raise", "first", "last"}, default "raise"
        Passed to :func:`response_matrix`.
    **fit_options
        Passed to :func:`fit_irt` (``quadrature_points``, ``tol``...).

    Returns
    -------
    HumanScaleResult
        ``calibration``, ``abilities`` (humans and machines) and ``departures``.

    Notes
    -----
    For a pooled solver with ``n_j`` answers to item ``j`` of which ``r_j`` are correct, the
    likelihood is ``prod_j p_j^r_j (1 - p_j)^(n_j - r_j)``; ability, SE and ``lz`` use it. A
    departure is ``z_j = (r_j - n_j p_j) / sqrt(n_j p_j (1 - p_j))`` at the machine's ability.
    """
    check_choice("method", method, ("eap", "mle"))
    human = response_matrix(trials, kind="human", duplicates=duplicates)
    if human.shape[0] == 0:
        raise fail(
            "trials",
            "no rows with kind == 'human'",
            "a trials table with human respondents to calibrate on",
        )
    cal = fit_irt(human, model=model, **fit_options)
    a, d = cal.a, cal.d
    human_ab = cal.abilities if method == "eap" else score_abilities(cal, human, method=method)
    human_ab = human_ab.assign(kind="human", solver=human_ab["respondent"], pooled=False)

    machine = response_matrix(trials, kind="machine", duplicates=duplicates)
    names = set(cal.item_names)
    skipped = tuple(c for c in machine.columns if c not in names)
    machine = machine.reindex(columns=cal.item_names)
    X, Mk = _split(machine.to_numpy(dtype=np.float64))
    keep = _seen(Mk, 1) > 0
    if not keep.all():
        unscored = [str(r) for r in machine.index[~keep]]
        warnings.warn(
            f"{len(unscored)} machine respondent(s) answered no calibrated item and are not "
            f"scored: {', '.join(unscored[:10])}",
            DegenerateWarning,
            stacklevel=2,
        )
    X, Mk = X[keep], Mk[keep]
    ids = [str(r) for r in machine.index[keep]]
    if "solver" in trials.columns:
        lookup = (
            trials[trials["kind"] == "machine"]
            .drop_duplicates("respondent")
            .set_index("respondent")["solver"]
            .astype(str)
        )
        solvers = [lookup.get(r, _solver_of(r)) for r in ids]
    else:
        solvers = [_solver_of(r) for r in ids]
    rows_X, rows_M, labels, solver_col, pooled_col = (
        [X],
        [Mk],
        list(ids),
        list(solvers),
        [False] * len(ids),
    )
    if pooled and ids:
        for s in sorted(set(solvers)):
            sel = np.array([v == s for v in solvers])
            rows_X.append(X[sel].sum(0, keepdims=True))
            rows_M.append(Mk[sel].sum(0, keepdims=True))
            labels.append(s)
            solver_col.append(s)
            pooled_col.append(True)
    XX, MM = np.vstack(rows_X), np.vstack(rows_M)
    if XX.shape[0]:
        theta, se = _scores(XX, MM, a, d, method)
        if method == "mle":
            _warn_extreme(theta)
    else:
        theta = se = np.empty(0)
    mach_ab = _ability_table(labels, theta, se, method, XX, MM, a, d).assign(
        kind="machine", solver=solver_col, pooled=pooled_col
    )
    abilities = pd.concat([human_ab, mach_ab], ignore_index=True)

    # departures from what each machine's ability predicts
    t = np.where(np.isfinite(theta), theta, np.nan)
    p = expit(np.outer(t, a) + d)
    with np.errstate(invalid="ignore", divide="ignore"):
        obs = XX / MM
        z = (XX - MM * p) / np.sqrt(MM * p * (1 - p))
    r_idx, j_idx = np.nonzero(MM > 0)
    dep = pd.DataFrame(
        {
            "respondent": np.asarray(labels, dtype=object)[r_idx],
            "solver": np.asarray(solver_col, dtype=object)[r_idx],
            "pooled": np.asarray(pooled_col, dtype=bool)[r_idx],
            "item": np.asarray(cal.item_names, dtype=object)[j_idx],
            "n": MM[r_idx, j_idx].astype(np.int64),
            "observed": obs[r_idx, j_idx],
            "expected": p[r_idx, j_idx],
            "residual": obs[r_idx, j_idx] - p[r_idx, j_idx],
            "z": z[r_idx, j_idx],
        }
    )
    dep["rank"] = (
        dep["z"]
        .abs()
        .groupby([dep["respondent"], dep["pooled"]])
        .rank(ascending=False, method="first")
        .astype("Int64")
    )
    dep = dep.sort_values(["pooled", "respondent", "rank"], kind="stable").reset_index(drop=True)
    return HumanScaleResult(
        calibration=cal, abilities=abilities, departures=dep, skipped_items=skipped
    )
