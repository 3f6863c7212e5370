"""Tidy data: every session log of a study and its bank in one trials table.

The trials table has one row per trial and these columns (in order), followed by one
``factor_<name>`` column per difficulty factor found on the bank's items (in the order the
items store them; numeric factors as float64, others as text, ``"true"``/``"false"`` for
booleans; missing for items of families without that factor):

============== ========= =====================================================================
column         dtype     meaning
============== ========= =====================================================================
study          object    study name
respondent     object    respondent id (``P001``; machines ``<solver>-s<seed>``)
kind           object    ``human`` or ``machine``
group          object    ``human`` for people, the solver name for machines
session        object    session id
seed           Int64     the machine session's seed (missing for people)
synthetic      boolean   true for simulated respondents
form           object    form id
block          object    block name
trial          Int64     0-based trial index within the session
item           object    item id
family         object    item family
mode           object    response mode (``generate`` / ``select``)
response       object    the response as canonical JSON (missing when none)
correct        boolean   whether the response is correct (missing when not scored)
error_type     object    the family's error type of a wrong response
status         object    ``ok``, ``timeout``, ``invalid`` or ``failed``
rt_ms          float64   response time in ms (people)
effort         float64   machine effort in ``effort_unit``
effort_unit    object    unit of effort
variant_of     object    the item's parent id for isomorphs (missing for parents)
variant_operator object  the operator that made an isomorph
parent         object    the root parent id (an item's own id when it is a parent)
isomorph       bool      true when the item is an isomorph (``variant_of`` set)
session_status object    the session's status from its sidecar (``complete``, ``aborted``...)
source         object    the log file the row came from (relative to the logs folder)
============== ========= =====================================================================
"""

from __future__ import annotations

import dataclasses
import re
import warnings
from collections.abc import Iterable, Sequence
from pathlib import Path
from typing import Any, Literal

import numpy as np
import pandas as pd
from twofold.study._check import check_choice, fail
from twofold.study.bank import Bank
from twofold.study.exceptions import InputError, LogError, LogWarning
from twofold.study.logs import read_sidecar, read_trials
from twofold.study.studyfile import Study, load_study

__all__ = [
    "BASE_COLUMNS",
    "ISSUE_COLUMNS",
    "SESSION_COLUMNS",
    "StudyData",
    "check_columns",
    "factor_columns",
    "item_table",
    "load_study_data",
    "read_logs",
    "scored",
]

BASE_COLUMNS: tuple[str, ...] = (
    "study",
    "respondent",
    "kind",
    "group",
    "session",
    "seed",
    "synthetic",
    "form",
    "block",
    "trial",
    "item",
    "family",
    "mode",
    "response",
    "correct",
    "error_type",
    "status",
    "rt_ms",
    "effort",
    "effort_unit",
    "variant_of",
    "variant_operator",
    "parent",
    "isomorph",
    "session_status",
    "source",
)

#: columns of :attr:`StudyData.sessions`
SESSION_COLUMNS: tuple[str, ...] = (
    "session",
    "respondent",
    "kind",
    "group",
    "seed",
    "synthetic",
    "status",
    "n_trials_expected",
    "n_rows",
    "n_trials",
    "n_duplicates",
    "n_missing",
    "source",
)

#: columns of :attr:`StudyData.issues`
ISSUE_COLUMNS: tuple[str, ...] = ("source", "session", "issue", "n", "detail")

_SEED_SUFFIX = re.compile(r"^(?P<name>.+)-s(?P<seed>\d+)$")


@dataclasses.dataclass(frozen=True)
class StudyData:
    """A study's tidy data.

    Attributes
    ----------
    trials : pandas.DataFrame
        One row per trial; columns in the module docstring.
    sessions : pandas.DataFrame
        One row per session log; columns :data:`SESSION_COLUMNS`.
    issues : pandas.DataFrame
        Duplicate, missing and unexpected trials found while reading; columns
        :data:`ISSUE_COLUMNS` (``issue`` is ``duplicate_trial``, ``duplicate_item``,
        ``missing_trials`` or ``extra_trials``).
    bank : Bank
        The study's bank.
    study : str
        The study name.
    """

    trials: pd.DataFrame
    sessions: pd.DataFrame
    issues: pd.DataFrame
    bank: Bank
    study: str

    def summary(self) -> str:
        """A few lines: respondents per kind and group, trials, issues."""
        t = self.trials
        lines = [f"study {self.study}: {len(t)} trials in {len(self.sessions)} sessions"]
        if len(t):
            by = t.groupby(["kind", "group"], sort=True)["respondent"].nunique()
            for (kind, group), n in by.items():
                syn = t.loc[(t["kind"] == kind) & (t["group"] == group), "synthetic"].any()
                lines.append(
                    f"  {kind:<8}{group:<24}{n:>5} respondents" + (" (synthetic)" if syn else "")
                )
        lines.append(
            f"  items answered: {t['item'].nunique() if len(t) else 0} of {len(self.bank)}"
        )
        if len(self.issues):
            for issue, n in self.issues.groupby("issue")["n"].sum().items():
                lines.append(f"  {issue}: {int(n)}")
        return "\n".join(lines)


