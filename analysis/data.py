"""Tidy data: every session log of a study and its bank in one trials table.

The trials table has one row per trial and these columns (in order), followed by one
``factor_<name>`` column per difficulty factor found on the bank's items (in the order the
items store them; numeric factors as float64, others as text, ``"true"``/``"false"`` for
booleans; missing for items of families without that factor):

================ ========= =====================================================================
column           dtype     meaning
================ ========= =====================================================================
study            object    study name
respondent       object    respondent id (``P001``; machines ``<solver>-s<seed>``)
kind             object    ``human`` or ``machine``
group            object    ``human`` for people, the solver name for machines
session          object    session id
seed             Int64     the machine session's seed (missing for people)
synthetic        boolean   true for simulated respondents
form             object    form id
block            object    block name
trial            Int64     0-based trial index within the session
item             object    item id
family           object    item family
mode             object    response mode (``generate`` / ``select``)
response         object    the response as canonical JSON (missing when none)
correct          boolean   whether the response is correct (missing when not scored)
error_type       object    the family's error type of a wrong response
status           object    ``ok``, ``timeout``, ``invalid`` or ``failed``
rt_ms            float64   response time in ms (people)
effort           float64   machine effort in ``effort_unit``
effort_unit      object    unit of effort
variant_of       object    the item's parent id for isomorphs (missing for parents)
variant_operator object    the operator that made an isomorph
parent           object    the root parent id (an item's own id when it is a parent)
isomorph         bool      true when the item is an isomorph (``variant_of`` set)
session_status   object    the session's status from its sidecar (``complete``, ``aborted``...)
source           object    the log file the row came from (relative to the logs folder)
choice_order     object    select mode, people: bank choice numbers in screen order (``3 1 4 2``)
================ ========= =====================================================================
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import os
import re
import tempfile
import warnings
from collections.abc import Iterable, Sequence
from pathlib import Path
from typing import Any, Literal

import numpy as np
import pandas as pd
from twofold.study.bank import Bank
from twofold.study.checks import check_choice, fail
from twofold.study.exceptions import InputError, LogError, LogWarning
from twofold.study.logs import TRIAL_COLUMNS, read_sidecar, read_trials, write_json_atomic
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
    "choice_order",
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
    "n_failed",
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
        Duplicate, missing, unexpected and failed trials found while reading; columns
        :data:`ISSUE_COLUMNS` (``issue`` is ``duplicate_trial``, ``duplicate_item``,
        ``missing_trials``, ``extra_trials`` or ``failed_trials`` — trials logged ``failed``
        or ``timeout``, which a rerun of the machine sweep retries).
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
    cache_dir: str | Path | None = None,
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
    cache_dir : path, optional
        A folder for a Parquet copy of the tables (e.g. ``results/cache``; never inside
        ``logs_dir``). When its key matches, the tables are read from it instead of the logs.

    Returns
    -------
    StudyData

    Raises
    ------
    LogError
        A log whose bank hash differs from the bank's (the message names the file), a row naming
        an item the bank does not hold, a sidecar whose session or kind disagrees with its rows.

    Notes
    -----
    The logs are parsed in bulk: each CSV by pyarrow's reader straight into typed columns
    (a file it cannot parse, or whose header differs, goes through
    :func:`twofold.study.logs.read_trials`, which drops a last line cut short and names a wrong
    header), all files joined into one table, and the checks run on that table at once.

    The cache key is a SHA-256 over the list of log files (path relative to ``logs_dir``) with
    the SHA-256 of each CSV's and sidecar's **content**, the bank hash, ``duplicates``,
    ``synthetic`` and the cache layout version: adding, removing or changing any log or sidecar,
    or a different bank or option, misses the cache, which is then rebuilt. Content rather than
    size and modification time, because copies and checkouts keep sizes and reset times.
    """
    check_choice("duplicates", duplicates, ("first", "raise", "keep"))
    check_choice("synthetic", synthetic, ("keep", "drop", "only"))
    root = Path(logs_dir)
    paths = [Path(f) for f in files] if files is not None else _log_files(root)
    rels = [_relative(p, root) for p in paths]
    cache: _Cache | None = None
    hit, key = None, ""
    if cache_dir is not None:
        cache = _Cache(Path(cache_dir), root)
        key = _cache_key(paths, rels, bank, duplicates, synthetic)
        hit = cache.load(key)
    if hit is not None:
        raw, sess, iss, study_name = hit
    else:
        raw, sess, iss, study_name = _read_bulk(paths, rels, bank, duplicates, synthetic)
        if cache is not None:
            cache.save(key, raw, sess, iss, study_name)
    if len(iss):
        counts = iss.groupby("issue")["n"].sum()
        warnings.warn(
            "trial logs: "
            + "; ".join(f"{int(n)} {k.replace('_', ' ')}" for k, n in counts.items())
            + " (see StudyData.issues)",
            LogWarning,
            stacklevel=2,
        )
    trials = _with_items(raw, item_table(bank))
    return StudyData(
        trials=trials, sessions=sess, issues=iss, bank=bank, study=study_name or "unnamed"
    )


