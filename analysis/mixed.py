"""Mixed-effects models of accuracy and (log) response time with crossed random effects.

Two fitting functions take a formula and a trials-like DataFrame:

* :func:`fit_glmm` — logistic mixed model (binary outcome) with crossed random intercepts, fitted
  by variational Bayes (statsmodels ``BinomialBayesMixedGLM.fit_vb``; the MAP fit shrinks the
  variances badly and is not offered).
* :func:`fit_lmm` — linear mixed model: random intercepts for one or more grouping factors
  (crossed or nested) are fitted by profiled (RE)ML on dense cross-products (penalised least
  squares, private module ``_pls``); one grouping factor with random intercepts and slopes goes
  to statsmodels ``MixedLM``, which can also fit the intercept-only models (``engine=``).

and three study-level views over the tidy trials table: :func:`fit_accuracy`,
:func:`fit_log_time` and :func:`factor_effects` (how much each difficulty factor raises the
log-odds of an error for people and for each machine).

Every fit returns a :class:`MixedResult` with tidy tables; columns of ``fixed``:
``term, estimate, se, stat, p_val, ci_low, ci_high, conf_level``; of ``random``:
``group, term, variance, sd, corr, sd_ci_low, sd_ci_high, conf_level``.
"""

from __future__ import annotations

import dataclasses
import re
import warnings
from collections.abc import Mapping, Sequence
from typing import Any, Literal

import numpy as np
import pandas as pd
from scipy import sparse, stats
from twofold.study.checks import check_choice, check_number, fail
from twofold.study.exceptions import ConvergenceWarning, DegenerateWarning, InputError

from .data import check_columns, factor_columns, scored

__all__ = [
    "FACTOR_EFFECT_COLUMNS",
    "FIXED_COLUMNS",
    "RANDOM_COLUMNS",
    "MixedResult",
    "factor_effects",
    "fit_accuracy",
    "fit_glmm",
    "fit_lmm",
    "fit_log_time",
    "lrt",
]

FIXED_COLUMNS = (
    "term",
    "estimate",
    "se",
    "stat",
    "p_val",
    "ci_low",
    "ci_high",
    "conf_level",
    "note",
)
RANDOM_COLUMNS = (
    "group",
    "term",
    "variance",
    "sd",
    "corr",
    "sd_ci_low",
    "sd_ci_high",
    "conf_level",
    "note",
)
FACTOR_EFFECT_COLUMNS = (
    "family",
    "factor",
    "term",
    "group",
    "quantity",
    "estimate",
    "se",
    "ci_low",
    "ci_high",
    "conf_level",
    "p_val",
    "n_obs",
    "note",
)


@dataclasses.dataclass(frozen=True)
class MixedResult:
    """A fitted mixed model.

    Attributes
    ----------
    method : str
        ``"glmm_laplace"`` (logistic, Laplace ML), ``"glmm_vb"`` (variational Bayes, for
        comparison) or ``"lmm_reml"`` / ``"lmm_ml"``.
    formula : str
        The fixed-effects formula.
    random : dict
        Grouping column -> random-effects formula (``"1"`` for intercepts).
    fixed : pandas.DataFrame
        Columns :data:`FIXED_COLUMNS`. For ``glmm_vb`` the estimate is the posterior mean, ``se``
        the posterior SD and ``p_val`` the two-sided normal tail of ``estimate / se``.
    random_effects : pandas.DataFrame
        Columns :data:`RANDOM_COLUMNS`; a ``Residual`` row for linear models; covariance rows
        (term ``cov(a, b)``) carry the covariance in ``variance`` and the correlation in ``corr``.
    n_obs : int
    n_groups : dict
        Number of levels per grouping column.
    loglik : float
        Log-likelihood (REML log-likelihood for REML fits; NaN for variational Bayes).
    converged : bool
    notes : tuple of str
        Diagnostics in words (separation, singular fit, convergence, penalties) and warnings
        raised by a fitting library, in its words.
    n_params : int
        Fixed effects plus covariance parameters (plus the residual variance of linear
        models); used by ``aic``, ``bic`` and :func:`lrt`.
    raw : object
        The statsmodels results object, or for linear models fitted by penalised least squares
        a ``PLSFit`` (relative SDs ``theta``, conditional modes ``modes`` per factor, ...).
    """

    method: str
    formula: str
    random: dict[str, str]
    fixed: pd.DataFrame
    random_effects: pd.DataFrame
    n_obs: int
    n_groups: dict[str, int]
    loglik: float
    converged: bool
    notes: tuple[str, ...] = ()
    n_params: int = 0
    raw: Any = dataclasses.field(default=None, repr=False, compare=False)

    @property
    def criterion(self) -> float:
        """``-2 * loglik`` (the REML criterion for REML fits)."""
        return -2.0 * self.loglik

    @property
    def aic(self) -> float:
        """Akaike's criterion ``-2 loglik + 2 k`` (``k = n_params``)."""
        return self.criterion + 2.0 * self.n_params

    @property
    def bic(self) -> float:
        """Schwarz's criterion ``-2 loglik + k log(n_obs)``."""
        return self.criterion + self.n_params * float(np.log(self.n_obs))

    def summary(self) -> str:
        """A plain-text summary of both tables."""
        head = [
            f"{self.method}: {self.formula}",
            "random: " + " + ".join(f"({v} | {k})" for k, v in self.random.items()),
            f"observations: {self.n_obs}; "
            + ", ".join(f"{k}: {v} levels" for k, v in self.n_groups.items()),
        ]
        if np.isfinite(self.loglik):
            head.append(f"log-likelihood: {self.loglik:.3f}; criterion: {self.criterion:.3f}")
        head.append(f"converged: {'yes' if self.converged else 'no'}")
        fx = self.fixed.drop(columns=["conf_level"]).to_string(index=False, float_format="%.4g")
        rx = self.random_effects.drop(columns=["conf_level"]).to_string(
            index=False, float_format="%.4g", na_rep=""
        )
        notes = [f"note: {n}" for n in self.notes]
        return "\n".join([*head, "", "fixed effects", fx, "", "random effects", rx, *notes])

    def __str__(self) -> str:
        return self.summary()


# -- helpers -------------------------------------------------------------------------------------
_IDENT = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")


def _check_conf(conf_level: float) -> float:
    level = check_number("conf_level", conf_level, low=0.5, high=0.999999)
    return level


def _formula_columns(formula: str, data: pd.DataFrame) -> list[str]:
    return [c for c in dict.fromkeys(_IDENT.findall(formula)) if c in data.columns]


def _normalise_random(random: Mapping[str, str] | Sequence[str] | str) -> dict[str, str]:
    if isinstance(random, str):
        random = [random]
    if isinstance(random, Mapping):
        out = {str(k): str(v).strip().lstrip("~").strip() or "1" for k, v in random.items()}
    elif isinstance(random, Sequence):
        out = {str(k): "1" for k in random}
    else:
        raise fail("random", random, "a list of grouping columns or a mapping column -> formula")
    if not out:
        raise fail("random", random, "at least one grouping column")
    return out