def factor_columns(trials: pd.DataFrame) -> list[str]:
    """The ``factor_`` columns of a trials table, in order."""
    return [c for c in trials.columns if c.startswith("factor_")]


def scored(trials: pd.DataFrame) -> pd.DataFrame:
    """The trials with a scored response (``correct`` not missing), ``correct`` as 0/1 ints."""
    out = trials.loc[trials["correct"].notna()].copy()
    out["correct"] = out["correct"].astype(bool).astype(int)
    return out


def _factor_value(value: Any) -> Any:
    if isinstance(value, bool):
        return str(value).lower()
    return value


def item_table(bank: Bank) -> pd.DataFrame:
    """One row per bank item: ``item, family, variant_of, variant_operator, parent, isomorph``
    and ``factor_<name>`` columns (numbers stay numbers; booleans become ``"true"/"false"``).
    """
    by_id = {it.id: it for it in bank.items}

    def root(item_id: str) -> str:
        cur, seen = by_id[item_id], {item_id}
        while cur.variant_of is not None:
            if cur.variant_of not in by_id or cur.variant_of in seen:
                return cur.variant_of
            seen.add(cur.variant_of)
            cur = by_id[cur.variant_of]
        return cur.id

    rows = []
    names: list[str] = []
    for it in bank.items:
        for k in it.factors:
            if k not in names:
                names.append(k)
    for it in bank.items:
        row: dict[str, Any] = {
            "item": it.id,
            "family": it.family,
            "variant_of": it.variant_of,
            "variant_operator": it.variant_operator,
            "parent": root(it.id) if it.variant_of else it.id,
            "isomorph": it.variant_of is not None,
        }
        for k in names:
            row[f"factor_{k}"] = _factor_value(it.factors.get(k))
        rows.append(row)
    cols = ["item", "family", "variant_of", "variant_operator", "parent", "isomorph"]
    df = pd.DataFrame(rows, columns=cols + [f"factor_{k}" for k in names])
    for c in [f"factor_{k}" for k in names]:
        vals = df[c].dropna()
        if len(vals) and all(isinstance(v, int | float) and not isinstance(v, bool) for v in vals):
            df[c] = pd.to_numeric(df[c]).astype("float64")
        else:
            df[c] = df[c].astype(object)
    return df


def _group_of(side: dict[str, Any], respondent: str, kind: str) -> tuple[str, Any]:
    if kind == "human":
        return "human", pd.NA
    seed = side.get("seed")
    name = side.get("solver")
    m = _SEED_SUFFIX.match(respondent)
    if name is None:
        name = m.group("name") if m else respondent
    if seed is None and m:
        seed = int(m.group("seed"))
    if isinstance(seed, bool) or not isinstance(seed, int | type(None)):
        seed = None
    return str(name), (pd.NA if seed is None else int(seed))


def _log_files(logs_dir: Path) -> list[Path]:
    # only declared session logs: frame-interval files and a lab's own CSVs are not sessions
    from twofold.study.logs import session_logs

    return session_logs(logs_dir)


