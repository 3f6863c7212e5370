"""Run a study's whole analysis and write every table (the work behind ``twofold analyze``).

:func:`analyze_study` loads the logs and bank (:func:`~twofold.analysis.data.load_study_data`),
runs the selected parts and writes each table as CSV to the results folder with a JSON summary
(``summary.json``). Parts, in order:

Each part is declared once in :mod:`twofold.analysis._parts` (its tables, options, notes,
figure and report section); :data:`PARTS` lists their names in the order they run. Beside the
tables, every run writes ``notes.csv`` (each doubt with the table it concerns: warnings, fits
that did not converge, unidentified slopes, undefined correlations, separation) and
``verdict.csv`` (:func:`twofold.analysis.verdict.build_verdict`), both also in ``summary.json``.

Options come from the study file's ``[analysis]`` table (``conf_level``, ``n_boot``, ``seed``,
``irt_model``, ``min_items``, ``synthetic``, ``human_pairs``, ``parts``) and can be overridden by
keyword.
"""

from __future__ import annotations

import dataclasses
import json
import time
import warnings
from collections.abc import Callable, Iterable, Mapping
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from twofold.study.checks import check_keys, fail
from twofold.study.exceptions import InputError, SpecError, TwofoldWarning
from twofold.study.logs import write_json_atomic
from twofold.study.studyfile import Study, load_study

from . import _parts, irt, mixed
from ._parts import Skip as _Skip
from .data import StudyData, factor_columns, load_study_data
from .verdict import build_verdict

__all__ = ["OPTIONS", "PARTS", "AnalysisRun", "analyze_study", "parse_parts"]

#: the part names, in the order they run (declared in :data:`twofold.analysis._parts.PARTS`)
PARTS = tuple(p.name for p in _parts.PARTS)

#: above this many scored trials, ``gap_intervals = "auto"`` gives Wald instead of profile
#: intervals for the by-item gap SD (a profile refits the slope model at every point)
GAP_PROFILE_MAX_TRIALS = 50_000

#: ``[analysis]`` keys: name -> (default, what is accepted)
OPTIONS: dict[str, tuple[Any, str]] = {
    "conf_level": (0.95, "a number between 0.5 and 1"),
    "n_boot": (2000, "an integer of at least 10"),
    "seed": (0, "a non-negative integer"),
    "irt_model": ("auto", "one of auto, 1pl, 2pl, rasch"),
    "min_items": (10, "a positive integer"),
    "synthetic": ("keep", "one of drop, keep, only"),
    "human_pairs": ("summary", "one of all, summary"),
    "gap_intervals": ("auto", "one of auto, profile, wald"),
    "parts": (list(PARTS), "a list of parts: " + ", ".join(PARTS)),
}


def _ok(key: str, value: Any) -> bool:
    if key == "conf_level":
        return isinstance(value, float | int) and not isinstance(value, bool) and 0.5 <= value < 1
    if key in ("n_boot", "seed", "min_items"):
        low = {"n_boot": 10, "seed": 0, "min_items": 1}[key]
        return isinstance(value, int) and not isinstance(value, bool) and value >= low
    if key == "irt_model":
        return value in ("auto", "1pl", "2pl", "rasch")
    if key == "synthetic":
        return value in ("drop", "keep", "only")
    if key == "human_pairs":
        return value in ("all", "summary")
    if key == "gap_intervals":
        return value in ("auto", "profile", "wald")
    if key == "parts":
        return isinstance(value, list) and all(v in PARTS for v in value)
    return False


def analysis_options(study: Study, overrides: Mapping[str, Any] | None = None) -> dict[str, Any]:
    """The study's ``[analysis]`` options, checked, with defaults and ``overrides`` applied."""
    table = study.table("analysis")
    where = f"{study.file.name}: [analysis]"
    if not isinstance(table, dict):
        raise fail("analysis", table, "a table of options", where=study.file.name, error=SpecError)
    opts = {k: v[0] for k, v in OPTIONS.items()}
    for source in (table, overrides or {}):
        check_keys(source, sorted(OPTIONS), where=where, error=SpecError)
        for key, value in source.items():
            if value is None:
                continue
            if not _ok(key, value):
                raise fail(key, value, OPTIONS[key][1], where=where, error=SpecError)
            opts[key] = value
    return opts