def _relative(path: Path, root: Path) -> str:
    try:
        return str(path.relative_to(root))
    except ValueError:
        return str(path)


# -- bulk reading --------------------------------------------------------------------------------
_ARROW_TYPES = {"string": "string", "boolean": "bool_", "integer": "int64", "number": "float64"}
_DROPPED = ["bank_hash", "family", "onset_s", "response_s", "detail"]


def _arrow_schema() -> Any:
    import pyarrow as pa

    return pa.schema([(c.name, getattr(pa, _ARROW_TYPES[c.type])()) for c in TRIAL_COLUMNS])


def _read_one(path: Path) -> Any:
    """One log as a pyarrow table with the trial log's types, or None when pyarrow's reading
    cannot be trusted for it (a header that differs, a cell it cannot convert, a row with
    another number of cells, no newline at the end): :func:`_read_checked` reads those."""
    import io

    import pyarrow as pa
    from pyarrow import csv as pacsv

    data = path.read_bytes()
    if not data.endswith(b"\n"):
        return None
    skipped: list[Any] = []

    def skip(row: Any) -> str:
        skipped.append(row)
        return "skip"

    try:
        table = pacsv.read_csv(
            io.BytesIO(data),
            read_options=pacsv.ReadOptions(use_threads=False),
            parse_options=pacsv.ParseOptions(newlines_in_values=True, invalid_row_handler=skip),
            convert_options=pacsv.ConvertOptions(
                column_types=_arrow_schema(),
                true_values=["true"],
                false_values=["false"],
                null_values=[""],
                strings_can_be_null=True,
                quoted_strings_can_be_null=True,
            ),
        )
    except (pa.ArrowInvalid, UnicodeDecodeError):
        return None
    names = [c.name for c in TRIAL_COLUMNS]
    if table.column_names == names[:-1] and names[-1] == "choice_order":
        # a log written before choice_order: the column is there, empty
        table = table.append_column("choice_order", pa.nulls(table.num_rows, pa.string()))
    if skipped or table.column_names != names:
        return None
    import pyarrow.compute as pc

    # pyarrow reads the text "nan" as a float NaN, which pandas then takes for a missing cell;
    # the checked reader refuses it, naming the row
    for c in TRIAL_COLUMNS:
        if c.type == "number" and pc.any(pc.is_nan(table[c.name])).as_py():
            return None
    return table


def _read_checked(path: Path) -> Any:
    """One log through :func:`twofold.study.logs.read_trials` (every cell checked; its errors
    and warnings name the file and row), as a pyarrow table."""
    import pyarrow as pa

    df = read_trials(path)
    return pa.Table.from_pandas(df, schema=_arrow_schema(), preserve_index=False)


def _text_as_object(df: pd.DataFrame) -> None:
    """Text columns as ``object`` with ``None`` for missing, as the table documents (pyarrow and
    Parquet hand back pandas' string dtype)."""
    for c in df.columns:
        if isinstance(df[c].dtype, pd.StringDtype) or df[c].dtype == object:
            col = df[c].astype(object)
            df[c] = col.where(col.notna(), None)


