"""Test helper for the analysis tests: a tiny test-only family, a bank and simulated session logs.

The family ``tallyup`` (registered only inside :func:`tally_registered`) asks for the sum of a
row of small numbers; its factors are ``width`` (numbers in the row, 2-5) and ``layout`` (``row``
or ``ring``). An isomorph adds 10 to every number. Logs are written through
:class:`TrialLogWriter` exactly as the runners write them, with responses drawn from a logistic
model (person ability minus item difficulty) so the statistics have something to find.
"""

from __future__ import annotations

import contextlib
import json
from collections.abc import Iterator, Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
from twofold.study.bank import Bank, write_bank
from twofold.study.families import Family, ParamSpec
from twofold.study.item import Item
from twofold.study.logs import TrialLogWriter


class TallyFamily(Family):
    name = "tallyup"
    prefix = "tly"
    version = "1"
    modes = ("generate",)
    params = (
        ParamSpec("width", "int", 3, "numbers in the row", low=2, high=5),
        ParamSpec("layout", "choice", "row", "how the numbers are placed", options=("row", "ring")),
    )
    factors = ("width", "layout")
    variant_operators = {"shift": "add 10 to every number"}
    error_types = {
        "off_by_one": "the sum plus or minus one",
        "partial": "the sum of all but one number",
        "other": "any other wrong response",
    }

    def generate(self, params, rng, *, seed, modes, distractor_scheme, n_choices) -> Item:
        nums = [int(x) for x in rng.integers(1, 9, size=params["width"])]
        return Item.create(
            prefix=self.prefix,
            family=self.name,
            family_version=self.version,
            params=dict(params),
            factors={"width": params["width"], "layout": params["layout"]},
            modes=["generate"],
            stimulus={"numbers": nums},
            answer=sum(nums),
            seed=seed,
        )

    def vary(self, item: Item, operator: str, rng) -> Item:
        nums = [n + 10 for n in item.stimulus["numbers"]]
        return item.replace(
            prefix=self.prefix,
            stimulus={"numbers": nums},
            answer=sum(nums),
            variant_of=item.id,
            variant_operator=operator,
        )

    def classify_error(self, item: Item, response: Any, mode: str) -> str:
        if isinstance(response, int) and abs(response - item.answer) == 1:
            return "off_by_one"
        if isinstance(response, int) and response in {
            item.answer - n for n in item.stimulus["numbers"]
        }:
            return "partial"
        return "other"

    def sample_error(self, item: Item, mode: str, rng) -> tuple[Any, str]:
        kind = rng.choice(["off_by_one", "partial", "other"])
        if kind == "off_by_one":
            resp = item.answer + 1
        elif kind == "partial":
            resp = item.answer - max(item.stimulus["numbers"])
        else:
            resp = -7
        return resp, self.classify_error(item, resp, mode)

    def render_text(self, item: Item, mode: str) -> str:
        return "Add: " + " ".join(map(str, item.stimulus["numbers"]))

    def render_structured(self, item: Item, mode: str) -> dict[str, Any]:
        return {"numbers": item.stimulus["numbers"]}

    def draw(self, item, mode, fig) -> None:  # pragma: no cover - not used in these tests
        fig.text(0.5, 0.5, self.render_text(item, mode))


FAMILY = TallyFamily()


@contextlib.contextmanager
def tally_registered() -> Iterator[TallyFamily]:
    """Register the test family for the duration of a block, then remove it again.

    It is never left registered, so the shared tests that run over every registered family
    (collected after these modules are imported) do not see it.
    """
    from twofold.study.families import FAMILIES

    with FAMILIES.registered(FAMILY.name, FAMILY) as family:
        yield family