def parse_parts(text: str | Iterable[str] | None) -> list[str]:
    """Parse ``--only`` (comma-separated part names) into a list in the canonical order.

    Raises
    ------
    InputError
        ``field '--only': got 'agreemnt'; accepted: parts data, irt, mixed, ...``
    """
    if text is None:
        return list(PARTS)
    names = [t.strip() for t in text.split(",")] if isinstance(text, str) else list(text)
    names = [n for n in names if n]
    if not names:
        raise fail("--only", text, "a comma-separated list of parts: " + ", ".join(PARTS))
    for n in names:
        if n not in PARTS:
            raise fail("--only", n, "a comma-separated list of parts: " + ", ".join(PARTS))
    return [p for p in PARTS if p in names]


@dataclasses.dataclass
class AnalysisRun:
    """What :func:`analyze_study` produced.

    Attributes
    ----------
    out_dir : Path
    tables : dict of str -> DataFrame
        Every table written, keyed by file stem.
    summary : dict
        The content of ``summary.json``.
    data : StudyData
    """

    out_dir: Path
    tables: dict[str, pd.DataFrame]
    summary: dict[str, Any]
    data: StudyData


#: ``irt_model = "auto"`` fits one common slope (1PL) below this many human respondents and a
#: slope per item (2PL) from it on: item slopes need a few hundred respondents to be estimated
#: stably (common practice)
IRT_2PL_MIN_RESPONDENTS = 200


def irt_model_for(choice: str, n_respondents: int) -> str:
    """The IRT model to fit: ``choice``, or for ``"auto"`` 1PL below
    :data:`IRT_2PL_MIN_RESPONDENTS` human respondents and 2PL from there on."""
    if choice != "auto":
        return choice
    return "2pl" if n_respondents >= IRT_2PL_MIN_RESPONDENTS else "1pl"


def _irt(data: StudyData, opts: dict[str, Any]) -> tuple[dict[str, pd.DataFrame], Any]:
    trials = data.trials
    humans = trials["kind"] == "human"
    if not humans.any():
        raise _Skip("no human respondents to calibrate the scale on")
    model = irt_model_for(opts["irt_model"], int(trials.loc[humans, "respondent"].nunique()))
    try:
        res = irt.score_on_human_scale(trials, model=model, duplicates="first")
    except InputError:
        raise
    except Exception as err:  # keep the other parts running if the IRT fit fails
        raise _Skip(f"IRT fit failed: {type(err).__name__}: {err}") from err
    return {
        "irt_items": res.calibration.items,
        "irt_abilities": res.abilities,
        "irt_departures": res.departures,
    }, res


def _fixed_rhs(trials: pd.DataFrame, base: str) -> str:
    terms = [base] if base else []
    fams = trials["family"].dropna().unique()
    if len(fams) > 1:
        terms.append("family")
    else:
        for f in factor_columns(trials):
            if trials[f].notna().all() and trials[f].nunique() > 1:
                terms.append(f)
    return " + ".join(terms) or "1"


def _mixed(data: StudyData, opts: dict[str, Any]) -> dict[str, pd.DataFrame]:
    t = data.trials
    out: dict[str, pd.DataFrame] = {}
    lvl = opts["conf_level"]
    by = "group" if t["group"].nunique() > 1 else ""
    if t["correct"].notna().any():
        acc = mixed.fit_accuracy(t, fixed=_fixed_rhs(t, by), conf_level=lvl)
        out["accuracy_fixed"], out["accuracy_random"] = acc.fixed, acc.random_effects
        sc = t.loc[t["correct"].notna()]
        if sc["kind"].nunique() > 1 and sc["item"].nunique() > 2:
            extra = _fixed_rhs(sc, "")
            how = opts.get("gap_intervals", "auto")
            if how == "auto":
                # each profile point refits the by-item slope model: minutes at 100k trials
                how = "profile" if len(sc) <= GAP_PROFILE_MAX_TRIALS else "wald"
            gap = mixed.item_gap_variation(
                t, fixed="" if extra == "1" else extra, conf_level=lvl, sd_intervals=how
            )
            if how == "wald" and opts.get("gap_intervals", "auto") == "auto":
                said = (
                    f"SD interval: Wald on the log scale ({len(sc):,} trials; profile intervals "
                    f"up to {GAP_PROFILE_MAX_TRIALS:,}, or with gap_intervals = 'profile')"
                )
                gap["note"] = [
                    f"{n}; {said}" if isinstance(n, str) and n else said for n in gap["note"]
                ]
            out["item_gap_variation"] = gap
    hum = t.loc[(t["kind"] == "human") & (t["rt_ms"] > 0)]
    if hum["respondent"].nunique() > 1:
        rt = mixed.fit_log_time(t, measure="rt", fixed=_fixed_rhs(hum, ""), conf_level=lvl)
        out["log_rt_fixed"], out["log_rt_random"] = rt.fixed, rt.random_effects
    mac = t.loc[(t["kind"] == "machine") & (t["effort"] > 0)]
    if mac["respondent"].nunique() > 1:
        base = "group" if mac["group"].nunique() > 1 else ""
        ef = mixed.fit_log_time(t, measure="effort", fixed=_fixed_rhs(mac, base), conf_level=lvl)
        out["log_effort_fixed"], out["log_effort_random"] = ef.fixed, ef.random_effects
    if not out:
        raise _Skip("no scored trials, response times or effort to model")
    return out