def _suspect_files(df: pd.DataFrame, n_files: int) -> np.ndarray:
    """Files with a cell the row-by-row reader would refuse: a required cell empty, a value
    outside its column's list, a number that is not finite."""
    bad = np.zeros(len(df), dtype=bool)
    for c in TRIAL_COLUMNS:
        col = df[c.name]
        if c.required:
            bad |= col.isna().to_numpy()
        if c.enum:
            bad |= (col.notna() & ~col.isin(c.enum)).to_numpy()
        if c.type == "number":
            v = col.to_numpy(dtype=np.float64, na_value=0.0)
            bad |= ~np.isfinite(v)
    return np.bincount(df["_file"].to_numpy()[bad], minlength=n_files) > 0


def _read_bulk(
    paths: list[Path],
    rels: list[str],
    bank: Bank,
    duplicates: str,
    synthetic: str,
) -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame, str]:
    import pyarrow as pa

    sides = [read_sidecar(p.with_suffix(".json")) for p in paths]
    tables = []
    mapper = {pa.bool_(): pd.BooleanDtype(), pa.int64(): pd.Int64Dtype()}.get
    for k, p in enumerate(paths):
        t = _read_one(p)
        if t is None:
            t = _read_checked(p)
        tables.append(t.append_column("_file", pa.array(np.full(t.num_rows, k, np.int32))))
    if tables:
        df = pa.concat_tables(tables).to_pandas(types_mapper=mapper)
        suspect = _suspect_files(df, len(paths))
        if suspect.any():  # read those again, checked; this raises the row's error in words
            keep = ~suspect[df["_file"].to_numpy()]
            again = [
                _read_checked(paths[k]).to_pandas(types_mapper=mapper).assign(_file=np.int32(k))
                for k in np.flatnonzero(suspect)
            ]
            df = pd.concat([df.loc[keep], *again], ignore_index=True)
            df = df.sort_values("_file", kind="stable").reset_index(drop=True)
    else:
        df = pd.DataFrame({c.name: pd.Series(dtype=object) for c in TRIAL_COLUMNS})
        df["_file"] = pd.Series(dtype=np.int32)
    del tables
    _text_as_object(df)
    fcode = df["_file"].to_numpy()
    n_files = len(paths)
    n_rows = np.bincount(fcode, minlength=n_files)

    def rows_of(k: int) -> pd.DataFrame:
        return df.loc[fcode == k]

    # bank hash: rows and sidecars
    bad = df["bank_hash"].notna().to_numpy() & (df["bank_hash"] != bank.hash).to_numpy()
    bad_files = set(np.unique(fcode[bad]).tolist())
    for k in range(n_files):
        if k in bad_files or sides[k].get("bank_hash") not in (None, bank.hash):
            _check_hash(rels[k], sides[k], rows_of(k), bank)
    # one session per file, and the sidecar agrees with the rows
    g = df.groupby("_file", sort=True)
    firsts = g[["session", "respondent", "kind"]].first()
    for col in ("session", "respondent", "kind"):
        multi = g[col].nunique()
        for k in multi.index[multi > 1]:
            vals = set(rows_of(int(k))[col].dropna().astype(str))
            raise LogError(
                f"{rels[k]}: column '{col}' holds {len(vals)} values "
                f"({', '.join(sorted(vals)[:3])}); one session per log file.",
                where=rels[k],
                field=col,
            )
    syn_flag = df["synthetic"].fillna(False).to_numpy(dtype=bool)
    syn_rows = np.bincount(fcode, weights=syn_flag, minlength=n_files) > 0
    meta: list[dict[str, Any]] = []
    for k, (rel, side) in enumerate(zip(rels, sides, strict=True)):
        if n_rows[k] == 0:
            session = str(side.get("session") or paths[k].stem)
            respondent = str(side.get("respondent") or session)
            kind = str(side.get("kind") or paths[k].parent.name)
        else:
            session, respondent, kind = (str(firsts.at[k, c]) for c in firsts.columns)
            for col, val in (("session", session), ("kind", kind)):
                sval = side.get(col)
                if sval is not None and str(sval) != val:
                    raise LogError(
                        f"{rel}: sidecar field '{col}': got {sval!r}; the rows say {val!r}.",
                        where=rel,
                        field=col,
                    )
        is_syn = bool(side.get("synthetic", False)) or bool(syn_rows[k])
        group, seed = _group_of(side, respondent, kind)
        meta.append(
            dict(
                session=session,
                respondent=respondent,
                kind=kind,
                group=group,
                seed=seed,
                synthetic=is_syn,
                keep=not ((synthetic == "drop" and is_syn) or (synthetic == "only" and not is_syn)),
            )
        )
    keep_file = np.array([m["keep"] for m in meta], dtype=bool)
    study_name = ""
    for k in np.flatnonzero(keep_file):
        side_study = sides[k].get("study")
        row_study = df["study"].iat[int(np.argmax(fcode == k))] if n_rows[k] else ""
        study_name = str(side_study or row_study)
        if study_name:
            break
    df = df.loc[keep_file[fcode]] if n_files else df
    fcode = df["_file"].to_numpy()
    # every item is the bank's
    unknown_rows = ~df["item"].isin({it.id for it in bank.items}).to_numpy()
    if unknown_rows.any():
        k = int(fcode[unknown_rows].min())
        unknown = sorted(set(df.loc[unknown_rows & (fcode == k), "item"]))
        raise LogError(
            f"{rels[k]}: field 'item': got {unknown[0]!r}; accepted: an item id of the bank "
            f"({len(unknown)} unknown item ids in this log).",
            where=rels[k],
            field="item",
        )
    # duplicates, missing and extra trials
    dup_trial = df.duplicated(["_file", "trial"], keep="first").to_numpy()
    issues: list[dict[str, Any]] = []
    dup_files = set(np.unique(fcode[dup_trial]).tolist())
    if duplicates == "raise" and dup_files:
        k = min(dup_files)
        sub = df.loc[dup_trial & (fcode == k), "trial"]
        raise LogError(
            f"{rels[k]}: trial {sub.iloc[0]} is logged {len(sub) + 1} "
            "times or more; pass duplicates='first' to keep the first row.",
            where=rels[k],
            field="trial",
        )
    n_dup_trial = np.bincount(fcode[dup_trial], minlength=n_files)
    dup_detail = {
        k: ", ".join(map(str, df.loc[dup_trial & (fcode == k), "trial"].unique()[:5]))
        for k in dup_files
    }
    if duplicates == "first":
        df = df.loc[~dup_trial]
        fcode = df["_file"].to_numpy()
    dup_item = (
        df.duplicated(["_file", "item"], keep="first").to_numpy()
        & ~df.duplicated(["_file", "trial"], keep="first").to_numpy()
    )
    n_dup_item = np.bincount(fcode[dup_item], minlength=n_files)
    n_kept = np.bincount(fcode, minlength=n_files)
    trial = df["trial"].to_numpy(dtype=np.float64, na_value=np.nan)
    uniq = df.loc[~np.isnan(trial), ["_file", "trial"]].drop_duplicates()
    n_unique = np.bincount(uniq["_file"].to_numpy(), minlength=n_files)
    expected = np.array(
        [
            e if isinstance(e, int) and not isinstance(e, bool) else -1
            for e in (s.get("n_trials") for s in sides)
        ],
        dtype=np.int64,
    )
    ut = uniq["trial"].to_numpy(dtype=np.int64)
    uf = uniq["_file"].to_numpy()
    in_range = (ut >= 0) & (ut < expected[uf])
    n_present = np.bincount(uf[in_range], minlength=n_files)
    # trials the solver or adapter did not answer (the report flags their sessions)
    failed = df["status"].isin(("failed", "timeout")).to_numpy()
    n_failed = np.bincount(fcode[failed], minlength=n_files)
    sessions: list[dict[str, Any]] = []
    for k in np.flatnonzero(keep_file):
        m, rel, side = meta[k], rels[k], sides[k]
        if n_dup_trial[k]:
            issues.append(
                dict(
                    source=rel,
                    session=m["session"],
                    issue="duplicate_trial",
                    n=int(n_dup_trial[k]),
                    detail="trial index logged again: " + dup_detail[k],
                )
            )
        if n_dup_item[k]:
            items_again = df.loc[dup_item & (fcode == k), "item"]
            issues.append(
                dict(
                    source=rel,
                    session=m["session"],
                    issue="duplicate_item",
                    n=int(n_dup_item[k]),
                    detail="item presented again under another trial index: "
                    + ", ".join(items_again.unique()[:3]),
                )
            )
        if n_failed[k]:
            statuses = df.loc[failed & (fcode == k), "status"].value_counts()
            issues.append(
                dict(
                    source=rel,
                    session=m["session"],
                    issue="failed_trials",
                    n=int(n_failed[k]),
                    detail=", ".join(f"{int(v)} {s}" for s, v in statuses.items())
                    + " (run the same command again to retry them)",
                )
            )
        exp_k = int(expected[k])
        n_missing = 0
        if exp_k >= 0:
            if exp_k > n_unique[k]:
                n_missing = exp_k - int(n_present[k])
                issues.append(
                    dict(
                        source=rel,
                        session=m["session"],
                        issue="missing_trials",
                        n=n_missing,
                        detail=f"sidecar n_trials={exp_k}; {int(n_unique[k])} trials logged "
                        f"(session status {side.get('status', 'unknown')})",
                    )
                )
            elif n_unique[k] > exp_k:
                issues.append(
                    dict(
                        source=rel,
                        session=m["session"],
                        issue="extra_trials",
                        n=int(n_unique[k]) - exp_k,
                        detail=f"sidecar n_trials={exp_k}; {int(n_unique[k])} trials logged",
                    )
                )
        sessions.append(
            dict(
                session=m["session"],
                respondent=m["respondent"],
                kind=m["kind"],
                group=m["group"],
                seed=m["seed"],
                synthetic=m["synthetic"],
                status=side.get("status"),
                n_trials_expected=exp_k if exp_k >= 0 else pd.NA,
                n_rows=int(n_rows[k]),
                n_trials=int(n_kept[k]),
                n_duplicates=int(n_rows[k] - n_unique[k]),
                n_missing=n_missing,
                n_failed=int(n_failed[k]),
                source=rel,
            )
        )
    raw = _raw_trials(df, fcode, meta, sides, rels)
    sess = pd.DataFrame(sessions, columns=list(SESSION_COLUMNS))
    sess["seed"] = sess["seed"].astype("Int64")
    sess["n_trials_expected"] = sess["n_trials_expected"].astype("Int64")
    iss = pd.DataFrame(issues, columns=list(ISSUE_COLUMNS))
    _text_as_object(sess)
    _text_as_object(iss)
    return raw, sess, iss, study_name


