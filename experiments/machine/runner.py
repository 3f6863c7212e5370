"""The machine runner: every item of a study's bank, for every solver and seed, logged and cached.

Each solver x seed is one session (``<name>-s<seed>``) written through
:class:`twofold.study.logs.TrialLogWriter` under ``<study>/logs/machine/``. Each trial renders the
item in the solver's medium and mode, calls ``solve``, scores the answer with the item's family and
logs the result. Every finished trial is first committed to the study's trial cache
(:class:`~twofold.experiments.machine.cache.TrialCache`) and then appended to the CSV; a rerun
rebuilds each CSV from the cache (so nothing is duplicated) and runs only what is missing.

Trial outcomes
--------------
``ok``: answered and scored (``correct`` true/false, ``error_type`` for wrong answers).
``invalid``: an answer that could not be read or scored (no answer, unparseable text, a choice
out of range); ``correct`` is false and ``detail`` holds the raw answer.
``timeout`` / ``failed``: the solver gave no answer (too slow, crashed, HTTP errors after retries);
``correct`` is empty and ``detail`` holds the reason. The sweep goes on in every case.

Reruns, failures and identity
-----------------------------
A rerun keeps ``ok`` and ``invalid`` trials and runs ``failed`` and ``timeout`` trials again
(``keep_failures=True`` keeps them too). The cache key holds the solver's name and identity (its
spec, options and the ``version`` it declares), so a changed solver starts afresh instead of
replaying old answers; ``fresh=True`` discards the named solvers' cached trials first. Only one
sweep runs on a study at a time (:class:`~twofold.experiments.machine.lock.SweepLock`). Worker
processes are killed with their parent. Secrets (header values, a command child's environment,
an API key) are written as ``***`` wherever they would appear in a log, sidecar or the cache.

Timeouts are enforced by the command and HTTP adapters (the child is restarted, the request cut);
an in-process solver cannot be interrupted, so a trial that returns after its timeout is logged as
``timeout`` and its answer discarded.
"""

from __future__ import annotations

import concurrent.futures as cf
import datetime as _dt
import os
import signal
import sys
import threading
import time
from collections import Counter
from collections.abc import Iterable, Iterator, Mapping, Sequence
from pathlib import Path
from typing import Any, Protocol

from twofold.study import __version__
from twofold.study.bank import Bank
from twofold.study.exceptions import InputError, ResponseError, RunnerError, SolverError
from twofold.study.families import get_family
from twofold.study.item import Item, canonical_json
from twofold.study.logs import SessionRecord, TrialLogWriter, read_sidecar
from twofold.study.render import render

from ._core import FreeText, TrialFailure, check_answer, coerce_answer, scrub
from .cache import CACHE_FILE, TrialCache
from .lock import SweepLock
from .spec import REDACTED_TABLES, SolverSpec, build_solver

__all__ = [
    "SUMMARY_COLUMNS",
    "ProgressSink",
    "plan_trials",
    "rebuild_session",
    "run_solvers",
    "run_trial",
]

#: columns of the summary table returned by :func:`run_solvers`
SUMMARY_COLUMNS = (
    "session",
    "solver",
    "seed",
    "config_hash",
    "n_trials",
    "n_cached",
    "n_run",
    "n_ok",
    "n_correct",
    "n_invalid",
    "n_timeout",
    "n_failed",
    "accuracy",
    "seconds",
    "first_failure",
)
_DETAIL_MAX = 4000
#: statuses a rerun keeps; the others (failed, timeout) are run again unless keep_failures
_KEPT = ("ok", "invalid")
#: seconds to wait for a Dask scheduler before giving up
DASK_CONNECT_TIMEOUT = 10.0


class ProgressSink(Protocol):
    """What the runner reports progress to (the CLI's progress bar fits)."""

    def set_total(self, total: int) -> None: ...

    def advance(self, k: int = 1, *, failed: int = 0) -> None: ...


def _now() -> str:
    return _dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat()