def analyze_study(
    study: Study | str | Path,
    *,
    out_dir: str | Path | None = None,
    parts: Iterable[str] | str | None = None,
    progress: Callable[[str], None] | None = None,
    timing: Callable[[str, float], None] | None = None,
    **options: Any,
) -> AnalysisRun:
    """Run the selected analysis parts of a study and write their tables.

    Parameters
    ----------
    study : Study or path
        A loaded study or its ``study.toml``.
    out_dir : path, optional
        Where to write (default: the study's ``results/`` folder).
    parts : iterable of str or comma-separated str, optional
        Parts to run (see the module docstring); default: ``[analysis] parts`` or all.
    progress : callable, optional
        Called with each part's name when it finishes.
    timing : callable, optional
        Called with ``("load", seconds)`` after reading the logs, then ``(part, seconds)`` as
        each part finishes (the same times go to ``summary.json``).
    **options
        Override ``[analysis]`` options (``conf_level``, ``n_boot``, ``seed``, ``irt_model``,
        ``min_items``, ``synthetic``, ``human_pairs``).

    Returns
    -------
    AnalysisRun

    Notes
    -----
    A part that cannot run on the data (no machines, no isomorphs...) is recorded as skipped
    with its reason in ``summary.json``; warnings raised inside a part are recorded there too.
    """
    st = study if isinstance(study, Study) else load_study(study)
    opts = analysis_options(st, options)
    chosen = parse_parts(parts) if parts is not None else parse_parts(opts["parts"])
    out = Path(out_dir) if out_dir is not None else st.results_dir
    created = not out.exists()
    out.mkdir(parents=True, exist_ok=True)
    t_load = time.perf_counter()
    try:
        with warnings.catch_warnings(record=True) as load_warn:
            warnings.simplefilter("always", TwofoldWarning)
            data = load_study_data(st, synthetic=opts["synthetic"], cache_dir=out / "cache")
    except BaseException:
        if created:  # a failed command leaves no empty or half-written output folder
            import shutil

            shutil.rmtree(out, ignore_errors=True)
        raise
    load_seconds = round(time.perf_counter() - t_load, 3)
    if timing is not None:
        timing("load", load_seconds)
    t = data.trials
    tables: dict[str, pd.DataFrame] = {}
    summary: dict[str, Any] = {
        "study": st.name,
        "bank_hash": data.bank.hash,
        "n_trials": int(len(t)),
        "respondents": {
            f"{k}/{g}": int(n)
            for (k, g), n in t.groupby(["kind", "group"])["respondent"].nunique().items()
        },
        "synthetic_respondents": int(
            t.loc[t["synthetic"].fillna(False).astype(bool), "respondent"].nunique()
        ),
        "options": {k: v for k, v in opts.items() if k != "parts"},
        "load_warnings": [str(w.message) for w in load_warn],
        "load_seconds": load_seconds,
        "parts": {},
    }
    made: dict[str, pd.DataFrame] = {}
    notes: list[dict[str, Any]] = []
    for decl in (p for p in _parts.PARTS if p.name in chosen):
        part = decl.name
        t0 = time.perf_counter()
        entry: dict[str, Any] = {"status": "ok", "files": [], "warnings": []}
        ctx = _parts.PartContext(data=data, opts=opts, study=st, out=out, made=made)
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", TwofoldWarning)
            try:
                result = decl.run(ctx)
            except (_Skip, InputError) as why:
                result = {}
                entry["status"] = "skipped"
                entry["reason"] = str(why)
        entry["warnings"] = list(dict.fromkeys(str(w.message) for w in caught))
        for name, df in result.items():
            if name == "dataset":
                entry["files"].append("dataset/")
                continue
            path = out / f"{name}.csv"
            df.to_csv(path, index=False, lineterminator="\n")
            tables[name] = made[name] = df
            entry["files"].append(path.name)
        part_notes = _part_notes(decl, result, entry)
        notes += part_notes
        entry["notes"] = [n["message"] for n in part_notes]
        entry["seconds"] = round(time.perf_counter() - t0, 3)
        entry.update(_highlights(part, result))
        summary["parts"][part] = entry
        if timing is not None:
            timing(part, entry["seconds"])
        if progress is not None:
            progress(part)
    notes_df = _merge_notes(out, notes, [p for p in PARTS if p in chosen])
    notes_df.to_csv(out / "notes.csv", index=False, lineterminator="\n")
    verdict = build_verdict(
        {name: made.get(name, _read_csv(out, name)) for name in _VERDICT_INPUTS},
        conf_level=opts["conf_level"],
    )
    verdict.to_csv(out / "verdict.csv", index=False, lineterminator="\n")
    tables["notes"], tables["verdict"] = notes_df, verdict
    summary["verdict"] = [
        {k: _parts.json_ready(v) for k, v in rec.items()} for rec in verdict.to_dict("records")
    ]
    write_json_atomic(out / "summary.json", json.loads(json.dumps(summary, default=_json)))
    return AnalysisRun(out_dir=out, tables=tables, summary=summary, data=data)