def _prepare(
    data: pd.DataFrame,
    formula: str,
    groups: Sequence[str],
    missing: str,
) -> pd.DataFrame:
    check_choice("missing", missing, ("raise", "drop"))
    if not isinstance(data, pd.DataFrame):
        raise fail("data", type(data).__name__, "a pandas DataFrame")
    if "~" not in formula:
        raise fail("formula", formula, "a two-sided formula 'outcome ~ terms'")
    absent = [g for g in groups if g not in data.columns]
    if absent:
        raise fail(
            "random", absent[0], "a column of data: " + ", ".join(map(str, data.columns[:12]))
        )
    cols = list(dict.fromkeys(_formula_columns(formula, data) + list(groups)))
    sub = data[cols]
    bad = sub.isna().any(axis=1)
    if bad.any():
        if missing == "raise":
            col = next(c for c in cols if sub[c].isna().any())
            raise InputError(
                f"field '{col}': {int(sub[col].isna().sum())} missing values; accepted: no "
                "missing values, or pass missing='drop' to leave those rows out.",
                field=col,
            )
        data = data.loc[~bad]
    return data.reset_index(drop=True)


#: note on a fixed effect that is a linear combination of earlier columns of the design
ALIASED_NOTE = "aliased: a combination of the terms before it in these data; not estimated"


def _drop_aliased(x: pd.DataFrame) -> tuple[pd.DataFrame, list[str]]:
    """Keep the fixed-effect columns that add to the rank of the design, in formula order.

    A column is dropped when it is (numerically) a linear combination of the columns kept before
    it — the rule of R's pivoted QR in ``lm`` and of lme4, which report such coefficients as not
    estimable. Uses the Gram matrix, so the cost is one ``p x p`` pass after ``X'X``.
    """
    xa = x.to_numpy(dtype=float)
    if xa.shape[1] == 0:
        return x, []
    scale = np.sqrt((xa * xa).sum(axis=0))
    scale[scale == 0] = 1.0
    g = (xa / scale).T @ (xa / scale)
    kept: list[int] = []
    for j in range(g.shape[0]):
        if kept:
            gk = g[np.ix_(kept, kept)]
            b = np.linalg.solve(gk, g[kept, j])
            resid = g[j, j] - g[j, kept] @ b
        else:
            resid = g[j, j]
        if resid > 1e-9:
            kept.append(j)
    keep = set(kept)
    dropped = [c for k, c in enumerate(x.columns) if k not in keep]
    return x.iloc[:, kept], dropped


def _with_aliased(
    fixed: pd.DataFrame, names: Sequence[str], dropped: Sequence[str]
) -> pd.DataFrame:
    """The fixed table in formula order, with a NaN row and a note for each dropped column."""
    if not dropped:
        return fixed
    extra = pd.DataFrame({"term": list(dropped)})
    out = pd.concat([fixed, extra], ignore_index=True)
    out["conf_level"] = fixed["conf_level"].iloc[0] if len(fixed) else np.nan
    out.loc[out["term"].isin(dropped), "note"] = ALIASED_NOTE
    order = {n: k for k, n in enumerate(names)}
    out = out.sort_values("term", key=lambda t: t.map(order), kind="stable")
    return out.reset_index(drop=True)[list(fixed.columns)]


def _aliased_message(dropped: Sequence[str]) -> str:
    return (
        f"{len(dropped)} fixed-effect column(s) not estimable from these data (each a "
        f"combination of terms before it) and dropped, as lme4 does: {', '.join(dropped)}."
    )


def _fixed_table(names, est, se, conf_level: float) -> pd.DataFrame:
    est = np.asarray(est, dtype=float)
    se = np.asarray(se, dtype=float)
    z = stats.norm.ppf(0.5 + conf_level / 2)
    with np.errstate(divide="ignore", invalid="ignore"):
        stat = est / se
    p = 2 * stats.norm.sf(np.abs(stat))
    return pd.DataFrame(
        {
            "term": list(names),
            "estimate": est,
            "se": se,
            "stat": stat,
            "p_val": p,
            "ci_low": est - z * se,
            "ci_high": est + z * se,
            "conf_level": conf_level,
            "note": "",
        },
        columns=list(FIXED_COLUMNS),
    )


def _collect(caught: list[warnings.WarningMessage]) -> tuple[str, ...]:
    out = []
    for w in caught:
        text = " ".join(str(w.message).split())
        if text not in out:
            out.append(text)
    return tuple(out)