def _raw_trials(
    df: pd.DataFrame,
    fcode: np.ndarray,
    meta: list[dict[str, Any]],
    sides: list[dict[str, Any]],
    rels: list[str],
) -> pd.DataFrame:
    """The log rows with their session's group, seed, status and source, in table order."""
    df = df.drop(columns=_DROPPED)
    per_file = pd.DataFrame(
        {
            "group": [m["group"] for m in meta],
            "seed": pd.array([m["seed"] for m in meta], dtype="Int64"),
            "session_status": [s.get("status") for s in sides],
            "source": rels,
            "_syn": [m["synthetic"] for m in meta],
        }
    )
    for col in ("group", "seed", "session_status", "source"):
        df[col] = per_file[col].to_numpy()[fcode] if len(per_file) else per_file[col]
    if len(per_file):
        syn = per_file["_syn"].to_numpy(dtype=bool)[fcode]
        df["synthetic"] = df["synthetic"].fillna(pd.Series(syn, index=df.index))
    df["seed"] = df["seed"].astype("Int64")
    df["synthetic"] = df["synthetic"].astype("boolean")
    df = df.drop(columns="_file")
    _text_as_object(df)
    df = df.sort_values(["kind", "group", "session", "trial"], kind="stable")
    return df.reset_index(drop=True)


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