_VERDICT_INPUTS = (
    "difficulty_agreement",
    "difficulty_reliability",
    "consistency_summary",
    "error_type_tests",
    "robustness",
)


def _read_csv(out: Path, name: str) -> pd.DataFrame | None:
    """A table an earlier run wrote (for parts not run this time), or None."""
    path = out / f"{name}.csv"
    if not path.exists():
        return None
    try:
        return pd.read_csv(path)
    except pd.errors.EmptyDataError:
        return None


def _part_notes(
    decl: _parts.Part, result: dict[str, Any], entry: dict[str, Any]
) -> list[dict[str, Any]]:
    """The part's doubts, each with the table it concerns: skip reason, warnings, table checks."""
    tables = {k: v for k, v in result.items() if isinstance(v, pd.DataFrame)}
    main = decl.tables[0]
    rows: list[dict[str, Any]] = []
    if entry["status"] != "ok":
        rows.append(
            {"table": main, "severity": "skipped", "subject": "", "message": entry["reason"]}
        )
    for msg in entry["warnings"]:
        # a warning names its table first ("difficulty_agreement: ..."); else the part's first
        head = msg.split(":", 1)[0].strip()
        table = head if head in decl.tables else main
        rows.append({"table": table, "severity": "warning", "subject": "", "message": msg})
    checks = decl.notes(tables) if decl.notes is not None and tables else []
    rows = (
        [r for r in rows if r["severity"] != "warning"]
        + checks
        + [r for r in rows if r["severity"] == "warning"]
    )
    return [{"part": decl.name, **r} for r in rows]


def _merge_notes(out: Path, notes: list[dict[str, Any]], ran: list[str]) -> pd.DataFrame:
    """This run's notes, plus earlier notes of the parts not run this time."""
    cols = list(_parts.NOTE_COLUMNS)
    new = pd.DataFrame(notes, columns=cols)
    old = _read_csv(out, "notes")
    if old is not None and set(cols) <= set(old.columns):
        old = old.loc[~old["part"].isin(ran), cols]
        new = pd.concat([old, new], ignore_index=True) if len(old) else new
    return new.fillna("")


def _json(value: Any) -> Any:
    if isinstance(value, np.generic):
        return value.item()
    return str(value)


def _highlights(part: str, made: dict[str, Any]) -> dict[str, Any]:
    """A few headline numbers per part for summary.json."""
    if part == "irt" and "irt_fit" in made:
        return {"fit": {k: _parts.json_ready(v) for k, v in made["irt_fit"].iloc[0].items()}}
    if part == "consistency" and "consistency_summary" in made:
        s = made["consistency_summary"]
        return {
            "kappa_mean": {
                f"{r.group_a}~{r.group_b}": (None if pd.isna(r.mean) else float(r.mean))
                for r in s.itertuples(index=False)
            }
        }
    if part == "agreement" and "difficulty_agreement" in made:
        a = made["difficulty_agreement"]
        a = a.loc[(a["family"] == "all") & (a["interval"] == "bca")]
        return {
            "correlations": [
                {
                    "group": r.group,
                    "statistic": r.statistic,
                    "estimate": None if pd.isna(r.estimate) else float(r.estimate),
                    "ci": [
                        None if pd.isna(r.ci_low) else float(r.ci_low),
                        None if pd.isna(r.ci_high) else float(r.ci_high),
                    ],
                }
                for r in a.itertuples(index=False)
            ]
        }
    return {}