# -- logistic GLMM -------------------------------------------------------------------------------
def fit_glmm(
    data: pd.DataFrame,
    formula: str,
    *,
    random: Sequence[str] | Mapping[str, str] = ("respondent", "item"),
    trials: str | None = None,
    method: Literal["laplace", "vb"] = "laplace",
    conf_level: float = 0.95,
    missing: Literal["raise", "drop"] = "raise",
    sd_intervals: Literal["wald", "profile"] = "wald",
    fixed_prior_sd: float | None = None,
    prior_sd_fixed: float = 2.0,
    prior_sd_log_sd: float = 1.0,
) -> MixedResult:
    """Logistic mixed model with crossed random effects, by Laplace maximum likelihood.

    Parameters
    ----------
    data : pandas.DataFrame
        One row per binary observation, or per cell of successes out of ``trials``.
    formula : str
        ``"outcome ~ terms"`` (patsy syntax); the outcome is 0/1 (or boolean) with both values
        present, or with ``trials`` the number of successes (0 .. trials).
    random : sequence of str or mapping, default ("respondent", "item")
        Grouping columns with random intercepts (crossed), or a mapping column -> random
        formula: ``{"respondent": "1", "item": "1 + kind"}`` adds a by-item slope of ``kind``
        correlated with the item intercept (``method="laplace"`` only).
    trials : str, optional
        Column holding the number of trials of each row (outcome = successes).
    method : {"laplace", "vb"}, default "laplace"
        ``"laplace"``: maximum likelihood under the Laplace approximation (below).
        ``"vb"``: statsmodels' mean-field variational Bayes, kept for comparison only — its
        intervals are far too narrow (the 95 % interval of a between-respondent effect covered
        the truth in about half of simulated data sets).
    conf_level : float, default 0.95
    missing : {"raise", "drop"}, default "raise"
        What to do with rows missing a value in a used column.
    sd_intervals : {"wald", "profile"}, default "wald"
        Intervals of the random-effect SDs: Wald on the log-SD scale from the observed
        information (fast), or profile-likelihood intervals for every SD, intercepts and slopes
        (one constrained fit per step of a root search: tens of fits per SD).
    fixed_prior_sd : float, optional
        If given, a normal penalty ``beta_j^2 / fixed_prior_sd^2`` on every non-intercept fixed
        effect (a weakly informative prior in the sense of Gelman et al. 2008): estimates stay
        finite under separation. Off unless asked for; the notes say when it was used.
    prior_sd_fixed, prior_sd_log_sd : float
        ``method="vb"`` only: prior SDs of the fixed effects and of the log random-effect SDs.

    Returns
    -------
    MixedResult
        ``method="glmm_laplace"`` (or ``"glmm_vb"``). ``loglik`` is the Laplace log-likelihood
        (with binomial coefficients, as lme4 prints it); ``aic``/``bic`` count fixed effects
        and covariance parameters. ``notes`` and the ``note`` columns report separation,
        singular (boundary) fits and non-convergence in words.

    Notes
    -----
    The model is ``logit P(y=1) = X beta + Z b``, ``b ~ N(0, G)`` with one covariance block per
    grouping column. For each ``(theta, beta)`` penalised iteratively reweighted least squares
    finds the conditional modes of the random effects; the Laplace approximation of the
    marginal likelihood is maximised over ``theta`` (the relative Cholesky factors of ``G``)
    and ``beta`` in two stages as lme4 does, with analytic gradients (implicit differentiation
    of the conditional modes). Fixed-effect SEs come from the observed information (Hessian of
    the deviance over ``(theta, beta)`` by differences of the analytic gradient); intervals are
    Wald. A nearly singular information (a flat ridge, e.g. a correlation at -1) is reported in
    the notes and the SEs are then conditional on the covariance estimates.
    Separation is detected with a linear programme (Konis 2007); separated terms get infinite
    intervals and a note instead of a misleading finite interval. Singular fits (an SD at zero)
    are flagged. Cost: linear in observations and in the levels of the largest grouping
    column; cubic in the levels (times terms) of the others (see ``_design``).

    References
    ----------
    Bates, D., Mächler, M., Bolker, B., & Walker, S. (2015). Fitting linear mixed-effects models
    using lme4. J. Stat. Softw. 67(1). doi:10.18637/jss.v067.i01
    Gelman, A., Jakulin, A., Pittau, M. G., & Su, Y.-S. (2008). A weakly informative default
    prior distribution for logistic and other regression models. Ann. Appl. Stat. 2(4).
    """
    import patsy

    level = _check_conf(conf_level)
    check_choice("method", method, ("laplace", "vb"))
    check_choice("sd_intervals", sd_intervals, ("wald", "profile"))
    if fixed_prior_sd is not None:
        check_number("fixed_prior_sd", fixed_prior_sd, low=1e-6, high=1e6)
    rnd = _normalise_random(random)
    if method == "vb":
        for g, f in rnd.items():
            if f != "1":
                raise fail(f"random[{g!r}]", f, "'1' (method='vb' fits random intercepts only)")
    extra = [trials] if trials is not None else []
    if trials is not None and trials not in data.columns:
        raise fail("trials", trials, "a column of data: " + ", ".join(map(str, data.columns[:12])))
    rnd_cols = [c for f in rnd.values() for c in _formula_columns(f, data)]
    df = _prepare(data, formula, list(dict.fromkeys([*rnd, *rnd_cols, *extra])), missing)
    lhs = formula.split("~", 1)[0].strip()
    if lhs in df.columns and (df[lhs].dtype == bool or str(df[lhs].dtype) == "boolean"):
        df = df.assign(**{lhs: df[lhs].astype(bool).astype(int)})
    try:
        y, x = patsy.dmatrices(formula, df, return_type="dataframe", NA_action="raise")
    except patsy.PatsyError as err:
        raise InputError(
            f"field 'formula': {formula!r} cannot be used: {err}", field="formula"
        ) from err
    endog = np.asarray(y).ravel().astype(float)
    m = np.ones(len(endog)) if trials is None else df[trials].to_numpy(dtype=float)
    if trials is not None:
        if (m < 1).any() or (m != np.round(m)).any():
            raise fail("trials", trials, "a column of whole numbers of trials >= 1")
        if (endog < 0).any() or (endog > m).any() or (endog != np.round(endog)).any():
            raise fail("formula", formula, f"a count of successes between 0 and {trials!r}")
        if endog.sum() == 0 or endog.sum() == m.sum():
            raise InputError(
                f"field '{lhs}': every trial has the same outcome; accepted: successes and "
                "failures both present (a logistic model cannot be fitted otherwise).",
                field=lhs,
            )
    else:
        if not np.isin(endog, (0.0, 1.0)).all():
            raise fail("formula", formula, "a 0/1 outcome on the left of '~'")
        if endog.min() == endog.max():
            raise InputError(
                f"field '{lhs}': every value is {int(endog[0])}; accepted: a 0/1 outcome holding "
                "both values (a logistic model cannot be fitted otherwise).",
                field=lhs,
            )
    if method == "laplace":
        return _fit_glmm_laplace(df, x, endog, m, formula, rnd, level, sd_intervals, fixed_prior_sd)
    if trials is not None:
        raise fail("trials", trials, "None with method='vb' (0/1 rows only)")
    return _fit_glmm_vb(df, x, endog, formula, rnd, level, prior_sd_fixed, prior_sd_log_sd)


def _fit_glmm_vb(df, x, endog, formula, rnd, level, prior_sd_fixed, prior_sd_log_sd):
    """statsmodels ``BinomialBayesMixedGLM.fit_vb`` (kept for comparison only)."""
    from statsmodels.genmod.bayes_mixed_glm import BinomialBayesMixedGLM

    blocks, ident, n_groups = [], [], {}
    vc_names: list[str] = []
    for j, g in enumerate(rnd):
        codes, levels = pd.factorize(df[g], sort=True)
        n_groups[g] = len(levels)
        m = sparse.csr_array(
            (np.ones(len(df)), (np.arange(len(df)), codes)), shape=(len(df), len(levels))
        )
        blocks.append(m)
        ident.append(np.full(len(levels), j, dtype=np.int_))
        vc_names.extend(f"{g}[{lv}]" for lv in levels)
    exog_vc = sparse.hstack(blocks, format="csr")
    model = BinomialBayesMixedGLM(
        endog,
        np.asarray(x, dtype=float),
        exog_vc,
        np.concatenate(ident),
        vcp_p=prior_sd_log_sd,
        fe_p=prior_sd_fixed,
        fep_names=list(x.columns),
        vcp_names=list(rnd),
        vc_names=vc_names,
    )
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        res = model.fit_vb()
    notes = _collect(caught)
    converged = bool(getattr(res, "optim_retvals", None) is None or res.optim_retvals.success)
    if not converged:
        warnings.warn(
            f"fit_glmm: the variational fit of {formula!r} stopped before converging "
            f"({res.optim_retvals.message}).",
            ConvergenceWarning,
            stacklevel=2,
        )
    fixed = _fixed_table(x.columns, res.fe_mean, res.fe_sd, level)
    z = stats.norm.ppf(0.5 + level / 2)
    lsd, lsd_se = np.asarray(res.vcp_mean), np.asarray(res.vcp_sd)
    rand = pd.DataFrame(
        {
            "group": list(rnd),
            "term": "Intercept",
            "variance": np.exp(2 * lsd),
            "sd": np.exp(lsd),
            "corr": np.nan,
            "sd_ci_low": np.exp(lsd - z * lsd_se),
            "sd_ci_high": np.exp(lsd + z * lsd_se),
            "conf_level": level,
            "note": "",
        },
        columns=list(RANDOM_COLUMNS),
    )
    return MixedResult(
        method="glmm_vb",
        formula=formula,
        random=rnd,
        fixed=fixed,
        random_effects=rand,
        n_obs=len(df),
        n_groups=n_groups,
        loglik=float("nan"),
        converged=converged,
        notes=notes,
        raw=res,
    )


def _random_factors(df: pd.DataFrame, rnd: dict[str, str]) -> tuple[list[Any], dict[str, int]]:
    """One :class:`._design.Factor` per grouping column (its random formula's model matrix)."""
    import patsy

    from ._design import Factor

    factors, n_groups = [], {}
    for g, f in rnd.items():
        codes, levels = pd.factorize(df[g], sort=True)
        n_groups[g] = len(levels)
        try:
            zx = patsy.dmatrix(f, df, return_type="dataframe", NA_action="raise")
        except patsy.PatsyError as err:
            raise fail(f"random[{g!r}]", f, f"a formula over the data's columns ({err})") from err
        factors.append(
            Factor(
                g,
                codes.astype(np.int64),
                len(levels),
                zx.to_numpy(dtype=float),
                [_re_name(c) for c in zx.columns],
            )
        )
    return factors, n_groups