def _with_items(raw: pd.DataFrame, items: pd.DataFrame) -> pd.DataFrame:
    """Join the bank's item columns (family, parents, factors) to the rows, keeping their order."""
    factors = [c for c in items.columns if c.startswith("factor_")]
    cols = list(BASE_COLUMNS) + factors
    if raw.empty:
        return pd.DataFrame({c: pd.Series(dtype=object) for c in cols})
    df = raw.merge(items, on="item", how="left", validate="many_to_one")
    df["isomorph"] = df["isomorph"].astype(bool)
    return df[cols]


# -- cache ---------------------------------------------------------------------------------------
#: bump when the cached tables' layout or the reading rules change
CACHE_VERSION = 3


def _digest(path: Path) -> str | None:
    try:
        with open(path, "rb") as fh:
            return hashlib.file_digest(fh, "sha256").hexdigest()
    except FileNotFoundError:
        return None


def _cache_key(
    paths: list[Path], rels: list[str], bank: Bank, duplicates: str, synthetic: str
) -> str:
    record = {
        "version": CACHE_VERSION,
        "bank_hash": bank.hash,
        "duplicates": duplicates,
        "synthetic": synthetic,
        "files": [
            [rel, _digest(p), _digest(p.with_suffix(".json"))]
            for p, rel in zip(paths, rels, strict=True)
        ],
    }
    return hashlib.sha256(json.dumps(record, sort_keys=True).encode()).hexdigest()