def plan_trials(bank: Bank, spec: SolverSpec) -> list[tuple[Item, str]]:
    """The trials of one session in order: each item (bank order) in each of its modes.

    With ``spec.modes`` set, only those modes (and only items offering them) are planned; with
    ``spec.families`` set, only items of those families.
    """
    out: list[tuple[Item, str]] = []
    for item in bank:
        if spec.families is not None and item.family not in spec.families:
            continue
        modes = item.modes if spec.modes is None else [m for m in spec.modes if m in item.modes]
        out.extend((item, m) for m in modes)
    return out


def _clip(text: Any) -> str | None:
    if text is None:
        return None
    if not isinstance(text, str):
        text = repr(text)
    return text if len(text) <= _DETAIL_MAX else text[: _DETAIL_MAX - 1] + "…"


def run_trial(
    solver: Any,
    item: Item,
    mode: str,
    *,
    medium: str,
    timeout: float | None = None,
    t0: float | None = None,
) -> dict[str, Any]:
    """Run and score one trial; never raises for a solver's fault.

    A reply of the wrong shape (an explanation that is not text, a non-finite effort, an answer
    that is not JSON or too large...) is logged as ``invalid`` with the reason.

    Returns
    -------
    dict
        The trial's log fields: item, family, mode, response, correct, error_type, status,
        effort, effort_unit, onset_s, response_s, detail.
    """
    t0 = time.time() if t0 is None else t0
    try:
        return _run_trial(solver, item, mode, medium=medium, timeout=timeout, t0=t0)
    except Exception as err:  # the last line of defence: one trial never stops the sweep
        return {
            "item": item.id,
            "family": item.family,
            "mode": mode,
            "status": "failed",
            "detail": _clip(f"could not run or score the trial: {type(err).__name__}: {err}"),
            "onset_s": None,
            "response_s": round(time.time() - t0, 6),
        }


def _run_trial(
    solver: Any, item: Item, mode: str, *, medium: str, timeout: float | None, t0: float
) -> dict[str, Any]:
    fam = get_family(item.family)
    row: dict[str, Any] = {
        "item": item.id,
        "family": item.family,
        "mode": mode,
        "response": None,
        "correct": None,
        "error_type": None,
        "status": "ok",
        "effort": None,
        "effort_unit": None,
        "onset_s": round(time.time() - t0, 6),
        "response_s": None,
        "detail": None,
    }
    try:
        view = render(item, medium, mode)
    except Exception as err:  # a family bug must not stop the sweep
        row.update(status="failed", detail=_clip(f"could not render: {type(err).__name__}: {err}"))
        row["response_s"] = round(time.time() - t0, 6)
        return row
    start = time.perf_counter()
    try:
        if getattr(solver, "takes_item_id", False):
            ans = solver.solve(view, mode, item=item.id, family=item.family)
        else:
            ans = solver.solve(view, mode)
        ans = check_answer(coerce_answer(ans))
    except TrialFailure as err:
        detail = err.reason + (f"\nraw: {_clip(err.raw)}" if err.raw else "")
        row.update(status=err.status, detail=_clip(detail))
        if err.status == "invalid":
            row["correct"] = False
        ans = None
    except Exception as err:  # the solver's own bug: log it, go on
        row.update(status="failed", detail=_clip(f"solver raised {type(err).__name__}: {err}"))
        ans = None
    elapsed = time.perf_counter() - start
    row["response_s"] = round(time.time() - t0, 6)
    if ans is None:
        return row
    if ans.effort is not None:
        row["effort"], row["effort_unit"] = float(ans.effort), ans.effort_unit
    else:
        row["effort"], row["effort_unit"] = elapsed, "seconds"
    if timeout is not None and elapsed > timeout:
        row.update(
            status="timeout", detail=f"answered after {elapsed:.3g} s (timeout {timeout:g} s)"
        )
        return row
    answer = ans.answer
    try:
        if answer is None:
            raise ResponseError(
                "solver gave no answer" + (f" ({ans.explanation})" if ans.explanation else "")
            )
        if isinstance(answer, FreeText):
            answer = fam.parse_text(item, str(answer), mode)
        response = fam.normalize(item, answer, mode)
        canonical_json(response)  # a response the log cannot hold is invalid here, not later
        score = fam.score(item, response, mode)
    except (ResponseError, InputError, TypeError, ValueError, LookupError, RecursionError) as err:
        raw = ans.raw if ans.raw is not None else ans.answer
        detail = str(err) if raw is None else f"{err}\nraw: {_clip(raw)}"
        row.update(status="invalid", correct=False, detail=_clip(detail))
        return row
    row.update(
        response=response,  # the log writer serialises it
        correct=bool(score.correct),
        error_type=score.error_type,
        detail=_clip(ans.explanation),
    )
    return row


