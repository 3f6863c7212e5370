"""Run a study's whole analysis and write every table (the work behind ``twofold analyze``).

:func:`analyze_study` loads the logs and bank (:func:`~twofold.analysis.data.load_study_data`),
runs the selected parts and writes each table as CSV to the results folder with a JSON summary
(``summary.json``). Parts, in order:

============ ==============================================================================
part         tables written
============ ==============================================================================
data         trials.csv, sessions.csv, issues.csv
irt          irt_items.csv, irt_abilities.csv, irt_departures.csv (human-calibrated scale)
mixed        accuracy_fixed.csv, accuracy_random.csv, item_gap_variation.csv (by-item spread of
             the machine-minus-human difference), log_rt_fixed.csv, log_rt_random.csv,
             log_effort_fixed.csv, log_effort_random.csv
factors      factor_effects.csv
agreement    item_difficulty.csv, machine_error_rates.csv, difficulty_agreement.csv,
             difficulty_reliability.csv (the human split-half ceiling)
consistency  consistency_pairs.csv (pairs with a machine; every pair with human_pairs = "all"),
             consistency_summary.csv (all pairs, streamed: the human-human row is the ceiling)
errors       error_types.csv, error_type_tests.csv, error_type_odds.csv
robustness   robustness.csv, robustness_test_fixed.csv, robustness_test_random.csv
export       dataset/ (Psych-DS-style folder with a Frictionless data package)
============ ==============================================================================

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

from . import compare, irt, mixed
from .data import StudyData, factor_columns, load_study_data

__all__ = ["OPTIONS", "PARTS", "AnalysisRun", "analyze_study", "parse_parts"]

PARTS = (
    "data",
    "irt",
    "mixed",
    "factors",
    "agreement",
    "consistency",
    "errors",
    "robustness",
    "export",
)

#: ``[analysis]`` keys: name -> (default, what is accepted)
OPTIONS: dict[str, tuple[Any, str]] = {
    "conf_level": (0.95, "a number between 0.5 and 1"),
    "n_boot": (2000, "an integer of at least 10"),
    "seed": (0, "a non-negative integer"),
    "irt_model": ("auto", "one of auto, 1pl, 2pl, rasch"),
    "min_items": (10, "a positive integer"),
    "synthetic": ("keep", "one of drop, keep, only"),
    "human_pairs": ("summary", "one of all, summary"),
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


class _Skip(Exception):  # noqa: N818 - control flow inside this module
    pass


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
            out["item_gap_variation"] = mixed.item_gap_variation(
                t, fixed="" if extra == "1" else extra, conf_level=lvl
            )
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
    irt_items: pd.DataFrame | None = None
    for part in chosen:
        t0 = time.perf_counter()
        entry: dict[str, Any] = {"status": "ok", "files": [], "warnings": []}
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", TwofoldWarning)
            try:
                made = _run_part(part, data, opts, st, out, irt_items)
                if part == "irt" and "irt_items" in made:
                    irt_items = made["irt_items"]
            except _Skip as why:
                made = {}
                entry["status"] = "skipped"
                entry["reason"] = str(why)
            except InputError as err:
                made = {}
                entry["status"] = "skipped"
                entry["reason"] = str(err)
        entry["warnings"] = list(dict.fromkeys(str(w.message) for w in caught))
        for name, df in made.items():
            if name == "dataset":
                entry["files"].append("dataset/")
                continue
            path = out / f"{name}.csv"
            df.to_csv(path, index=False, lineterminator="\n")
            tables[name] = df
            entry["files"].append(path.name)
        entry["seconds"] = round(time.perf_counter() - t0, 3)
        entry.update(_highlights(part, made))
        summary["parts"][part] = entry
        if timing is not None:
            timing(part, entry["seconds"])
        if progress is not None:
            progress(part)
    write_json_atomic(out / "summary.json", json.loads(json.dumps(summary, default=_json)))
    return AnalysisRun(out_dir=out, tables=tables, summary=summary, data=data)


def _json(value: Any) -> Any:
    if isinstance(value, np.generic):
        return value.item()
    return str(value)


def _run_part(
    part: str,
    data: StudyData,
    opts: dict[str, Any],
    st: Study,
    out: Path,
    irt_items: pd.DataFrame | None,
) -> dict[str, Any]:
    t = data.trials
    lvl = opts["conf_level"]
    has_machines = (t["kind"] == "machine").any()
    has_humans = (t["kind"] == "human").any()
    if part == "data":
        return {"trials": t, "sessions": data.sessions, "issues": data.issues}
    if part == "irt":
        tables, _ = _irt(data, opts)
        return tables
    if part == "mixed":
        return _mixed(data, opts)
    if part == "factors":
        if not has_humans:
            raise _Skip("no human respondents (effects are relative to people)")
        return {"factor_effects": mixed.factor_effects(t, conf_level=lvl)}
    if part == "agreement":
        if not (has_humans and has_machines):
            raise _Skip("needs both human and machine respondents")
        irt_b = irt_items[["item", "b"]] if irt_items is not None else None
        return {
            "item_difficulty": compare.item_difficulty(t, irt=irt_b),
            "machine_error_rates": compare.machine_error_rates(t),
            "difficulty_agreement": compare.difficulty_agreement(
                t, irt=irt_b, n_boot=opts["n_boot"], conf_level=lvl, seed=opts["seed"]
            ),
            "difficulty_reliability": compare.difficulty_reliability(
                t, conf_level=lvl, seed=opts["seed"]
            ),
        }
    if part == "consistency":
        pairs, summ = compare.consistency_tables(
            t, min_items=opts["min_items"], human_pairs=opts["human_pairs"], conf_level=lvl
        )
        return {"consistency_pairs": pairs, "consistency_summary": summ}
    if part == "errors":
        return {
            "error_types": compare.error_types(t),
            "error_type_tests": compare.error_type_tests(t, seed=opts["seed"]),
            "error_type_odds": compare.error_type_odds(t, conf_level=lvl),
        }
    if part == "robustness":
        if not t["isomorph"].astype(bool).any():
            raise _Skip("no isomorphs answered")
        res = compare.robustness_test(t, conf_level=lvl)
        return {
            "robustness": compare.robustness(t, conf_level=lvl),
            "robustness_test_fixed": res.fixed,
            "robustness_test_random": res.random_effects,
        }
    if part == "export":
        from .export import export_dataset

        export_dataset(data, out / "dataset", logs_dir=st.logs_dir, overwrite=True)
        return {"dataset": None}
    raise AssertionError(part)  # pragma: no cover - parse_parts checked the name


def _highlights(part: str, made: dict[str, Any]) -> dict[str, Any]:
    """A few headline numbers per part for summary.json."""
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
