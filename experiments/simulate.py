"""Simulated human respondents, for piloting, sample planning, the example study and tests.

Responses come from a two-parameter logistic (2PL) item-response model whose item difficulties
follow the items' recorded factors; response times are log-normal and grow with difficulty;
wrong answers are drawn from each family's own error model (``Family.sample_error``), so they
carry realistic error types. Every row and sidecar is marked ``synthetic = true``.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
from collections.abc import Callable
from typing import Any

import numpy as np
from twofold.study import Bank, Study
from twofold.study.checks import check_int, check_keys, check_number
from twofold.study.exceptions import SpecError
from twofold.study.families import Rejected, get_family
from twofold.study.generate import item_rng
from twofold.study.item import Item
from twofold.study.logs import SessionRecord, TrialLogWriter, write_json_atomic

__all__ = ["SimulationSettings", "item_parameters", "simulate_humans"]


@dataclasses.dataclass(frozen=True)
class SimulationSettings:
    """Options of the ``[simulate]`` table of ``study.toml`` (all optional).

    Attributes
    ----------
    humans : int, default 30
        Number of simulated respondents.
    ability_sd : float, default 1.0
        Standard deviation of respondents' abilities (mean 0).
    factor_weight : float, default 0.8
        Logit difficulty added per standard deviation of the item's summed factor score.
    item_sd : float, default 0.5
        Item-specific difficulty noise (logits).
    variant_shift : float, default 0.2
        Extra difficulty of an isomorph over its parent (logits).
    rt_sd : float, default 0.35
        Residual standard deviation of log response time.
    """

    humans: int = 30
    ability_sd: float = 1.0
    factor_weight: float = 0.8
    item_sd: float = 0.5
    variant_shift: float = 0.2
    rt_sd: float = 0.35

    @classmethod
    def from_table(
        cls, table: dict[str, Any], *, where: str = "study.toml: simulate"
    ) -> SimulationSettings:
        known = {f.name for f in dataclasses.fields(cls)}
        check_keys(table, sorted(known), where=where, error=SpecError)
        kw: dict[str, Any] = {}
        if "humans" in table:
            kw["humans"] = check_int(
                "humans", table["humans"], low=1, high=100_000, where=where, error=SpecError
            )
        for key in known - {"humans"}:
            if key in table:
                kw[key] = check_number(
                    key, table[key], low=0, high=10, where=where, error=SpecError
                )
        return cls(**kw)


def _factor_scores(items: list[Item], rng: np.random.Generator) -> np.ndarray:
    """Summed standardised factor score per item (within one family)."""
    names = sorted({k for it in items for k in it.factors})
    total = np.zeros(len(items))
    used = 0
    for name in names:
        vals = [it.factors.get(name) for it in items]
        if all(isinstance(v, bool | int | float) and v is not None for v in vals):
            x = np.asarray(vals, dtype=float)
        else:  # categorical: each level gets its own random difficulty offset
            levels = sorted({str(v) for v in vals})
            offset = dict(zip(levels, rng.normal(0, 1, len(levels)), strict=True))
            x = np.asarray([offset[str(v)] for v in vals])
        if x.std() > 0:
            total += (x - x.mean()) / x.std()
            used += 1
    if used:
        total /= np.sqrt(used)
        total = (total - total.mean()) / (total.std() if total.std() > 0 else 1.0)
    return total


def item_parameters(
    bank: Bank, settings: SimulationSettings, seed: int
) -> dict[str, tuple[float, float]]:
    """Generating (discrimination a, difficulty b) per item id.

    ``b`` = factor_weight × (standardised summed factors of the item within its family) + noise;
    an isomorph gets its parent's difficulty plus ``variant_shift`` and its own noise.
    """
    _, rng = item_rng(seed, "simulate", "items")
    params: dict[str, tuple[float, float]] = {}
    parents = [it for it in bank if it.variant_of is None]
    for fam in sorted({it.family for it in parents}):
        its = [it for it in parents if it.family == fam]
        score = _factor_scores(its, rng)
        for it, s in zip(its, score, strict=True):
            b = settings.factor_weight * s + rng.normal(0, settings.item_sd) - 0.5
            a = float(np.exp(rng.normal(0.2, 0.25)))
            params[it.id] = (a, float(b))
    for it in bank:
        if it.id in params:
            continue
        pa, pb = params.get(it.variant_of or "", (1.0, 0.0))
        params[it.id] = (pa, pb + settings.variant_shift + rng.normal(0, settings.item_sd / 2))
    return params


def _now() -> str:
    return _dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat()


def simulate_humans(
    study: Study,
    *,
    n: int | None = None,
    seed: int | None = None,
    replace: bool = False,
    progress: Callable[[int], None] | None = None,
) -> dict[str, Any]:
    """Write ``n`` synthetic human sessions for ``study`` through the trial-log writer.

    Each respondent answers every item of the bank once, in a random order, in the item's
    first response mode. Sessions are ``S001``, ``S002``... in ``logs/simulated/`` (never beside
    real sessions in ``logs/human/``); the generating parameters go to ``logs/simulation.json``.

    Returns
    -------
    dict
        ``sessions`` (ids), ``n_trials``, ``item_params`` ({item: [a, b]}), ``abilities``.
    """
    settings = SimulationSettings.from_table(study.table("simulate"))
    n = settings.humans if n is None else check_int("humans", n, low=1, high=100_000)
    seed = study.seed if seed is None else seed
    bank = study.bank()
    out_dir = study.logs_dir / "simulated"
    existing = sorted(out_dir.glob("S[0-9][0-9][0-9]*.csv")) if out_dir.exists() else []
    if existing and not replace:
        raise SpecError(
            f"{out_dir}: {len(existing)} simulated sessions exist already (e.g. "
            f"{existing[0].stem}); pass replace=True (--replace) to write new ones."
        )
    for p in existing:
        p.unlink()
        p.with_suffix(".json").unlink(missing_ok=True)
    params = item_parameters(bank, settings, seed)
    _, rng = item_rng(seed, "simulate", "people")
    theta = rng.normal(0, settings.ability_sd, n)
    items = list(bank)
    sessions = []
    n_trials = 0
    for k in range(n):
        sid = f"S{k + 1:03d}"
        sessions.append(sid)
        order = rng.permutation(len(items))
        path = out_dir / f"{sid}.csv"
        started = _now()
        with TrialLogWriter(path, fsync=False) as log:
            clock = 2.0
            for t, idx in enumerate(order):
                item = items[idx]
                n_trials += 1
                row = _trial(
                    item, study, bank, sid, t, theta[k], params[item.id], clock, settings, rng
                )
                log.append(row)
                clock = row["response_s"] + float(rng.uniform(0.5, 1.5))  # feedback + fixation
            record = SessionRecord(
                study=study.name,
                bank_hash=bank.hash,
                session=sid,
                respondent=sid,
                kind="human",
                synthetic=True,
                form="all",
                status="complete",
                started=started,
                ended=_now(),
                n_trials=len(order),
                details=dict(
                    simulation={"theta": float(theta[k]), "seed": seed},
                    twofold_version=bank.meta.get("twofold_version"),
                ),
            )
            log.update_sidecar(**record.to_dict())
        if progress:
            progress(1)
    truth = {
        "synthetic": True,
        "model": "2PL, difficulty from item factors; log-normal response times",
        "settings": dataclasses.asdict(settings),
        "seed": seed,
        "item_params": {i: list(p) for i, p in params.items()},
        "abilities": {s: float(t) for s, t in zip(sessions, theta, strict=True)},
    }
    write_json_atomic(study.logs_dir / "simulation.json", truth)
    return {"sessions": sessions, "n_trials": n_trials, **truth}


def _trial(
    item: Item,
    study: Study,
    bank: Bank,
    sid: str,
    t: int,
    theta: float,
    ab: tuple[float, float],
    clock: float,
    settings: SimulationSettings,
    rng: np.random.Generator,
) -> dict[str, Any]:
    fam = get_family(item.family)
    mode = item.modes[0]
    a, b = ab
    p = 1.0 / (1.0 + np.exp(-a * (theta - b)))
    if rng.random() < p:
        response: Any = fam.correct_response(item, mode)
    else:
        try:
            response, _ = fam.sample_error(item, mode, rng)
        except Rejected:
            response = fam.correct_response(item, mode)
    score = fam.score(item, response, mode)
    base = fam.typical_rt_ms  # the family's typical median response time, ms
    rt = float(base * np.exp(0.3 * b - 0.15 * theta + rng.normal(0, settings.rt_sd)))
    return {
        "study": study.name,
        "bank_hash": bank.hash,
        "respondent": sid,
        "kind": "human",
        "synthetic": True,
        "session": sid,
        "form": "all",
        "block": "main",
        "trial": t,
        "item": item.id,
        "family": item.family,
        "mode": mode,
        "response": response,
        "correct": score.correct,
        "error_type": score.error_type,
        "status": "ok",
        "rt_ms": rt,
        "onset_s": clock,
        "response_s": clock + rt / 1000.0,
    }
