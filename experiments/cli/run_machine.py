"""``twofold run machine``: machine sessions over a study's bank, or import outside answers."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Annotated

import typer

from ._console import console, progress, stdout


def _options(pairs: list[str]) -> dict[str, object]:
    from twofold.study.checks import fail

    out: dict[str, object] = {}
    for pair in pairs:
        key, sep, value = pair.partition("=")
        if not sep or not key:
            raise fail("--option", pair, "KEY=VALUE (VALUE read as JSON when it parses)")
        try:
            out[key] = json.loads(value)
        except ValueError:
            out[key] = value
    return out


def register_run(run_app: typer.Typer) -> None:
    run_app.command("machine")(machine)


def machine(
    study_toml: Annotated[Path, typer.Argument(help="The study file (or its folder).")],
    solver: Annotated[
        list[str] | None,
        typer.Option(
            help="Solver spec: a built-in name, python:MODULE:FUNCTION (a solve(view, mode) "
            "function or class; the current folder is importable), command:ARGV (a child "
            "speaking JSON lines) or http:URL (a chat endpoint; --option model=NAME); or the "
            "name of a solvers entry of study.toml (repeatable); default: every entry. See the "
            "README section 'Plug in your model'."
        ),
    ] = None,
    seeds: Annotated[
        int | None, typer.Option(help="Seeds per solver (overrides the study).")
    ] = None,
    workers: Annotated[int, typer.Option(help="Local worker processes.")] = 1,
    dask: Annotated[
        str | None, typer.Option(help="Run on Dask: a scheduler address or 'local'.")
    ] = None,
    dask_timeout: Annotated[
        float, typer.Option(help="Seconds to wait for the Dask scheduler before giving up.")
    ] = 10.0,
    option: Annotated[
        list[str] | None, typer.Option("--option", help="Solver option KEY=VALUE (repeatable).")
    ] = None,
    import_: Annotated[
        Path | None, typer.Option("--import", help="Score an answers file (JSON lines) instead.")
    ] = None,
    name: Annotated[str | None, typer.Option(help="Solver name (sessions NAME-sSEED).")] = None,
    keep_failures: Annotated[
        bool,
        typer.Option(
            "--keep-failures", help="Keep failed and timed-out trials instead of retrying them."
        ),
    ] = False,
    fresh: Annotated[
        bool,
        typer.Option(
            "--fresh", help="Discard these solvers' cached trials (only theirs) and run again."
        ),
    ] = False,
) -> None:
    """Run machine solvers over the study's bank; resumes from the trial cache.

    A python: solver is called as solve(view, mode) once per trial and returns the answer, a
    dict with answer or text (plus effort, effort_unit, explanation) or an Answer.
    """
    from twofold.experiments.machine import (
        import_answers,
        run_solvers,
        solver_from_string,
        study_solvers,
    )
    from twofold.study import load_study
    from twofold.study.checks import check_int, check_number, fail

    study = load_study(study_toml)
    if import_ is not None:
        if name is None:
            raise fail("--name", None, "a name for the imported solver (with --import)")
        for s in import_answers(study, import_, name=name):
            stdout.print(
                f"{s['session']}: {s['n_trials']} trials, {s['n_correct']} correct, "
                f"{s['n_invalid']} invalid, {s['n_missing']} item-modes without an answer"
            )
        return
    check_int("--workers", workers, low=1, high=256)
    check_number("--dask-timeout", dask_timeout, low=0.1, high=3600)
    entries = study_solvers(study)
    opts = _options(option or [])
    if solver:
        specs = [
            solver_from_string(s, name=name, seeds=seeds, options=opts, entries=entries)
            for s in solver
        ]
    else:
        specs = [
            solver_from_string(e.name, seeds=seeds, options=opts, entries=entries) for e in entries
        ]
    with progress("machine trials") as bar:
        table = run_solvers(
            study,
            specs,
            workers=workers,
            dask=dask,
            progress=bar,
            keep_failures=keep_failures,
            fresh=fresh,
            dask_timeout=dask_timeout,
        )
    for row in table.itertuples():
        rate = row.n_run / row.seconds if row.seconds > 0 else float("nan")
        console.print(
            f"{row.session}: {row.n_trials} trials ({row.n_cached} resumed, {row.n_run} run at "
            f"{rate:.1f}/s), accuracy {row.accuracy:.3f}, {row.n_invalid} invalid, "
            f"{row.n_timeout} timeout, {row.n_failed} failed"
        )
    n_trials = int(table["n_trials"].sum())
    n_lost = int((table["n_failed"] + table["n_timeout"]).sum())
    if n_trials and n_lost == n_trials:
        from twofold.study.exceptions import RunnerError

        first = table["first_failure"].dropna()
        raise RunnerError(
            f"every trial failed ({n_trials} trials in {len(table)} sessions); first reason: "
            f"{first.iloc[0] if len(first) else 'unknown'}"
        )
    stdout.print(f"wrote {len(table)} machine sessions to {study.logs_dir / 'machine'}")