def _fit_glmm_laplace(df, x, endog, m, formula, rnd, level, sd_intervals, fixed_prior_sd):
    """Laplace ML (private modules ``_design`` and ``_laplace``)."""
    from . import _laplace as lp
    from ._design import RandomDesign
    from ._pls import _blas_limit

    factors, n_groups = _random_factors(df, rnd)
    all_names = list(x.columns)
    x, aliased = _drop_aliased(x)
    names = list(x.columns)
    xa = x.to_numpy(dtype=float)
    penalty = None
    if fixed_prior_sd is not None:
        penalty = np.array([0.0 if n == "Intercept" else fixed_prior_sd**-2.0 for n in names])
    design = RandomDesign(factors)
    try:
        model = lp.LaplaceModel(xa, endog, m, design, penalty)
    except lp.NotIdentifiedError as err:
        raise InputError(
            f"field 'formula': the logistic mixed model could not be fitted ({err}); "
            "accepted: a model whose fixed effects are identifiable from the data.",
            field="formula",
        ) from err
    direction = lp.separation(xa, endog, m)
    with _blas_limit(design.qc):
        fit = lp.fit_laplace(model)
    notes: list[str] = []
    se = np.sqrt(np.diag(fit.cov_beta))
    fixed = _fixed_table(names, fit.beta, se, level)
    if direction is not None:
        terms = [n for n, dj in zip(names, direction, strict=True) if dj != 0]
        listed = ", ".join(terms)
        if penalty is None:
            notes.append(
                f"separation: the outcome is perfectly predicted along {listed} (e.g. a group "
                "with no errors); these estimates are infinite, so their intervals are "
                "unbounded. Use fixed_prior_sd to get finite, penalised estimates."
            )
            sep = fixed["term"].isin(terms)
            fixed.loc[sep, ["se", "ci_high"]] = np.inf
            fixed.loc[sep, "ci_low"] = -np.inf
            fixed.loc[sep, ["stat", "p_val"]] = np.nan
            fixed.loc[sep, "note"] = "separation: estimate not finite"
        else:
            notes.append(
                f"separation along {listed}; estimates are finite only because of the normal "
                f"penalty with SD {fixed_prior_sd:g} on the fixed effects."
            )
            fixed.loc[fixed["term"].isin(terms), "note"] = "separation: penalised estimate"
    if fixed_prior_sd is not None:
        notes.append(
            f"fixed effects (except the intercept) penalised by a normal prior with SD "
            f"{fixed_prior_sd:g} (maximum penalised likelihood)."
        )
    if fit.se_conditional:
        notes.append(
            "the information matrix over the covariance parameters is nearly singular or not "
            "positive definite (a flat ridge, e.g. a correlation near +-1); fixed-effect SEs "
            "are conditional on "
            "the covariance estimates and SD intervals are not given."
        )
    rand = _glmm_random_table(model, fit, factors, level, sd_intervals, notes)
    if aliased:
        notes.append(_aliased_message(aliased))
        fixed = _with_aliased(fixed, all_names, aliased)
    if not fit.converged:
        notes.append(
            f"the optimiser stopped with a gradient of {fit.grad_norm:.2g}; the estimates may "
            "not be at the maximum."
        )
        warnings.warn(f"fit_glmm: {formula!r} did not converge.", ConvergenceWarning, stacklevel=3)
    return MixedResult(
        method="glmm_laplace",
        formula=formula,
        random=rnd,
        fixed=fixed,
        random_effects=rand,
        n_obs=len(df),
        n_groups=n_groups,
        loglik=-0.5 * fit.deviance if penalty is None else float("nan"),
        converged=fit.converged,
        notes=tuple(notes),
        n_params=len(names) + design.n_theta,
        raw=fit,
    )


def _glmm_random_table(model, fit, factors, level, sd_intervals, notes) -> pd.DataFrame:
    """SDs, correlations and their intervals per grouping factor (Wald on log-SD, or profile)."""
    from . import _laplace as lp

    d = model.d
    z = stats.norm.ppf(0.5 + level / 2)
    nt = d.n_theta
    free = fit.theta_free
    cov_t = fit.cov_params[: int(free.sum()), : int(free.sum())]

    def sds(theta: np.ndarray) -> np.ndarray:
        return np.concatenate([np.sqrt(np.diag(c)) for c in d.covariances(theta)])

    sd_hat = sds(fit.theta)
    jac = np.zeros((len(sd_hat), nt))
    for i in range(nt):
        e = np.zeros(nt)
        e[i] = 1e-6
        jac[:, i] = (sds(fit.theta + e) - sds(fit.theta - e)) / 2e-6
    jac = jac[:, free]
    with np.errstate(invalid="ignore", divide="ignore"):
        var_sd = np.einsum("ij,jk,ik->i", jac, cov_t, jac)
        se_log = np.sqrt(var_sd) / sd_hat
    rows: list[dict[str, Any]] = []
    pos = 0
    for f in factors:
        cov = fit.covariances[factors.index(f)]
        for j, term in enumerate(f.terms):
            sd = sd_hat[pos + j]
            with np.errstate(over="ignore"):  # an SD near 0 has an unbounded upper limit
                lo, hi = sd * np.exp(-z * se_log[pos + j]), sd * np.exp(z * se_log[pos + j])
            note = ""
            if sd < 1e-4:
                lo, hi, note = 0.0, np.nan, "singular: SD estimated at zero"
            if sd_intervals == "profile":
                lo, hi = lp.profile_interval(model, fit, factors.index(f), j, level)
            rows.append(
                dict(
                    group=f.name,
                    term=term,
                    variance=cov[j, j],
                    sd=sd,
                    corr=np.nan,
                    sd_ci_low=lo,
                    sd_ci_high=hi,
                    note=note,
                )
            )
        for a in range(f.p):
            for b in range(a + 1, f.p):
                den = np.sqrt(cov[a, a] * cov[b, b])
                corr = cov[a, b] / den if den > 0 else np.nan
                rows.append(
                    dict(
                        group=f.name,
                        term=f"cov({f.terms[a]}, {f.terms[b]})",
                        variance=cov[a, b],
                        corr=corr,
                        note="singular: correlation at +-1" if abs(corr) > 0.9999 else "",
                    )
                )
        pos += f.p
    out = pd.DataFrame(rows, columns=list(RANDOM_COLUMNS))
    out["conf_level"] = level
    out["note"] = out["note"].fillna("")
    sing = sorted(set(out.loc[out["note"].str.startswith("singular"), "group"]))
    if sing:
        notes.append(
            "singular fit: the random-effect covariance of "
            + ", ".join(repr(g) for g in sing)
            + " is on the boundary (an SD of zero or a correlation of +-1); the model is "
            "more complex than the data support."
        )
    return out