def make_bank(n_parents: int = 16, *, seed: int = 1, isomorphs: bool = True) -> Bank:
    """A bank of ``n_parents`` items over every width x layout, each with one isomorph."""
    fam = FAMILY
    rng = np.random.default_rng(seed)
    items: list[Item] = []
    for k in range(n_parents):
        params = {"width": 2 + k % 4, "layout": ("row", "ring")[(k // 4) % 2]}
        it = fam.generate(
            params,
            rng,
            seed=seed * 1000 + k,
            modes=["generate"],
            distractor_scheme=None,
            n_choices=0,
        )
        items.append(it)
        if isomorphs:
            items.append(fam.vary(it, "shift", rng))
    return Bank.from_items(items, seed=seed, created="2026-01-01T00:00:00+00:00")


def difficulty(item: Item) -> float:
    """The true simulated difficulty (log-odds of an error for an average respondent)."""
    b = -1.2 + 0.6 * (item.factors["width"] - 2) + (0.5 if item.factors["layout"] == "ring" else 0)
    return b + (0.3 if item.variant_of else 0.0)


def write_session(
    logs_dir: Path,
    bank: Bank,
    *,
    respondent: str,
    kind: str,
    ability: float,
    rng: np.random.Generator,
    study: str = "toy",
    solver: str | None = None,
    seed: int | None = None,
    synthetic: bool = True,
    items: Sequence[Item] | None = None,
    factor_slope: float = 0.0,
    bank_hash: str | None = None,
    n_trials: int | None = None,
    extra_rows: Sequence[Mapping[str, Any]] = (),
) -> Path:
    """Write one session log (CSV + sidecar) and return the CSV path.

    ``factor_slope`` adds to the effect of ``width`` for this respondent (machines that find
    wide rows easier or harder than people do).
    """
    fam = FAMILY
    items = list(bank.items if items is None else items)
    sub = "human" if kind == "human" else "machine"
    path = logs_dir / sub / f"{respondent}.csv"
    h = bank_hash or bank.hash
    order = rng.permutation(len(items))
    with TrialLogWriter(path, fsync=False) as log:
        for t, j in enumerate(order):
            it = items[j]
            eta = ability - difficulty(it) - factor_slope * (it.factors["width"] - 2)
            ok = rng.random() < 1 / (1 + np.exp(-eta))
            if ok:
                response, etype = it.answer, None
            else:
                response, etype = fam.sample_error(it, "generate", rng)
            sc = fam.score(it, response, "generate")
            assert sc.error_type == etype
            row = dict(
                study=study,
                bank_hash=h,
                respondent=respondent,
                kind=kind,
                synthetic=synthetic,
                session=respondent,
                form="F1" if kind == "human" else "all",
                block="main",
                trial=t,
                item=it.id,
                family=it.family,
                mode="generate",
                response=response,
                correct=sc.correct,
                error_type=sc.error_type,
                status="ok",
            )
            if kind == "human":
                row["rt_ms"] = float(np.exp(7.5 + 0.15 * it.factors["width"] + rng.normal(0, 0.3)))
            else:
                row["effort"] = float(np.exp(3 + 0.4 * it.factors["width"] + rng.normal(0, 0.2)))
                row["effort_unit"] = "nodes"
            log.append(row)
        for extra in extra_rows:
            log.append(dict(extra))
        side: dict[str, Any] = dict(
            study=study,
            bank_hash=h,
            session=respondent,
            respondent=respondent,
            kind=kind,
            synthetic=synthetic,
            form="F1" if kind == "human" else "all",
            status="complete",
            n_trials=len(items) if n_trials is None else n_trials,
            interruptions=[],
        )
        if kind == "machine":
            side.update(solver=solver, seed=seed, solver_spec="test:toy", effort_unit="nodes")
        log.update_sidecar(**side)
    return path


def make_study(
    root: Path,
    *,
    n_parents: int = 16,
    n_humans: int = 12,
    machines: Mapping[str, float] | None = None,
    seeds: Sequence[int] = (0, 1),
    seed: int = 7,
) -> Path:
    """Write a complete toy study (study.toml, bank, human and machine logs); return study.toml.

    ``machines`` maps solver names to an ability; the solver ``"widebot"`` (if present) also finds
    wide rows extra hard.
    """
    machines = {"steadybot": 1.0, "widebot": 0.5} if machines is None else machines
    bank = write_bank(make_bank(n_parents, seed=seed), root / "bank")
    rng = np.random.default_rng(seed)
    logs = root / "logs"
    for k in range(n_humans):
        write_session(
            logs,
            bank,
            respondent=f"S{k + 1:03d}",
            kind="human",
            ability=float(rng.normal(0.3, 0.8)),
            rng=rng,
        )
    for name, ability in machines.items():
        for s in seeds:
            write_session(
                logs,
                bank,
                respondent=f"{name}-s{s}",
                kind="machine",
                ability=ability,
                rng=rng,
                solver=name,
                seed=s,
                factor_slope=0.8 if name == "widebot" else 0.0,
            )
    toml = root / "study.toml"
    toml.write_text(
        '[study]\nname = "toy"\nseed = 7\n\n[bank]\npath = "bank"\n\n[analysis]\nn_boot = 200\n',
        encoding="utf-8",
    )
    return toml


def read_json(path: Path) -> Any:
    return json.loads(Path(path).read_text("utf-8"))