def read_logs(
    logs_dir: str | Path,
    bank: Bank,
    *,
    duplicates: Literal["first", "raise", "keep"] = "first",
    synthetic: Literal["keep", "drop", "only"] = "keep",
    files: Sequence[str | Path] | None = None,
) -> StudyData:
    """Read every session log under ``logs_dir`` into a tidy trials table.

    Parameters
    ----------
    logs_dir : path
        The study's logs folder (holding ``human/`` and ``machine/``).
    bank : Bank
        The bank the logs were collected on; every log's bank hash must equal ``bank.hash``.
    duplicates : {"first", "raise", "keep"}, default "first"
        What to do with a trial index logged twice in a session (a resumed session may repeat
        one): keep the first row, raise :class:`LogError`, or keep every row. Either way the
        duplicates are counted in ``issues`` and a :class:`LogWarning` is issued.
    synthetic : {"keep", "drop", "only"}, default "keep"
        Keep simulated respondents (marked in ``synthetic``), drop them, or keep only them.
    files : sequence of paths, optional
        Read these log files instead of every ``*.csv`` under ``logs_dir``.

    Returns
    -------
    StudyData

    Raises
    ------
    LogError
        A log whose bank hash differs from the bank's (the message names the file), a row naming
        an item the bank does not hold, a sidecar whose session or kind disagrees with its rows.
    """
    check_choice("duplicates", duplicates, ("first", "raise", "keep"))
    check_choice("synthetic", synthetic, ("keep", "drop", "only"))
    root = Path(logs_dir)
    paths = [Path(f) for f in files] if files is not None else _log_files(root)
    items = item_table(bank)
    frames: list[pd.DataFrame] = []
    sessions: list[dict[str, Any]] = []
    issues: list[dict[str, Any]] = []
    study_name = ""
    for path in paths:
        try:
            rel = str(path.relative_to(root))
        except ValueError:
            rel = str(path)
        side = read_sidecar(path.with_suffix(".json"))
        df = read_trials(path)
        _check_hash(rel, side, df, bank)
        if len(df) == 0:
            session = str(side.get("session") or path.stem)
            respondent = str(side.get("respondent") or session)
            kind = str(side.get("kind") or path.parent.name)
        else:
            session = str(df["session"].iloc[0])
            respondent = str(df["respondent"].iloc[0])
            kind = str(df["kind"].iloc[0])
            for col in ("session", "respondent", "kind"):
                vals = set(df[col].dropna().astype(str))
                if len(vals) > 1:
                    raise LogError(
                        f"{rel}: column '{col}' holds {len(vals)} values "
                        f"({', '.join(sorted(vals)[:3])}); one session per log file.",
                        where=rel,
                        field=col,
                    )
            for col, val in (("session", session), ("kind", kind)):
                sval = side.get(col)
                if sval is not None and str(sval) != val:
                    raise LogError(
                        f"{rel}: sidecar field '{col}': got {sval!r}; the rows say {val!r}.",
                        where=rel,
                        field=col,
                    )
        is_syn = bool(side.get("synthetic", False)) or bool(df["synthetic"].fillna(False).any())
        if (synthetic == "drop" and is_syn) or (synthetic == "only" and not is_syn):
            continue
        study_name = study_name or str(
            side.get("study") or (df["study"].iloc[0] if len(df) else "")
        )
        group, seed = _group_of(side, respondent, kind)
        unknown = sorted(set(df["item"]) - set(items["item"]))
        if unknown:
            raise LogError(
                f"{rel}: field 'item': got {unknown[0]!r}; accepted: an item id of the bank "
                f"({len(unknown)} unknown item ids in this log).",
                where=rel,
                field="item",
            )
        n_rows = len(df)
        dup_trial = df["trial"].duplicated(keep="first")
        if dup_trial.any():
            n = int(dup_trial.sum())
            issues.append(
                dict(
                    source=rel,
                    session=session,
                    issue="duplicate_trial",
                    n=n,
                    detail="trial index logged again: "
                    + ", ".join(map(str, df.loc[dup_trial, "trial"].unique()[:5])),
                )
            )
            if duplicates == "raise":
                raise LogError(
                    f"{rel}: trial {df.loc[dup_trial, 'trial'].iloc[0]} is logged {n + 1} "
                    "times or more; pass duplicates='first' to keep the first row.",
                    where=rel,
                    field="trial",
                )
            if duplicates == "first":
                df = df.loc[~dup_trial]
        dup_item = df["item"].duplicated(keep="first") & ~df["trial"].duplicated(keep="first")
        if dup_item.any():
            issues.append(
                dict(
                    source=rel,
                    session=session,
                    issue="duplicate_item",
                    n=int(dup_item.sum()),
                    detail="item presented again under another trial index: "
                    + ", ".join(df.loc[dup_item, "item"].unique()[:3]),
                )
            )
        expected = side.get("n_trials")
        n_unique = int(df["trial"].nunique())
        n_missing = 0
        if isinstance(expected, int) and not isinstance(expected, bool):
            present = set(int(t) for t in df["trial"].dropna())
            if expected > n_unique:
                n_missing = expected - len(present & set(range(expected)))
                issues.append(
                    dict(
                        source=rel,
                        session=session,
                        issue="missing_trials",
                        n=n_missing,
                        detail=f"sidecar n_trials={expected}; {n_unique} trials logged "
                        f"(session status {side.get('status', 'unknown')})",
                    )
                )
            elif n_unique > expected:
                issues.append(
                    dict(
                        source=rel,
                        session=session,
                        issue="extra_trials",
                        n=n_unique - expected,
                        detail=f"sidecar n_trials={expected}; {n_unique} trials logged",
                    )
                )
        sessions.append(
            dict(
                session=session,
                respondent=respondent,
                kind=kind,
                group=group,
                seed=seed,
                synthetic=is_syn,
                status=side.get("status"),
                n_trials_expected=expected if isinstance(expected, int) else pd.NA,
                n_rows=n_rows,
                n_trials=len(df),
                n_duplicates=n_rows - n_unique,
                n_missing=n_missing,
                source=rel,
            )
        )
        df = df.drop(columns=["bank_hash", "family", "onset_s", "response_s", "detail"])
        df["group"] = group
        df["seed"] = seed
        df["session_status"] = side.get("status")
        df["source"] = rel
        df["synthetic"] = df["synthetic"].fillna(is_syn)
        frames.append(df)
    trials = _assemble(frames, items)
    sess = pd.DataFrame(sessions, columns=list(SESSION_COLUMNS))
    sess["seed"] = sess["seed"].astype("Int64")
    sess["n_trials_expected"] = sess["n_trials_expected"].astype("Int64")
    iss = pd.DataFrame(issues, columns=list(ISSUE_COLUMNS))
    if len(iss):
        counts = iss.groupby("issue")["n"].sum()
        warnings.warn(
            "trial logs: "
            + "; ".join(f"{int(n)} {k.replace('_', ' ')}" for k, n in counts.items())
            + " (see StudyData.issues)",
            LogWarning,
            stacklevel=2,
        )
    return StudyData(
        trials=trials, sessions=sess, issues=iss, bank=bank, study=study_name or "unnamed"
    )