def lrt(small: MixedResult, big: MixedResult) -> pd.DataFrame:
    """Likelihood-ratio test between two nested maximum-likelihood fits.

    Parameters
    ----------
    small, big : MixedResult
        Fits of the same observations; ``small`` nested in ``big`` (fewer parameters). Both
        must be maximum likelihood (``glmm_laplace`` or ``lmm_ml``) without a penalty.

    Returns
    -------
    pandas.DataFrame
        One row: ``formula_small, formula_big, loglik_small, loglik_big, df, stat, p_val``
        with ``stat = 2 (loglik_big - loglik_small)`` referred to chi-square with ``df`` the
        difference in parameter counts. For a variance tested at zero the p-value is
        conservative (the null sits on the boundary; Self & Liang 1987).
    """
    for name, r in (("small", small), ("big", big)):
        if r.method not in ("glmm_laplace", "lmm_ml") or not np.isfinite(r.loglik):
            raise fail(name, r.method, "a maximum-likelihood fit ('glmm_laplace' or 'lmm_ml')")
    if small.n_obs != big.n_obs or small.method != big.method:
        raise fail("small", small.formula, "a fit of the same observations by the same method")
    df = big.n_params - small.n_params
    if df < 1:
        raise fail("big", big.formula, "a model with more parameters than 'small'")
    stat = max(2.0 * (big.loglik - small.loglik), 0.0)
    return pd.DataFrame(
        [
            dict(
                formula_small=small.formula,
                formula_big=big.formula,
                loglik_small=small.loglik,
                loglik_big=big.loglik,
                df=df,
                stat=stat,
                p_val=float(stats.chi2.sf(stat, df)),
            )
        ]
    )


# -- linear mixed model --------------------------------------------------------------------------
def fit_lmm(
    data: pd.DataFrame,
    formula: str,
    *,
    random: Sequence[str] | Mapping[str, str] = ("respondent", "item"),
    reml: bool = True,
    conf_level: float = 0.95,
    missing: Literal["raise", "drop"] = "raise",
    engine: Literal["auto", "pls", "statsmodels"] = "auto",
) -> MixedResult:
    """Linear mixed model: one grouping factor with random intercepts/slopes, or crossed factors.

    Parameters
    ----------
    data : pandas.DataFrame
    formula : str
        ``"outcome ~ terms"`` (patsy syntax).
    random : sequence of str or mapping, default ("respondent", "item")
        Grouping columns with random intercepts, or a mapping column -> random formula
        (``{"subject": "1 + days"}`` gives correlated random intercepts and slopes). Several
        grouping columns are crossed (or nested); each may have slopes (``engine="pls"``).
    reml : bool, default True
        Restricted maximum likelihood (else maximum likelihood).
    conf_level : float, default 0.95
    missing : {"raise", "drop"}, default "raise"
    engine : {"auto", "pls", "statsmodels"}, default "auto"
        ``"pls"`` (and ``"auto"``): profiled (RE)ML by penalised least squares on cross-products
        formed once (about a second or less for a few hundred levels whatever the number of
        trials), for random intercepts and correlated slopes on any number of grouping columns.
        ``"statsmodels"``: ``MixedLM`` as a second opinion (one grouping column with slopes, or
        crossed intercepts; slow with crossed factors: 30-60 s at 20,000 trials).

    Returns
    -------
    MixedResult
        ``method="lmm_reml"`` or ``"lmm_ml"``; ``loglik`` is the (REML) log-likelihood, so
        ``criterion`` is the REML criterion of lme4 for REML fits. Rows of ``random_effects``
        for several grouping columns come in alphabetical order of the column names, then
        ``Residual``.

    Notes
    -----
    ``y = X beta + Z b + e``, ``b ~ N(0, G)``, ``e ~ N(0, sigma^2 I)``. Fixed-effect intervals
    are Wald intervals.

    Penalised least squares (``engine="pls"``): with ``b = Lambda u``, ``u ~ N(0, sigma^2 I)`` and
    ``Lambda = diag(theta_k)`` over the levels of factor ``k``, the cross-products ``Z'Z``, ``Z'X``,
    ``Z'y``, ``X'X``, ``X'y``, ``y'y`` are formed once; for each ``theta`` the Cholesky factor
    ``L L' = Lambda Z'Z Lambda + I`` gives the penalised residual sum of squares ``r^2`` and the
    profiled criterion ``log|L|^2 + n (1 + log(2 pi r^2 / n))`` (ML) or
    ``log|L|^2 + log|R_X|^2 + (n - p)(1 + log(2 pi r^2 / (n - p)))`` (REML), minimised over
    ``theta >= 0`` by L-BFGS-B over ``theta^2`` from three starts. With random slopes
    ``Lambda`` is block diagonal with a lower-triangular ``T_k`` per level of factor ``k``
    (lme4's ``theta`` layout), the same criterion is minimised over ``theta`` (diagonal
    elements >= 0) and the covariance of factor ``k``'s effects is ``sigma^2 T_k T_k'``. Then
    ``sigma^2 = r^2 / n`` (ML) or ``r^2 / (n - p)`` (REML), the variance of factor ``k`` is
    ``sigma^2 theta_k^2`` and
    ``cov(beta) = sigma^2 (R_X' R_X)^-1``. The factor with the most levels is eliminated in closed
    form (its block is diagonal), so the dense part has the other factors' levels only: time grows
    with the cube of that count (fine to a few thousand) and linearly with trials.

    ``engine="statsmodels"`` fits crossed factors as variance components within one
    all-covering group (``MixedLM`` with ``vc_formula``).

    References
    ----------
    Bates, D., Mächler, M., Bolker, B., & Walker, S. (2015). Fitting linear mixed-effects models
    using lme4. J. Stat. Softw. 67(1), section 3 (penalised least squares).
    doi:10.18637/jss.v067.i01
    """
    from statsmodels.regression.mixed_linear_model import MixedLM

    level = _check_conf(conf_level)
    check_choice("engine", engine, ("auto", "pls", "statsmodels"))
    rnd = _normalise_random(random)
    if engine == "statsmodels" and len(rnd) > 1 and any(f != "1" for f in rnd.values()):
        raise fail(
            "random",
            dict(rnd),
            "random slopes with one grouping column only for engine 'statsmodels' (crossed "
            "columns take intercepts '1'); engine 'pls' fits slopes on crossed columns",
        )
    df = _prepare(data, formula, list(rnd), missing)
    if engine in ("pls", "auto"):
        return _fit_lmm_pls(df, formula, rnd, reml, level)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        if len(rnd) == 1:
            ((g, f),) = rnd.items()
            model = MixedLM.from_formula(formula, groups=df[g], re_formula="~" + f, data=df)
        else:
            const = np.zeros(len(df), dtype=int)
            vc = {g: f"0 + C(Q('{g}'))" for g in rnd}
            model = MixedLM.from_formula(
                formula, groups=const, vc_formula=vc, re_formula="0", data=df
            )
        res = _fit_first_converged(model, reml)
    notes = _collect(caught)
    converged = bool(res.converged)
    if not converged:
        warnings.warn(f"fit_lmm: {formula!r} did not converge.", ConvergenceWarning, stacklevel=2)
    fe = res.fe_params
    fixed = _fixed_table(fe.index, fe.values, res.bse_fe.values, level)
    rows = []
    if len(rnd) == 1:
        cov = res.cov_re
        names = list(cov.index)
        for i, a in enumerate(names):
            rows.append(
                dict(group=g, term=_re_name(a), variance=cov.iloc[i, i], sd=np.sqrt(cov.iloc[i, i]))
            )
        for i, a in enumerate(names):
            for j in range(i + 1, len(names)):
                c = cov.iloc[i, j]
                rows.append(
                    dict(
                        group=g,
                        term=f"cov({_re_name(a)}, {_re_name(names[j])})",
                        variance=c,
                        corr=c / np.sqrt(cov.iloc[i, i] * cov.iloc[j, j]),
                    )
                )
        n_groups = {g: int(df[g].nunique())}
    else:
        for name, v in zip(model.exog_vc.names, np.atleast_1d(res.vcomp), strict=True):
            rows.append(dict(group=name, term="Intercept", variance=v, sd=np.sqrt(v)))
        n_groups = {g2: int(df[g2].nunique()) for g2 in rnd}
    rows.append(dict(group="Residual", term="", variance=res.scale, sd=np.sqrt(res.scale)))
    rand = pd.DataFrame(rows, columns=list(RANDOM_COLUMNS))
    rand["note"] = ""
    rand["conf_level"] = level
    return MixedResult(
        method="lmm_reml" if reml else "lmm_ml",
        formula=formula,
        random=rnd,
        fixed=fixed,
        random_effects=rand,
        n_obs=len(df),
        n_groups=n_groups,
        loglik=float(res.llf),
        converged=converged,
        notes=notes,
        n_params=len(fe) + len(rows) - 1 + 1,
        raw=res,
    )


