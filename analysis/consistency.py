"""Error consistency: do two respondents err on the same trials beyond what chance predicts?

Pair agreement is computed with array operations over a respondent x item correctness matrix
``C`` (1 = correct) and its mask ``M`` (1 = answered): for a block of rows, the shared item counts
are ``M_b M'``, both right ``C_b C'``, the row respondent right on shared items ``C_b M'`` and the
column respondent right ``M_b C'``. Blocks hold at most ``max_cells`` pairs, so memory is bounded
by the block size, not by the number of pairs.

Pairs that involve a machine (human-machine and machine-machine) are few and are returned row by
row; the human-human pairs grow with the square of the number of people, so by default they are
summarised (count, mean, SD, median, central quantiles: the human ceiling) while they stream past,
and written row by row only when asked (``human_pairs="all"``).
"""

from __future__ import annotations

import dataclasses
import warnings
from collections.abc import Iterator, Sequence
from typing import Literal

import numpy as np
import pandas as pd
from twofold.study.checks import check_choice, check_int, check_number, fail
from twofold.study.exceptions import DegenerateWarning

from .data import check_columns

__all__ = [
    "CONSISTENCY_COLUMNS",
    "CONSISTENCY_SUMMARY_COLUMNS",
    "consistency_tables",
    "error_consistency",
    "error_consistency_distribution",
    "error_consistency_kappa",
    "error_consistency_summary",
]

CONSISTENCY_COLUMNS = (
    "respondent_a",
    "respondent_b",
    "kind_a",
    "kind_b",
    "group_a",
    "group_b",
    "pair_type",
    "n_items",
    "p_a",
    "p_b",
    "observed",
    "expected",
    "kappa",
)
CONSISTENCY_SUMMARY_COLUMNS = (
    "group_a",
    "group_b",
    "pair_type",
    "n_pairs",
    "n_defined",
    "mean",
    "sd",
    "median",
    "q_low",
    "q_high",
    "conf_level",
    "quantiles",
)


def error_consistency_kappa(
    a: Sequence[bool] | np.ndarray, b: Sequence[bool] | np.ndarray
) -> float:
    """Error consistency of two correct/incorrect vectors over the same trials.

    Parameters
    ----------
    a, b : array-like of bool, shape (n,)
        Whether each observer answered each shared item correctly.

    Returns
    -------
    float
        ``kappa = (c_obs - c_exp) / (1 - c_exp)`` with ``c_obs`` the share of items where both
        are right or both wrong and ``c_exp = p_a p_b + (1 - p_a)(1 - p_b)``. NaN with a
        :class:`DegenerateWarning` when undefined (``c_exp = 1``: both always right or both
        always wrong; or no items) — never 0.

    References
    ----------
    Geirhos, R., Meding, K., & Wichmann, F. A. (2020). Beyond accuracy: quantifying trial-by-trial
    behaviour of CNNs and humans by measuring error consistency. NeurIPS 33.
    """
    x = np.asarray(a, dtype=bool)
    y = np.asarray(b, dtype=bool)
    if x.shape != y.shape or x.ndim != 1:
        raise fail("b", f"shape {y.shape}", f"a 1-d vector of the shape of a {x.shape}")
    if x.size == 0:
        warnings.warn("error consistency of no items is undefined; NaN.", DegenerateWarning, 2)
        return float("nan")
    obs = float(np.mean(x == y))
    p1, p2 = x.mean(), y.mean()
    exp = p1 * p2 + (1 - p1) * (1 - p2)
    if exp >= 1:
        warnings.warn(
            "error consistency is undefined when both observers are always right or both always "
            "wrong (expected agreement 1); NaN.",
            DegenerateWarning,
            stacklevel=2,
        )
        return float("nan")
    return float((obs - exp) / (1 - exp))