# -- workers (local processes or Dask) ---

_WORKER_SOLVERS: dict[tuple[str, int], Any] = {}
_WORKER_LOCK = threading.Lock()
_PR_SET_PDEATHSIG = 1


def _die_with_parent(parent: int) -> None:
    """Worker initializer: make the kernel kill this process when its parent dies.

    On Linux ``prctl(PR_SET_PDEATHSIG, SIGKILL)``; elsewhere (or if that fails) a daemon thread
    that exits the process once the parent is gone. A parent already gone exits at once.
    """
    armed = False
    if sys.platform.startswith("linux"):
        try:
            import ctypes

            libc = ctypes.CDLL(None, use_errno=True)
            armed = libc.prctl(_PR_SET_PDEATHSIG, int(signal.SIGKILL), 0, 0, 0) == 0
        except (OSError, AttributeError):
            armed = False
    if os.getppid() != parent:
        os._exit(1)
    if not armed:

        def watch() -> None:
            while os.getppid() == parent:
                time.sleep(0.5)
            os._exit(1)

        threading.Thread(target=watch, name="twofold-parent-watch", daemon=True).start()


def _worker_solver(spec_dict: dict[str, Any], seed: int) -> tuple[Any, str]:
    spec = SolverSpec.from_dict(spec_dict)
    key = (spec.config_hash, seed)
    with _WORKER_LOCK:
        if key not in _WORKER_SOLVERS:
            _WORKER_SOLVERS[key] = build_solver(spec, seed)
        solver = _WORKER_SOLVERS[key]
    return solver, spec.medium or solver.medium


def solve_chunk(
    spec_dict: dict[str, Any],
    seed: int,
    tasks: Sequence[tuple[int, Item, str]],
    t0: float,
    timeout: float | None,
) -> list[tuple[int, dict[str, Any]]]:
    """Run a chunk of trials in a worker (process or Dask); the solver is built once per worker."""
    try:
        solver, medium = _worker_solver(spec_dict, seed)
    except SolverError as err:
        return [
            (
                k,
                {
                    "item": it.id,
                    "family": it.family,
                    "mode": m,
                    "status": "failed",
                    "detail": f"worker could not build the solver: {err}",
                },
            )
            for k, it, m in tasks
        ]
    return [
        (k, run_trial(solver, it, m, medium=medium, timeout=timeout, t0=t0)) for k, it, m in tasks
    ]


def _chunks(seq: Sequence[Any], size: int) -> Iterator[Sequence[Any]]:
    for i in range(0, len(seq), size):
        yield seq[i : i + size]