def _fit_lmm_pls(
    df: pd.DataFrame, formula: str, rnd: dict[str, str], reml: bool, level: float
) -> MixedResult:
    """Profiled (RE)ML by penalised least squares (module ``_pls``; ``_design`` for slopes)."""
    import patsy

    from ._design import RandomDesign
    from ._pls import NotIdentifiedError, fit_pls, fit_pls_design

    try:
        y, x = patsy.dmatrices(formula, df, return_type="dataframe", NA_action="raise")
    except patsy.PatsyError as err:
        raise InputError(
            f"field 'formula': {formula!r} cannot be used: {err}", field="formula"
        ) from err
    if y.shape[1] != 1:
        raise fail("formula", formula, "a numeric outcome on the left of '~'")
    all_names = list(x.columns)
    x, aliased = _drop_aliased(x)
    n, p = x.shape
    if n - p < 1:
        raise fail("formula", formula, f"fewer fixed-effect columns ({p}) than observations ({n})")
    slopes = any(f != "1" for f in rnd.values())
    try:
        if slopes:
            factors, n_groups = _random_factors(df, rnd)
            fit = fit_pls_design(
                x.to_numpy(dtype=float),
                y.to_numpy(dtype=float).ravel(),
                RandomDesign(factors),
                reml=reml,
            )
        else:
            codes, n_levels, n_groups = [], [], {}
            for g in rnd:
                c, lv = pd.factorize(df[g], sort=True)
                codes.append(c)
                n_levels.append(len(lv))
                n_groups[g] = len(lv)
            fit = fit_pls(
                x.to_numpy(dtype=float), y.to_numpy(dtype=float).ravel(), codes, n_levels, reml=reml
            )
    except NotIdentifiedError as err:
        raise InputError(
            f"field 'formula': the linear mixed model could not be fitted ({err}); "
            "accepted: a model whose fixed effects are identifiable from the data.",
            field="formula",
        ) from err
    if not fit.converged:
        warnings.warn(f"fit_lmm: {formula!r} did not converge.", ConvergenceWarning, stacklevel=3)
    fixed = _fixed_table(x.columns, fit.beta, np.sqrt(np.diag(fit.cov_beta)), level)
    fixed = _with_aliased(fixed, all_names, aliased)
    if slopes:
        rows = []
        by_name = {f.name: (f, c) for f, c in zip(factors, fit.covariances, strict=True)}
        for g in sorted(rnd) if len(rnd) > 1 else rnd:
            f, cov = by_name[g]
            rows += [
                dict(group=g, term=t, variance=cov[j, j], sd=np.sqrt(cov[j, j]))
                for j, t in enumerate(f.terms)
            ]
            for a in range(f.p):
                for b in range(a + 1, f.p):
                    den = np.sqrt(cov[a, a] * cov[b, b])
                    rows.append(
                        dict(
                            group=g,
                            term=f"cov({f.terms[a]}, {f.terms[b]})",
                            variance=cov[a, b],
                            corr=cov[a, b] / den if den > 0 else np.nan,
                        )
                    )
        n_theta = len(fit.theta)
    else:
        var = dict(zip(rnd, fit.variances, strict=True))
        rows = [
            dict(group=g, term="Intercept", variance=var[g], sd=np.sqrt(var[g]))
            for g in (sorted(rnd) if len(rnd) > 1 else rnd)
        ]
        n_theta = len(rnd)
    rows.append(dict(group="Residual", term="", variance=fit.sigma2, sd=np.sqrt(fit.sigma2)))
    rand = pd.DataFrame(rows, columns=list(RANDOM_COLUMNS))
    rand["note"] = ""
    rand["conf_level"] = level
    return MixedResult(
        method="lmm_reml" if reml else "lmm_ml",
        formula=formula,
        random=rnd,
        fixed=fixed,
        random_effects=rand,
        n_obs=n,
        n_groups=n_groups,
        loglik=-0.5 * fit.deviance,
        converged=fit.converged,
        notes=(_aliased_message(aliased),) if aliased else (),
        n_params=x.shape[1] + n_theta + 1,
        raw=fit,
    )


def _re_name(name: str) -> str:
    return "Intercept" if name == "Group" else name


def _fit_first_converged(model: Any, reml: bool) -> Any:
    """Try optimisers in turn (L-BFGS, BFGS, Powell); keep the first converged fit, else the best.

    statsmodels' own fallback chain can stop at a non-converged BFGS fit on crossed models.
    """
    best = None
    last_err: Exception | None = None
    for method in ("lbfgs", "bfgs", "powell"):
        try:
            res = model.fit(reml=reml, method=method)
        except (np.linalg.LinAlgError, ValueError) as err:
            last_err = err
            continue
        if res.converged:
            return res
        if best is None or res.llf > best.llf:
            best = res
    if best is None:
        raise InputError(
            f"field 'formula': the linear mixed model could not be fitted ({last_err}); "
            "accepted: a model whose fixed effects are identifiable from the data.",
            field="formula",
        ) from last_err
    return best


# -- study-level views ---------------------------------------------------------------------------
def _with_human_first(df: pd.DataFrame) -> pd.DataFrame:
    out = df.copy()
    for col in ("kind", "group"):
        if col in out.columns:
            levels = sorted(out[col].dropna().astype(str).unique(), key=lambda v: (v != "human", v))
            out[col] = pd.Categorical(out[col].astype(str), categories=levels)
    return out


def fit_accuracy(
    trials: pd.DataFrame,
    *,
    fixed: str = "kind",
    random: Sequence[str] = ("respondent", "item"),
    conf_level: float = 0.95,
    missing: Literal["raise", "drop"] = "drop",
) -> MixedResult:
    """Accuracy: logistic mixed model of ``correct`` with crossed respondent and item intercepts.

    Parameters
    ----------
    trials : pandas.DataFrame
        A tidy trials table; unscored trials (``correct`` missing) are left out.
    fixed : str, default "kind"
        Right-hand side of the fixed part over the table's columns, e.g.
        ``"group * (factor_width + factor_layout)"``. ``kind`` and ``group`` are categorical
        with ``human`` as the reference level.
    random, conf_level, missing
        See :func:`fit_glmm`.

    Returns
    -------
    MixedResult
        Estimates on the log-odds of a correct response.
    """
    check_columns(trials, ["correct", *random])
    data = _with_human_first(scored(trials))
    return fit_glmm(
        data, f"correct ~ {fixed}", random=random, conf_level=conf_level, missing=missing
    )