#: pairs per block of the matrix products (about 8 MB per float32 block matrix)
MAX_CELLS = 1 << 21
#: kappas kept exactly per group pair before the summary switches to a histogram
EXACT_LIMIT = 2_000_000
#: histogram bins over [-1, 1] once the exact limit is passed (width 2 / 65536 = 3.1e-5)
N_BINS = 1 << 16
_PAIR_TYPES = np.array(["human-human", "human-machine", "machine-machine"], dtype=object)


@dataclasses.dataclass(frozen=True)
class _Matrix:
    """Respondents (machines first, then people, each sorted by id) and their item matrices."""

    respondents: np.ndarray
    kinds: np.ndarray
    groups: np.ndarray  # group label per respondent
    group_code: np.ndarray  # people's group first (0), then machine groups alphabetically
    group_names: list[str]
    n_machines: int
    corr: np.ndarray  # float32 (respondents, items), 1 = correct
    mask: np.ndarray  # float32 (respondents, items), 1 = answered


def _matrix(trials: pd.DataFrame, respondents: Sequence[str] | None) -> _Matrix:
    check_columns(trials, ["respondent", "kind", "group", "item", "correct"])
    s = trials.loc[trials["correct"].notna(), ["respondent", "kind", "group", "item", "correct"]]
    if respondents is not None:
        s = s.loc[s["respondent"].isin(list(respondents))]
    s = s.drop_duplicates(["respondent", "item"], keep="first")
    info = s.groupby("respondent", sort=True, observed=True)[["kind", "group"]].first()
    info = info.assign(_m=(info["kind"] != "machine").astype(int))
    info = info.reset_index().sort_values(["_m", "respondent"], kind="stable")
    resp = info["respondent"].astype(str).to_numpy()
    kinds = info["kind"].astype(str).to_numpy()
    groups = info["group"].astype(str).to_numpy()
    human_groups = sorted(set(groups[kinds == "human"]))
    names = human_groups + sorted(set(groups) - set(human_groups))
    code = pd.Categorical(groups, categories=names).codes.astype(np.int64)
    r_code = pd.Categorical(s["respondent"].astype(str), categories=resp).codes
    i_code, _ = pd.factorize(s["item"], sort=True)
    n_items = int(i_code.max()) + 1 if len(i_code) else 0
    mask = np.zeros((len(resp), n_items), dtype=np.float32)
    corr = np.zeros((len(resp), n_items), dtype=np.float32)
    mask[r_code, i_code] = 1.0
    corr[r_code, i_code] = s["correct"].astype(bool).to_numpy(np.float32)
    return _Matrix(
        respondents=resp,
        kinds=kinds,
        groups=groups,
        group_code=code,
        group_names=names,
        n_machines=int((kinds == "machine").sum()),
        corr=corr,
        mask=mask,
    )


@dataclasses.dataclass
class _Block:
    """The pairs ``(i, j)``, ``i < j``, of a block of rows and their counts (1-d arrays)."""

    i: np.ndarray
    j: np.ndarray
    n: np.ndarray  # shared items
    a_right: np.ndarray  # i right on the shared items
    b_right: np.ndarray  # j right on the shared items
    both_right: np.ndarray