def _check_hash(rel: str, side: dict[str, Any], df: pd.DataFrame, bank: Bank) -> None:
    found: set[str] = set(df["bank_hash"].dropna().astype(str)) if len(df) else set()
    if side.get("bank_hash") is not None:
        found.add(str(side["bank_hash"]))
    bad = sorted(found - {bank.hash})
    if bad:
        raise LogError(
            f"{rel}: field 'bank_hash': got {bad[0][:16]}…; accepted: {bank.hash[:16]}… (the "
            "study's bank). This log was collected on a different bank; analyse it with that "
            "bank or move it out of the logs folder.",
            where=rel,
            field="bank_hash",
        )


def _assemble(frames: list[pd.DataFrame], items: pd.DataFrame) -> pd.DataFrame:
    factors = [c for c in items.columns if c.startswith("factor_")]
    cols = list(BASE_COLUMNS) + factors
    if not frames:
        empty = pd.DataFrame({c: pd.Series(dtype=object) for c in cols})
        return empty
    df = pd.concat(frames, ignore_index=True)
    df = df.merge(items, on="item", how="left", validate="many_to_one")
    df["seed"] = df["seed"].astype("Int64")
    df["synthetic"] = df["synthetic"].astype("boolean")
    df["isomorph"] = df["isomorph"].astype(bool)
    df = df[cols]
    return df.sort_values(["kind", "group", "session", "trial"], kind="stable").reset_index(
        drop=True
    )


def load_study_data(
    study: Study | str | Path,
    *,
    bank: Bank | None = None,
    duplicates: Literal["first", "raise", "keep"] = "first",
    synthetic: Literal["keep", "drop", "only"] = "keep",
) -> StudyData:
    """Load every session log of a study with its bank into tidy tables.

    Parameters
    ----------
    study : Study or path
        A loaded study or the path of its ``study.toml`` (or folder).
    bank : Bank, optional
        The bank; by default the study's bank folder is loaded (never generated here).
    duplicates, synthetic
        See :func:`read_logs`.

    Returns
    -------
    StudyData
    """
    st = study if isinstance(study, Study) else load_study(study)
    if bank is None:
        bank = st.bank(create=False)
    if not _log_files(st.logs_dir):
        raise LogError(
            f"{st.logs_dir}: no session logs found; accepted: a logs folder holding "
            "human/<session>.csv or machine/<session>.csv files (run sessions first).",
            where=str(st.logs_dir),
        )
    data = read_logs(st.logs_dir, bank, duplicates=duplicates, synthetic=synthetic)
    return dataclasses.replace(data, study=st.name)


def check_columns(trials: Any, required: Iterable[str], *, name: str = "trials") -> pd.DataFrame:
    """Check that ``trials`` is a DataFrame holding ``required`` columns; return it."""
    if not isinstance(trials, pd.DataFrame):
        raise fail(name, type(trials).__name__, "a pandas DataFrame (a trials table)")
    missing = [c for c in required if c not in trials.columns]
    if missing:
        raise InputError(
            f"field '{name}': missing column(s) {', '.join(missing)}; accepted: a trials table "
            "as made by twofold.analysis.load_study_data (columns respondent, kind, group, "
            "item, correct...).",
            field=name,
        )
    return trials


def logit(p: np.ndarray | float) -> np.ndarray:
    """log(p / (1 - p))."""
    p = np.asarray(p, dtype=float)
    with np.errstate(divide="ignore"):
        return np.log(p) - np.log1p(-p)