GAP_COLUMNS = (
    "term",
    "gap",
    "gap_ci_low",
    "gap_ci_high",
    "sd",
    "sd_ci_low",
    "sd_ci_high",
    "corr_item",
    "lrt_stat",
    "p_val",
    "n_items",
    "n_respondents",
    "conf_level",
    "note",
)


def item_gap_variation(
    trials: pd.DataFrame,
    *,
    by: Literal["kind", "group"] = "kind",
    fixed: str = "",
    conf_level: float = 0.95,
    sd_intervals: Literal["wald", "profile"] = "profile",
) -> pd.DataFrame:
    """How much the gap between machines and people varies from item to item.

    Fits the logistic mixed model ``correct ~ by + fixed`` with respondent intercepts and, per
    item, an intercept and a slope of ``by`` (correlated): ``random={"respondent": "1",
    "item": "1 + by"}``. The slope's SD is the spread, over items, of the item's own
    machine-minus-human difference in log-odds of a correct answer. An SD near zero means
    machines are behind (or ahead) by about the same amount on every item — they find the same
    items hard as people do; a large SD means the gap depends on the item, so machines fail on
    other items than people. It is the model-based counterpart of the rank correlations of
    item difficulty.

    Parameters
    ----------
    trials : pandas.DataFrame
        A tidy trials table (``correct``, ``respondent``, ``item`` and ``by``); unscored trials
        are left out.
    by : {"kind", "group"}, default "kind"
        ``"kind"``: one gap, machines against people. ``"group"``: one gap per respondent group
        against the human group (the first group in human-first order).
    fixed : str, default ""
        Further fixed terms (e.g. item factors) added to ``by``.
    conf_level : float, default 0.95
    sd_intervals : {"wald", "profile"}, default "profile"
        Intervals of the SDs (see :func:`fit_glmm`); profile intervals cover better when the
        SD is small or the number of machine respondents is.

    Returns
    -------
    pandas.DataFrame
        One row per gap term (``term``, e.g. ``kind[T.machine]``): ``gap`` (the average
        difference in log-odds, fixed effect) with ``gap_ci_low``/``gap_ci_high``; ``sd`` of the
        item-level differences with ``sd_ci_low``/``sd_ci_high``; ``corr_item`` (correlation of
        an item's difference with its intercept, i.e. with how easy the item is for people);
        ``lrt_stat`` and ``p_val`` of the likelihood-ratio test of the by-item slopes (against
        item intercepts only; the p-value uses the 50:50 mixture of chi-square distributions for
        a variance tested on its boundary, Self & Liang 1987, and is for all slopes together);
        ``n_items``, ``n_respondents``, ``conf_level`` and ``note`` (separation, singular fit or
        convergence, in words).

    Notes
    -----
    With ``d`` slope terms the test adds ``d`` variances and ``d (d + 1) / 2`` covariances
    with the intercept and among themselves; the reference distribution is the mixture
    ``0.5 chi2(k - d) + 0.5 chi2(k)`` with ``k`` the number of added parameters (Stram & Lee
    1994, Biometrics 50(4), for one slope).

    References
    ----------
    Baayen, R. H., Davidson, D. J., & Bates, D. M. (2008). Mixed-effects modeling with crossed
    random effects for subjects and items. J. Mem. Lang. 59(4), 390-412.
    """
    check_choice("by", by, ("kind", "group"))
    check_choice("sd_intervals", sd_intervals, ("wald", "profile"))
    check_columns(trials, ["correct", "respondent", "item", by])
    data = _with_human_first(scored(trials))
    rhs = " + ".join([by, *([fixed] if fixed.strip() else [])])
    formula = f"correct ~ {rhs}"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        big = fit_glmm(
            data,
            formula,
            random={"respondent": "1", "item": f"1 + {by}"},
            conf_level=conf_level,
            missing="drop",
        )
        small = fit_glmm(
            data, formula, random=["respondent", "item"], conf_level=conf_level, missing="drop"
        )
    fx = big.fixed.set_index("term")
    rnd = big.random_effects
    item = rnd[rnd["group"] == "item"].set_index("term")
    gaps = [t for t in item.index if t != "Intercept" and not t.startswith("cov(")]
    k = big.n_params - small.n_params
    if np.isfinite(big.loglik) and np.isfinite(small.loglik):
        stat = max(2.0 * (big.loglik - small.loglik), 0.0)
        p = 0.5 * float(stats.chi2.sf(stat, k - len(gaps))) + 0.5 * float(stats.chi2.sf(stat, k))
    else:
        stat, p = np.nan, np.nan
    if sd_intervals == "profile" and big.method == "glmm_laplace":
        from . import _laplace as lp

        fit = big.raw
        terms = list(item.index)
        for t in gaps:
            item.loc[t, ["sd_ci_low", "sd_ci_high"]] = lp.profile_interval(
                fit.model, fit, 1, terms.index(t), conf_level
            )
    rows = []
    for t in gaps:
        cov = item.loc[f"cov(Intercept, {t})"] if f"cov(Intercept, {t})" in item.index else None
        cov_note = "" if cov is None else cov["note"]
        notes = [n for n in (fx.loc[t, "note"], item.loc[t, "note"], cov_note) if n]
        if not big.converged:
            notes.append("did not converge")
        rows.append(
            dict(
                term=t,
                gap=fx.loc[t, "estimate"],
                gap_ci_low=fx.loc[t, "ci_low"],
                gap_ci_high=fx.loc[t, "ci_high"],
                sd=item.loc[t, "sd"],
                sd_ci_low=item.loc[t, "sd_ci_low"],
                sd_ci_high=item.loc[t, "sd_ci_high"],
                corr_item=np.nan if cov is None else cov["corr"],
                lrt_stat=stat,
                p_val=p,
                n_items=big.n_groups["item"],
                n_respondents=big.n_groups["respondent"],
                conf_level=conf_level,
                note="; ".join(notes),
            )
        )
    return pd.DataFrame(rows, columns=list(GAP_COLUMNS))


def fit_log_time(
    trials: pd.DataFrame,
    *,
    measure: Literal["rt", "effort"] = "rt",
    fixed: str = "1",
    random: Sequence[str] = ("respondent", "item"),
    reml: bool = True,
    conf_level: float = 0.95,
    correct_only: bool = False,
    engine: Literal["auto", "pls", "statsmodels"] = "auto",
) -> MixedResult:
    """Log response time of people (or log effort of machines) with crossed random intercepts.

    Parameters
    ----------
    trials : pandas.DataFrame
        A tidy trials table.
    measure : {"rt", "effort"}, default "rt"
        ``"rt"``: ``log_rt = log(rt_ms)`` over human trials; ``"effort"``:
        ``log_effort = log(effort)`` over machine trials. Rows without a positive value are
        left out.
    fixed : str, default "1"
        Right-hand side of the fixed part, e.g. ``"factor_width + correct"``.
    correct_only : bool, default False
        Keep only correctly answered trials.
    engine : {"auto", "pls", "statsmodels"}, default "auto"
        Fitting engine, see :func:`fit_lmm` (random intercepts only, so ``"auto"`` is the fast
        penalised least squares).

    Returns
    -------
    MixedResult
    """
    check_choice("measure", measure, ("rt", "effort"))
    col, kind, out = (
        ("rt_ms", "human", "log_rt") if measure == "rt" else ("effort", "machine", "log_effort")
    )
    check_columns(trials, [col, "kind", *random])
    sub = trials.loc[(trials["kind"] == kind) & (trials[col] > 0)].copy()
    if correct_only:
        sub = sub.loc[sub["correct"].fillna(False).astype(bool)]
    if "correct" in sub.columns:
        sub["correct"] = sub["correct"].astype("Float64").astype(float)
    if sub.empty:
        raise InputError(
            f"field 'trials': no {kind} trials with a positive {col}; accepted: a trials table "
            f"holding {kind} trials with {col} recorded.",
            field="trials",
        )
    sub[out] = np.log(sub[col].astype(float))
    sub = _with_human_first(sub)
    return fit_lmm(
        sub,
        f"{out} ~ {fixed}",
        random=random,
        reml=reml,
        conf_level=conf_level,
        missing="drop",
        engine=engine,
    )