def _blocks(mat: _Matrix, start: int, stop: int, max_cells: int) -> Iterator[_Block]:
    """Every pair with its first member in ``[start, stop)`` and its second after it."""
    n_resp = len(mat.respondents)
    step = max(1, max_cells // max(n_resp, 1))
    ct = np.ascontiguousarray(mat.corr.T)
    mt = np.ascontiguousarray(mat.mask.T)
    for s in range(start, stop, step):
        e = min(s + step, stop)
        if s + 1 >= n_resp:
            break
        cb, mb = mat.corr[s:e], mat.mask[s:e]
        # columns s+1 ... end; row b (respondent s+b) pairs with column c (respondent s+1+c)
        # when c >= b
        upper = np.arange(n_resp - s - 1)[None, :] >= np.arange(e - s)[:, None]
        rows, cols = np.nonzero(upper)
        yield _Block(
            i=rows + s,
            j=cols + s + 1,
            n=(mb @ mt[:, s + 1 :])[upper],
            a_right=(cb @ mt[:, s + 1 :])[upper],
            b_right=(mb @ ct[:, s + 1 :])[upper],
            both_right=(cb @ ct[:, s + 1 :])[upper],
        )


def _kappa(b: _Block, min_items: int) -> tuple[np.ndarray, ...]:
    """(p_a, p_b, observed, expected, kappa, few, undefined) of the block's pairs."""
    nn = b.n.astype(np.float64)
    ar, br, bb = (x.astype(np.float64) for x in (b.a_right, b.b_right, b.both_right))
    with np.errstate(invalid="ignore", divide="ignore"):
        obs = (2 * bb + nn - ar - br) / nn  # both right + both wrong
        pa, pb = ar / nn, br / nn
        exp = pa * pb + (1 - pa) * (1 - pb)
        kappa = (obs - exp) / (1 - exp)
    few = nn < min_items
    undefined = (~few) & (exp >= 1 - 1e-12)
    kappa = np.where(few | undefined, np.nan, kappa)
    return pa, pb, obs, exp, kappa, few, undefined


class _Tally:
    """Running count, mean, M2 and values (exact, then binned) of one group pair's kappas."""

    def __init__(self, exact_limit: int) -> None:
        self.exact_limit = exact_limit
        self.n_pairs = 0
        self.n = 0
        self.mean = 0.0
        self.m2 = 0.0
        self.values: list[np.ndarray] | None = []
        self.hist: np.ndarray | None = None

    def add(self, k: np.ndarray, n_pairs: int) -> None:
        self.n_pairs += n_pairs
        if k.size == 0:
            return
        # Chan et al. (1979): combine the block's mean and sum of squares with the running ones
        mb = float(k.mean())
        m2b = float(((k - mb) ** 2).sum())
        n = self.n + k.size
        delta = mb - self.mean
        self.m2 += m2b + delta**2 * self.n * k.size / n
        self.mean += delta * k.size / n
        self.n = n
        if self.values is not None:
            self.values.append(k.astype(np.float64))
            if self.n > self.exact_limit:
                self.hist = np.zeros(N_BINS, dtype=np.int64)
                for v in self.values:
                    self._bin(v)
                self.values = None
        else:
            self._bin(k)

    def _bin(self, k: np.ndarray) -> None:
        assert self.hist is not None
        idx = np.clip(((k + 1.0) * (N_BINS / 2)).astype(np.int64), 0, N_BINS - 1)
        self.hist += np.bincount(idx, minlength=N_BINS)

    def quantiles(self, q: Sequence[float]) -> tuple[np.ndarray, str]:
        if self.n == 0:
            return np.full(len(q), np.nan), "exact"
        if self.values is not None:
            return np.quantile(np.concatenate(self.values), q), "exact"
        assert self.hist is not None
        # numpy's default: interpolate linearly between the order statistics at ranks
        # floor(h) and floor(h) + 1, h = q (n - 1); each is read as the centre of its bin
        cum = np.cumsum(self.hist)
        width = 2.0 / N_BINS

        def order_stat(r: int) -> float:
            return -1.0 + width * (int(np.searchsorted(cum, r, side="right")) + 0.5)

        out = []
        for p in q:
            h = p * (self.n - 1)
            lo = int(np.floor(h))
            v = order_stat(lo)
            if lo + 1 < self.n:
                v += (h - lo) * (order_stat(lo + 1) - v)
            out.append(v)
        return np.asarray(out), "binned"


def consistency_tables(
    trials: pd.DataFrame,
    *,
    min_items: int = 10,
    respondents: Sequence[str] | None = None,
    human_pairs: Literal["summary", "all"] = "summary",
    conf_level: float = 0.95,
    max_cells: int = MAX_CELLS,
    exact_limit: int = EXACT_LIMIT,
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Pair rows and the per-group-pair summary of error consistency in one pass.

    The work behind :func:`error_consistency` (the first table) and
    :func:`error_consistency_distribution` (the second); see those for the parameters and
    columns. One :class:`DegenerateWarning` counts the undefined pairs over all pairs.
    """
    check_choice("human_pairs", human_pairs, ("summary", "all"))
    min_items = check_int("min_items", min_items, low=1)
    level = check_number("conf_level", conf_level, low=0.5, high=0.999999)
    max_cells = check_int("max_cells", max_cells, low=1)
    exact_limit = check_int("exact_limit", exact_limit, low=0)
    mat = _matrix(trials, respondents)
    n_resp = len(mat.respondents)
    n_groups = len(mat.group_names)
    tallies: dict[int, _Tally] = {}
    parts: list[dict[str, np.ndarray]] = []
    n_few = n_undefined = 0
    # rows after the machines are people; one key per block unless people come in groups
    mixed_people = len(set(mat.group_code[mat.n_machines :].tolist())) > 1
    # rows [0, n_machines) pair with everyone after them: exactly the pairs with a machine
    ranges = [(0, mat.n_machines, True), (mat.n_machines, n_resp, human_pairs == "all")]
    for start, stop, keep_rows in ranges:
        for blk in _blocks(mat, start, stop, max_cells):
            pa, pb, obs, exp, kappa, few, undefined = _kappa(blk, min_items)
            n_few += int(few.sum())
            n_undefined += int(undefined.sum())
            ga, gb = mat.group_code[blk.i], mat.group_code[blk.j]
            key = np.minimum(ga, gb) * n_groups + np.maximum(ga, gb)
            keys = np.unique(key) if start < mat.n_machines or mixed_people else key[:1]
            for k in keys:
                sel = key == k if keys.size > 1 else slice(None)
                vals = kappa[sel]
                tally = tallies.setdefault(int(k), _Tally(exact_limit))
                tally.add(vals[np.isfinite(vals)], int(np.size(vals)))
            if keep_rows:
                parts.append(
                    dict(i=blk.i, j=blk.j, n=blk.n, pa=pa, pb=pb, obs=obs, exp=exp, kappa=kappa)
                )
    if n_few or n_undefined:
        warnings.warn(
            f"error_consistency: {n_undefined} pairs undefined (both always right or "
            f"both always wrong) and {n_few} pairs sharing fewer than {min_items} items; "
            "their kappa is NaN.",
            DegenerateWarning,
            stacklevel=3,
        )
    return _pair_rows(mat, parts), _summary_rows(mat, tallies, level)


def _pair_rows(mat: _Matrix, parts: list[dict[str, np.ndarray]]) -> pd.DataFrame:
    if not parts:
        return pd.DataFrame({c: pd.Series(dtype=object) for c in CONSISTENCY_COLUMNS})
    cat = {k: np.concatenate([p[k] for p in parts]) for k in parts[0]}
    i, j = cat["i"], cat["j"]
    # a human (then the alphabetically first group) on side a
    human = mat.kinds == "human"
    swap = (~human[i] & human[j]) | ((human[i] == human[j]) & (mat.groups[i] > mat.groups[j]))
    i, j = np.where(swap, j, i), np.where(swap, i, j)
    pa, pb = np.where(swap, cat["pb"], cat["pa"]), np.where(swap, cat["pa"], cat["pb"])
    n_machine = (~human[i]).astype(int) + (~human[j]).astype(int)
    return pd.DataFrame(
        {
            "respondent_a": mat.respondents[i],
            "respondent_b": mat.respondents[j],
            "kind_a": mat.kinds[i],
            "kind_b": mat.kinds[j],
            "group_a": mat.groups[i],
            "group_b": mat.groups[j],
            "pair_type": _PAIR_TYPES[n_machine],
            "n_items": cat["n"].astype(np.int64),
            "p_a": pa,
            "p_b": pb,
            "observed": cat["obs"],
            "expected": cat["exp"],
            "kappa": cat["kappa"],
        },
        columns=list(CONSISTENCY_COLUMNS),
    )


def _summary_rows(mat: _Matrix, tallies: dict[int, _Tally], level: float) -> pd.DataFrame:
    g = len(mat.group_names)
    is_human_group = {
        c: name in set(mat.groups[mat.kinds == "human"]) for c, name in enumerate(mat.group_names)
    }
    lo, hi = (1 - level) / 2, 1 - (1 - level) / 2
    rows = []
    for key in sorted(tallies):
        a, b = divmod(key, g)
        t = tallies[key]
        n_machine = int(not is_human_group[a]) + int(not is_human_group[b])
        (q_lo, med, q_hi), how = t.quantiles([lo, 0.5, hi])
        rows.append(
            dict(
                group_a=mat.group_names[a],
                group_b=mat.group_names[b],
                pair_type=_PAIR_TYPES[n_machine],
                n_pairs=t.n_pairs,
                n_defined=t.n,
                mean=t.mean if t.n else np.nan,
                sd=float(np.sqrt(t.m2 / (t.n - 1))) if t.n > 1 else np.nan,
                median=med,
                q_low=q_lo,
                q_high=q_hi,
                conf_level=level,
                quantiles=how,
            )
        )
    out = pd.DataFrame(rows, columns=list(CONSISTENCY_SUMMARY_COLUMNS))
    return _order_summary(out)


def _order_summary(out: pd.DataFrame) -> pd.DataFrame:
    order = out["pair_type"].map({"human-human": 0, "human-machine": 1, "machine-machine": 2})
    out = out.assign(_o=order).sort_values(["_o", "group_a", "group_b"], kind="stable")
    return out.drop(columns="_o").reset_index(drop=True)


def error_consistency(
    trials: pd.DataFrame,
    *,
    min_items: int = 10,
    respondents: Sequence[str] | None = None,
    human_pairs: Literal["summary", "all"] = "summary",
    max_cells: int = MAX_CELLS,
) -> pd.DataFrame:
    """Error consistency (Geirhos et al. 2020) of respondent pairs on their shared items.

    Parameters
    ----------
    trials : pandas.DataFrame
        A tidy trials table; scored trials are used, the first answer per respondent and item.
    min_items : int, default 10
        Pairs sharing fewer scored items get NaN (counted in the warning).
    respondents : sequence of str, optional
        Restrict to these respondents.
    human_pairs : {"summary", "all"}, default "summary"
        ``"summary"`` returns only the pairs involving a machine (their number grows linearly
        with the number of people); the human-human distribution is summarised by
        :func:`error_consistency_distribution`. ``"all"`` also returns every human-human pair
        (their number grows with the square of the number of people).
    max_cells : int, default 2**21
        Pairs per block of the matrix products (bounds the working memory).

    Returns
    -------
    pandas.DataFrame
        One row per unordered pair; columns :data:`CONSISTENCY_COLUMNS`. ``pair_type`` is
        ``human-human``, ``human-machine`` or ``machine-machine``; a human (then the
        alphabetically first group) is on side a; ``p_a``/``p_b`` are the two accuracies on the
        shared items, ``observed``/``expected`` the agreement shares, and ``kappa`` the error
        consistency (NaN when undefined, with one :class:`DegenerateWarning` giving the count).

    Notes
    -----
    For a pair with ``n`` shared items, ``a``/``b`` right answers of each on them and ``r``
    items both answered right: ``observed = (2 r + n - a - b) / n``, ``expected = p_a p_b +
    (1 - p_a)(1 - p_b)`` with ``p_a = a / n``, ``kappa = (observed - expected) / (1 -
    expected)``. The counts of all pairs come from the products in the module docstring.

    References
    ----------
    Geirhos, R., Meding, K., & Wichmann, F. A. (2020). Beyond accuracy: quantifying trial-by-trial
    behaviour of CNNs and humans by measuring error consistency. NeurIPS 33.
    """
    pairs, _ = consistency_tables(
        trials,
        min_items=min_items,
        respondents=respondents,
        human_pairs=human_pairs,
        max_cells=max_cells,
    )
    return pairs


def error_consistency_distribution(
    trials: pd.DataFrame,
    *,
    min_items: int = 10,
    respondents: Sequence[str] | None = None,
    conf_level: float = 0.95,
    max_cells: int = MAX_CELLS,
    exact_limit: int = EXACT_LIMIT,
) -> pd.DataFrame:
    """Distribution of error consistency per group pair over all respondent pairs, streamed.

    Like :func:`error_consistency_summary` applied to ``error_consistency(trials,
    human_pairs="all")``, without ever holding every pair: the human-human row is the ceiling.

    Parameters
    ----------
    trials : pandas.DataFrame
    min_items : int, default 10
    respondents : sequence of str, optional
    conf_level : float, default 0.95
        Coverage of the central quantile range ``q_low``-``q_high`` of the pairs' kappas.
    max_cells : int, default 2**21
        Pairs per block of the matrix products.
    exact_limit : int, default 2,000,000
        Per group pair, kappas are kept for exact quantiles up to this many defined pairs;
        beyond it they go into a histogram of 65,536 bins over [-1, 1] and the median and
        quantiles are read from it (each order statistic as its bin's centre: within half a bin
        width, 1.5e-5, of the exact values).

    Returns
    -------
    pandas.DataFrame
        Columns :data:`CONSISTENCY_SUMMARY_COLUMNS`, one row per (group_a, group_b), human-human
        first; ``n_pairs`` counts all pairs, ``n_defined`` those with a defined kappa, the
        statistics are over the defined ones; ``quantiles`` is ``"exact"`` or ``"binned"``.
        ``mean`` and ``sd`` are exact either way (block means and sums of squares combined as
        in Chan, Golub & LeVeque 1979).
    """
    _, summary = consistency_tables(
        trials,
        min_items=min_items,
        respondents=respondents,
        human_pairs="summary",
        conf_level=conf_level,
        max_cells=max_cells,
        exact_limit=exact_limit,
    )
    return summary


def error_consistency_summary(pairs: pd.DataFrame, *, conf_level: float = 0.95) -> pd.DataFrame:
    """Distribution of error consistency per group pair; the human-human row is the ceiling.

    Parameters
    ----------
    pairs : pandas.DataFrame
        Output of :func:`error_consistency`.
    conf_level : float, default 0.95
        Coverage of the central quantile range ``q_low``-``q_high`` of the pairs' kappas.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`CONSISTENCY_SUMMARY_COLUMNS`, one row per (group_a, group_b); ``n_pairs``
        counts all pairs, ``n_defined`` those with a defined kappa; statistics over the defined.
    """
    check_columns(pairs, ["group_a", "group_b", "pair_type", "kappa"], name="pairs")
    level = check_number("conf_level", conf_level, low=0.5, high=0.999999)
    rows = []
    lo, hi = (1 - level) / 2, 1 - (1 - level) / 2
    for (ga, gb), sub in pairs.groupby(["group_a", "group_b"], sort=True):
        k = sub["kappa"].to_numpy(float)
        k = k[np.isfinite(k)]
        rows.append(
            dict(
                group_a=ga,
                group_b=gb,
                pair_type=sub["pair_type"].iloc[0],
                n_pairs=len(sub),
                n_defined=k.size,
                mean=k.mean() if k.size else np.nan,
                sd=k.std(ddof=1) if k.size > 1 else np.nan,
                median=np.median(k) if k.size else np.nan,
                q_low=np.quantile(k, lo) if k.size else np.nan,
                q_high=np.quantile(k, hi) if k.size else np.nan,
                conf_level=level,
                quantiles="exact",
            )
        )
    return _order_summary(pd.DataFrame(rows, columns=list(CONSISTENCY_SUMMARY_COLUMNS)))