class _Cache:
    """The trials, sessions and issues tables as Parquet files plus ``cache.json`` (the key).

    ``cache.json`` is written last and atomically, so a half-written cache never matches.
    """

    TABLES = ("trials", "sessions", "issues")

    def __init__(self, folder: Path, logs_dir: Path) -> None:
        here, logs = folder.resolve(), logs_dir.resolve()
        if here == logs or logs in here.parents:
            raise fail(
                "cache_dir",
                str(folder),
                "a folder outside the logs folder (e.g. the analysis results folder)",
            )
        self.folder = folder

    def load(self, key: str) -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame, str] | None:
        try:
            meta = json.loads((self.folder / "cache.json").read_text("utf-8"))
            if meta.get("key") != key:
                return None
            tables = [pd.read_parquet(self.folder / f"{t}.parquet") for t in self.TABLES]
        except (OSError, ValueError):  # missing or unreadable: rebuild
            return None
        raw, sess, iss = tables
        for df in tables:
            _text_as_object(df)
        return raw, sess, iss, str(meta.get("study", ""))

    def save(
        self, key: str, raw: pd.DataFrame, sess: pd.DataFrame, iss: pd.DataFrame, study: str
    ) -> None:
        self.folder.mkdir(parents=True, exist_ok=True)
        (self.folder / "cache.json").unlink(missing_ok=True)
        for name, df in zip(self.TABLES, (raw, sess, iss), strict=True):
            fd, tmp = tempfile.mkstemp(prefix=f".{name}.", suffix=".parquet", dir=self.folder)
            os.close(fd)
            try:
                df.to_parquet(tmp, index=False)
                os.replace(tmp, self.folder / f"{name}.parquet")
            except BaseException:
                Path(tmp).unlink(missing_ok=True)
                raise
        write_json_atomic(
            self.folder / "cache.json",
            {"key": key, "version": CACHE_VERSION, "study": study, "rows": len(raw)},
        )


def load_study_data(
    study: Study | str | Path,
    *,
    bank: Bank | None = None,
    duplicates: Literal["first", "raise", "keep"] = "first",
    synthetic: Literal["keep", "drop", "only"] = "keep",
    cache_dir: str | Path | None = None,
) -> StudyData:
    """Load every session log of a study with its bank into tidy tables.

    Parameters
    ----------
    study : Study or path
        A loaded study or the path of its ``study.toml`` (or folder).
    bank : Bank, optional
        The bank; by default the study's bank folder is loaded (never generated here).
    duplicates, synthetic, cache_dir
        See :func:`read_logs` (``twofold analyze`` caches in ``<results>/cache``).

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
    data = read_logs(
        st.logs_dir, bank, duplicates=duplicates, synthetic=synthetic, cache_dir=cache_dir
    )
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