def _factor_design(sub: pd.DataFrame, factors: list[str]) -> tuple[list[str], dict[str, str]]:
    """Formula terms for the factors and a map term-name prefix -> factor."""
    terms, owner = [], {}
    for f in factors:
        vals = sub[f]
        if pd.api.types.is_numeric_dtype(vals):
            sub[f] = vals.astype(float) - float(vals.astype(float).mean())
            terms.append(f)
            owner[f] = f
        else:
            levels = sorted(vals.astype(str).unique())
            sub[f] = pd.Categorical(vals.astype(str), categories=levels)
            terms.append(f)
            owner[f] = f
    return terms, owner


def factor_effects(
    trials: pd.DataFrame,
    *,
    factors: Sequence[str] | None = None,
    by: Literal["group", "kind"] = "group",
    conf_level: float = 0.95,
    random: Sequence[str] = ("respondent", "item"),
) -> pd.DataFrame:
    """How much each difficulty factor raises the log-odds of an error, for people and machines.

    Per item family, fits ``error ~ by * (factor_1 + factor_2 + ...)`` (logistic, crossed random
    intercepts for respondents and items; :func:`fit_glmm`) with ``human`` as the reference
    level, and reports each factor term's effect within every group and its difference from the
    human effect (the interaction term).

    Parameters
    ----------
    trials : pandas.DataFrame
        A tidy trials table with ``factor_`` columns.
    factors : sequence of str, optional
        Factor columns to use (default: every ``factor_`` column with at least two values within
        the family). Numeric factors are centred and enter linearly (effect per unit);
        others enter as treatment-coded categories (effect of a level vs the first level).
    by : {"group", "kind"}, default "group"
    conf_level : float, default 0.95
    random : sequence of str, default ("respondent", "item")

    Returns
    -------
    pandas.DataFrame
        Columns :data:`FACTOR_EFFECT_COLUMNS`. ``quantity`` is ``"effect"`` (the term's
        change in the log-odds of an error within ``group``; positive = harder) or
        ``"difference"`` (that effect minus the human effect; ``p_val`` tests it against 0).
        ``term`` is the factor name for numeric factors or ``factor[level]``.

    Notes
    -----
    The effect in a non-reference group is ``beta_term + beta_term:group``; its SE is
    ``sqrt(var_term + var_interaction + 2 cov)`` from the fit's covariance of the estimates.
    Fits are Laplace ML (:func:`fit_glmm`); ``note`` carries the fit's separation note for the
    affected rows (their intervals are then unbounded).
    """
    check_choice("by", by, ("group", "kind"))
    level = _check_conf(conf_level)
    check_columns(trials, ["correct", "family", by, *random])
    data = scored(trials)
    data["error"] = 1 - data["correct"]
    rows: list[dict[str, Any]] = []
    z = stats.norm.ppf(0.5 + level / 2)
    for fam, sub in data.groupby("family", sort=True):
        cand = list(factors) if factors is not None else factor_columns(sub)
        bad = [f for f in cand if f not in sub.columns]
        if bad:
            raise fail("factors", bad[0], "factor columns: " + ", ".join(factor_columns(data)))
        use = [f for f in cand if sub[f].notna().all() and sub[f].nunique() > 1]
        groups = sorted(sub[by].astype(str).unique(), key=lambda v: (v != "human", v))
        if not use or "human" not in groups or sub["error"].nunique() < 2:
            warnings.warn(
                f"factor_effects: family {fam!r} skipped (needs human trials, both outcomes and "
                "a factor with two or more values).",
                DegenerateWarning,
                stacklevel=2,
            )
            continue
        sub = sub.copy()
        sub[by] = pd.Categorical(sub[by].astype(str), categories=groups)
        terms, _ = _factor_design(sub, use)
        formula = f"error ~ {by} * ({' + '.join(terms)})"
        res = fit_glmm(sub, formula, random=random, conf_level=level)
        fx = res.fixed.set_index("term")
        tag = f"{by}[T."
        for name in fx.index:
            if name == "Intercept" or ":" in name or name.startswith(tag):
                continue
            factor = next(f for f in use if name == f or name.startswith(f + "["))
            term = name if name == factor else f"{factor}[{name.split('[T.', 1)[1]}"
            base = fx.loc[name]
            rows.append(
                _effect_row(
                    fam,
                    factor,
                    term,
                    "human",
                    "effect",
                    base["estimate"],
                    base["se"],
                    z,
                    level,
                    res.n_obs,
                    base["note"],
                )
            )
            for g in groups[1:]:
                inter = f"{tag}{g}]:{name}"
                if inter not in fx.index:
                    continue
                it = fx.loc[inter]
                est = base["estimate"] + it["estimate"]
                se = _sum_se(res, name, inter)
                both = "; ".join(dict.fromkeys(v for v in (base["note"], it["note"]) if v))
                rows.append(
                    _effect_row(fam, factor, term, g, "effect", est, se, z, level, res.n_obs, both)
                )
                rows.append(
                    _effect_row(
                        fam,
                        factor,
                        term,
                        g,
                        "difference",
                        it["estimate"],
                        it["se"],
                        z,
                        level,
                        res.n_obs,
                        it["note"],
                    )
                )
    return pd.DataFrame(rows, columns=list(FACTOR_EFFECT_COLUMNS))


def _sum_se(res: MixedResult, a: str, b: str) -> float:
    """SE of the sum of two fixed effects, with their covariance when the fit gives it."""
    fx = res.fixed.set_index("term")
    cov = getattr(res.raw, "cov_beta", None)
    sa, sb = float(fx.loc[a, "se"]), float(fx.loc[b, "se"])
    if cov is None or not (np.isfinite(sa) and np.isfinite(sb)):
        return float(np.hypot(sa, sb))
    terms = list(res.fixed.loc[res.fixed["note"] != ALIASED_NOTE, "term"])  # cov_beta's order
    i, j = terms.index(a), terms.index(b)
    return float(np.sqrt(max(cov[i, i] + cov[j, j] + 2 * cov[i, j], 0.0)))


def _effect_row(
    fam, factor, term, group, quantity, est, se, z, level, n, note=""
) -> dict[str, Any]:
    est, se = float(est), float(se)
    return dict(
        family=fam,
        factor=factor,
        term=term,
        group=group,
        quantity=quantity,
        estimate=est,
        se=se,
        ci_low=est - z * se,
        ci_high=est + z * se,
        conf_level=level,
        p_val=float(2 * stats.norm.sf(abs(est / se))) if 0 < se < np.inf else float("nan"),
        n_obs=n,
        note=note,
    )