class _Executor:
    """Runs pending trials of a session and yields ``(trial_index, row)`` as they finish."""

    def __init__(self, *, workers: int, dask: Any, connect_timeout: float = DASK_CONNECT_TIMEOUT):
        self.workers = max(1, workers)
        self.dask = dask
        self.connect_timeout = connect_timeout
        self._pool: cf.ProcessPoolExecutor | None = None
        self._client: Any = None
        self._own_client = False

    def connect(self) -> None:
        """Reach the Dask scheduler now (before anything is written); no-op without Dask.

        Raises
        ------
        RunnerError
            The scheduler cannot be reached within ``connect_timeout`` seconds.
        """
        if self.dask is None or self._client is not None:
            return
        if not isinstance(self.dask, str):
            self._client = self.dask
            return
        try:
            from dask.distributed import Client, LocalCluster
        except ImportError:
            raise RunnerError(
                "--dask needs the distributed package: pip install 'twofold[cluster]'."
            ) from None
        if self.dask == "local":
            cluster = LocalCluster(
                n_workers=self.workers, threads_per_worker=1, dashboard_address=None
            )
            self._client = Client(cluster)
        else:
            try:
                self._client = Client(self.dask, timeout=self.connect_timeout)
            except (OSError, TimeoutError, ValueError) as err:
                raise RunnerError(
                    f"--dask: cannot reach the scheduler at {self.dask} within "
                    f"{self.connect_timeout:g} s ({type(err).__name__}); start it or check the "
                    "address. Nothing was written."
                ) from None
        self._own_client = True

    def run(
        self,
        solver: Any,
        spec: SolverSpec,
        seed: int,
        tasks: list[tuple[int, Item, str]],
        t0: float,
    ) -> Iterator[tuple[int, dict[str, Any]]]:
        medium = spec.medium or solver.medium
        adapter = spec.adapter
        timeout = None if adapter is not None and adapter.own_timeout else spec.timeout
        if self.dask is not None:
            yield from self._run_dask(spec, seed, tasks, t0, timeout)
            return
        in_flight = int(getattr(solver, "max_in_flight", 1) or 1)
        in_processes = adapter is None or adapter.worker_processes
        if self.workers > 1 and in_processes and len(tasks) > 1:
            yield from self._run_processes(spec, seed, tasks, t0, timeout)
        elif in_flight > 1:
            with cf.ThreadPoolExecutor(in_flight, thread_name_prefix="twofold-trial") as pool:
                futs = {
                    pool.submit(run_trial, solver, it, m, medium=medium, timeout=timeout, t0=t0): k
                    for k, it, m in tasks
                }
                try:
                    for fut in cf.as_completed(futs):
                        yield futs[fut], fut.result()
                finally:
                    for f in futs:
                        f.cancel()
        else:
            for k, it, m in tasks:
                yield k, run_trial(solver, it, m, medium=medium, timeout=timeout, t0=t0)

    def _chunk_size(self, n: int) -> int:
        return max(1, min(16, n // (self.workers * 4) or 1))

    def _run_processes(self, spec, seed, tasks, t0, timeout):  # type: ignore[no-untyped-def]
        if self._pool is None:
            self._pool = cf.ProcessPoolExecutor(
                self.workers, initializer=_die_with_parent, initargs=(os.getpid(),)
            )
        futs = [
            self._pool.submit(solve_chunk, spec.to_dict(), seed, list(ch), t0, timeout)
            for ch in _chunks(tasks, self._chunk_size(len(tasks)))
        ]
        try:
            for fut in cf.as_completed(futs):
                yield from fut.result()
        finally:
            for f in futs:
                f.cancel()

    def _run_dask(self, spec, seed, tasks, t0, timeout):  # type: ignore[no-untyped-def]
        from dask.distributed import as_completed

        self.connect()
        client = self._client
        futs = [
            client.submit(solve_chunk, spec.to_dict(), seed, list(ch), t0, timeout, pure=False)
            for ch in _chunks(tasks, self._chunk_size(len(tasks)))
        ]
        try:
            for fut in as_completed(futs):
                yield from fut.result()
        finally:
            for f in futs:
                f.cancel()

    def close(self) -> None:
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)
            self._pool = None
        if self._client is not None and self._own_client:
            cluster = getattr(self._client, "cluster", None)
            self._client.close()
            if cluster is not None:
                cluster.close()
        self._client = None


# -- secrets ---


def solver_secrets(spec: SolverSpec, solver: Any = None) -> list[str]:
    """Every secret a solver was configured with: header and environment values, API keys.

    These are replaced by ``***`` in every row before it is cached or logged.
    """
    out: list[str] = []
    for table in REDACTED_TABLES:
        values = spec.options.get(table)
        if isinstance(values, Mapping):
            out.extend(str(v) for v in values.values() if v is not None)
    declared = getattr(solver, "secrets", None)
    if declared:
        out.extend(str(v) for v in declared)
    return out


def _scrub_row(row: dict[str, Any], secrets: Sequence[str]) -> dict[str, Any]:
    if not secrets:
        return row
    out = {k: scrub(v, secrets) for k, v in row.items()}
    response = out.get("response")
    if response is not None and not isinstance(response, str):
        text = canonical_json(response)
        if scrub(text, secrets) != text:
            out["response"] = scrub(text, secrets)
    return out


# -- sessions ---


def _session_row(
    study: Any, bank: Bank, session: str, trial: int, fields: dict[str, Any]
) -> dict[str, Any]:
    row = {
        "study": study.name,
        "bank_hash": bank.hash,
        "respondent": session,
        "kind": "machine",
        "synthetic": False,
        "session": session,
        "form": "all",
        "block": "main",
        "trial": trial,
        "rt_ms": None,
    }
    row.update(fields)
    return row


def rebuild_session(path: Path, rows: Iterable[dict[str, Any]]) -> int:
    """Rewrite a session CSV from ``rows`` (sorted by trial) atomically; return the row count."""
    tmp = path.with_name(f".{path.name}.rebuild")
    tmp.unlink(missing_ok=True)
    n = 0
    try:
        with TrialLogWriter(tmp, sidecar=tmp.with_suffix(".json"), fsync=False) as w:
            for row in sorted(rows, key=lambda r: r["trial"]):
                w.append(row)
                n += 1
            os.fsync(w._fh.fileno())
        os.replace(tmp, path)
    finally:
        tmp.unlink(missing_ok=True)
    return n


def _prompt_detail(solver: Any) -> dict[str, Any]:
    """``prompt_sha256`` of a solver that wraps views in a prompt template (chat solvers)."""
    sha = getattr(solver, "prompt_sha256", None)
    return {} if sha is None else {"prompt_sha256": str(sha)}


def _sidecar_base(
    study: Any, bank: Bank, spec: SolverSpec, seed: int, identity: str, solver: Any
) -> dict[str, Any]:
    session = spec.session_id(seed)
    version = getattr(solver, "version", None)
    record = SessionRecord(
        study=study.name,
        bank_hash=bank.hash,
        session=session,
        respondent=session,
        kind="machine",
        synthetic=False,
        form="all",
        details={
            "twofold_version": __version__,
            "solver": spec.name,
            "seed": seed,
            "solver_spec": spec.spec,
            "solver_version": None if version is None else str(version),
            "config_hash": identity,
            "solver_config": spec.config(),
            "medium": spec.medium or getattr(solver, "medium", None),
            **_prompt_detail(solver),
        },
    )
    run_state = ("status", "started", "ended", "n_trials", "interruptions")
    return {k: v for k, v in record.to_dict().items() if k not in run_state}


def _cached_rows(
    cache: TrialCache,
    bank: Bank,
    spec: SolverSpec,
    identity: str,
    seed: int,
    *,
    keep_failures: bool,
) -> dict[tuple[str, str], dict[str, Any]]:
    return cache.done(
        bank.hash, spec.name, identity, seed, statuses=None if keep_failures else _KEPT
    )


def _run_session(
    study: Any,
    bank: Bank,
    spec: SolverSpec,
    seed: int,
    solver: Any,
    cache: TrialCache,
    executor: _Executor,
    progress: ProgressSink | None,
    *,
    keep_failures: bool = False,
) -> dict[str, Any]:
    t_start = time.monotonic()
    session = spec.session_id(seed)
    identity = spec.identity_hash(solver)
    secrets = solver_secrets(spec, solver)
    folder = study.logs_dir / "machine"
    folder.mkdir(parents=True, exist_ok=True)
    csv_path, side_path = folder / f"{session}.csv", folder / f"{session}.json"
    plan = plan_trials(bank, spec)
    index = {(it.id, m): k for k, (it, m) in enumerate(plan)}
    cached = _cached_rows(cache, bank, spec, identity, seed, keep_failures=keep_failures)
    rows: dict[int, dict[str, Any]] = {}
    for key, row in cached.items():
        if key in index:
            rows[index[key]] = {
                **row,
                "trial": index[key],
                "session": session,
                "respondent": session,
            }
    pending = [(k, it, m) for k, (it, m) in enumerate(plan) if k not in rows]
    n_cached = len(rows)

    previous = read_sidecar(side_path) if side_path.exists() else {}
    if previous.get("config_hash") not in (None, identity):
        previous = {}  # another solver identity: a new session, not a resumed one
    interruptions = list(previous.get("interruptions", []))
    if previous.get("status") == "running":
        interruptions.append(
            {
                "at": _now(),
                "event": "resumed after a run that did not finish",
                "trials_done": len(rows),
            }
        )
    rebuild_session(csv_path, rows.values())
    units: Counter[str] = Counter(r["effort_unit"] for r in rows.values() if r.get("effort_unit"))
    n_run = 0
    with TrialLogWriter(csv_path, sidecar=side_path, fsync=False) as writer:
        base = _sidecar_base(study, bank, spec, seed, identity, solver)
        writer.update_sidecar(
            **base,
            status="running",
            started=previous.get("started", _now()),
            ended=None,
            n_trials=len(rows),
            n_planned=len(plan),
            interruptions=interruptions,
            effort_unit=units.most_common(1)[0][0] if units else None,
        )
        t0 = time.time() - float(previous.get("elapsed_s", 0.0) or 0.0)
        try:
            for k, fields in executor.run(solver, spec, seed, pending, t0):
                row = _scrub_row(_session_row(study, bank, session, k, fields), secrets)
                cache.put(bank.hash, spec.name, identity, seed, row)
                writer.append(row)
                rows[k] = row
                n_run += 1
                if row.get("effort_unit"):
                    units[row["effort_unit"]] += 1
                if progress is not None:
                    progress.advance(1, failed=int(row["status"] in ("failed", "timeout")))
        except BaseException:
            interruptions.append({"at": _now(), "event": "interrupted", "trials_done": len(rows)})
            writer.update_sidecar(
                status="aborted",
                ended=_now(),
                n_trials=len(rows),
                interruptions=interruptions,
            )
            raise
    # the finished session, in trial order, exactly as cached: the same bytes however the
    # trials were scheduled, interrupted or spread over processes
    missing = sorted(set(range(len(plan))) - set(rows))
    if missing:  # pragma: no cover - every pending trial yields a row
        raise RunnerError(
            f"session {session}: {len(missing)} planned trials have no row (first: trial "
            f"{missing[0]}); run again to finish them."
        )
    rebuild_session(csv_path, rows.values())
    counts: Counter[str] = Counter(r["status"] for r in rows.values())
    correct = sum(1 for r in rows.values() if r.get("correct") is True)
    failures = [r for _, r in sorted(rows.items()) if r["status"] in ("failed", "timeout")]
    with TrialLogWriter(csv_path, sidecar=side_path, fsync=False) as final:
        final.update_sidecar(
            status="complete",
            ended=_now(),
            n_trials=len(rows),
            n_ok=counts["ok"],
            n_invalid=counts["invalid"],
            n_timeout=counts["timeout"],
            n_failed=counts["failed"],
            effort_unit=units.most_common(1)[0][0] if units else None,
            elapsed_s=round(time.time() - t0, 3),
        )
    total = len(rows)
    first = None
    if failures:
        first = str(failures[0].get("detail") or failures[0]["status"]).splitlines()[0]
    return {
        "session": session,
        "solver": spec.name,
        "seed": seed,
        "config_hash": identity,
        "n_trials": total,
        "n_cached": n_cached,
        "n_run": n_run,
        "n_ok": counts["ok"],
        "n_correct": correct,
        "n_invalid": counts["invalid"],
        "n_timeout": counts["timeout"],
        "n_failed": counts["failed"],
        "accuracy": correct / total if total else float("nan"),
        "seconds": time.monotonic() - t_start,
        "first_failure": first,
    }


def _close(solver: Any) -> None:
    close = getattr(solver, "close", None)
    if callable(close):
        close()


def run_solvers(
    study: Any,
    solvers: Sequence[SolverSpec],
    *,
    workers: int = 1,
    dask: Any = None,
    progress: ProgressSink | None = None,
    cache_path: str | os.PathLike[str] | None = None,
    bank: Bank | None = None,
    keep_failures: bool = False,
    fresh: bool = False,
    dask_timeout: float = DASK_CONNECT_TIMEOUT,
) -> Any:
    """Run every solver x seed over the study's bank; resume from the trial cache.

    Parameters
    ----------
    study : Study
        A loaded study (:func:`twofold.study.load_study`); its bank is generated when missing.
    solvers : sequence of SolverSpec
        The machine respondents (see :func:`~twofold.experiments.machine.study_solvers`).
    workers : int, default 1
        Local processes for CPU-bound solvers (1 runs in this process). HTTP solvers always run
        in this process with their ``concurrency`` requests in flight. Workers are killed when
        this process dies.
    dask : str or distributed.Client, optional
        ``"local"`` (a LocalCluster with ``workers`` workers), a scheduler address, or a Client.
    progress : ProgressSink, optional
        Receives ``set_total`` once and ``advance`` per trial.
    cache_path : path-like, optional
        The trial cache; default ``<study>/cache/machine_trials.sqlite``.
    bank : Bank, optional
        The study's bank, already loaded (default: ``study.bank()``, loaded and validated here).
    keep_failures : bool, default False
        Keep cached ``failed`` and ``timeout`` trials instead of running them again.
    fresh : bool, default False
        Discard the cached trials of these solvers (only these) and run everything again; an
        unreadable cache file is moved aside.
    dask_timeout : float, default 10
        Seconds to wait for a Dask scheduler address before giving up.

    Returns
    -------
    pandas.DataFrame
        One row per session with columns :data:`SUMMARY_COLUMNS`: session, solver, seed,
        config_hash (the solver identity keying the cache), n_trials, n_cached (resumed from the
        cache), n_run (run now), n_ok, n_correct, n_invalid, n_timeout, n_failed, accuracy
        (correct / n_trials), seconds, first_failure (the first failed trial's reason, or None).

    Raises
    ------
    SpecError
        The study's prompt template (``[machine.prompt]``) is malformed.
    SolverError
        A solver cannot be built (checked for every solver before anything is written).
    RunnerError
        Another sweep holds the study, the Dask scheduler cannot be reached, or the trial
        cache is unreadable.
    """
    import pandas as pd

    if not solvers:
        raise SolverError(
            "no solver to run: pass --solver SPEC or add [[solvers]] entries to study.toml."
        )
    names = [s.name for s in solvers]
    dupes = sorted({n for n in names if names.count(n) > 1})
    if dupes:
        raise SolverError(
            f"solver name {dupes[0]!r} is used twice; give each solver its own name "
            "(name in [[solvers]], or --name with a single --solver)."
        )
    # the study's prompt template ([machine.prompt]) reaches the chat solvers as default options
    from .chat import study_prompt, with_study_prompt

    prompt = study_prompt(study)
    solvers = [with_study_prompt(s, prompt) for s in solvers]
    if bank is None:
        bank = study.bank()
    # build each solver's first session now: a bad spec or option fails before anything is
    # written, and so does an unreachable scheduler
    built: dict[tuple[str, int], Any] = {}
    executor = _Executor(workers=workers, dask=dask, connect_timeout=dask_timeout)
    lock = SweepLock(study.path("cache", "cache"))
    cache: TrialCache | None = None
    try:
        for spec in solvers:
            built[(spec.name, spec.seeds[0])] = build_solver(spec, spec.seeds[0])
        executor.connect()
        lock.acquire()
        cache = TrialCache(cache_path or study.path("cache", "cache") / CACHE_FILE, recover=fresh)
        if fresh:
            for spec in solvers:
                cache.forget(spec.name)
        if progress is not None:
            pending = 0
            for spec in solvers:
                keys = {(it.id, m) for it, m in plan_trials(bank, spec)}
                first = built[(spec.name, spec.seeds[0])]
                identity = spec.identity_hash(first)
                for seed in spec.seeds:
                    done = _cached_rows(
                        cache, bank, spec, identity, seed, keep_failures=keep_failures
                    )
                    pending += len(keys - set(done))
            progress.set_total(max(pending, 0))
        out = []
        for spec in solvers:
            for seed in spec.seeds:
                solver = built.pop((spec.name, seed), None)
                if solver is None:
                    solver = build_solver(spec, seed)
                try:
                    out.append(
                        _run_session(
                            study,
                            bank,
                            spec,
                            seed,
                            solver,
                            cache,
                            executor,
                            progress,
                            keep_failures=keep_failures,
                        )
                    )
                finally:
                    _close(solver)
    finally:
        executor.close()
        if cache is not None:
            cache.close()
        lock.release()
        for solver in built.values():
            _close(solver)
    return pd.DataFrame(out, columns=list(SUMMARY_COLUMNS))
