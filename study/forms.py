"""Blocks and counterbalanced forms: which items each respondent gets, and in what order.

A study's ``[[blocks]]`` say what is presented (items, response mode, instructions, time limit,
practice items) and ``[forms]`` says how forms vary across respondents::

    [[blocks]]
    name = "letters"
    families = ["strings"]          # and/or items = ["str-0123456789ab", ...]
    mode = "generate"               # or "select"
    instructions = "instructions/letters.txt"   # absent: the shipped template
    time_limit_s = 90               # per item; 0 or absent: no limit
    practice = 2                    # practice items taken from the block (or a list of item ids)
    feedback = true                 # feedback after practice items
    state_rule = false              # contrast: also type the rule (kept verbatim)

    [forms]
    order = "williams"              # "fixed", "latin" (cyclic Latin square) or "williams"
    lists = 2                       # item lists rotated over blocks by a Latin square
    max_run = 3                     # at most 3 items of one family in a row (mixed blocks)
    separate_isomorphs = true       # no two items of one parent next to each other
    break_every = 20                # a break after every 20 items within a block (0: none)
    break_between_blocks = true
    respondents = 24                # default number of forms for ``twofold forms build``

Design
------
Block order follows the rows of a Latin square over the blocks: a cyclic square (each block once
in every position) or, with ``order = "williams"``, a Williams design (each block also directly
follows every other block equally often; an odd number of blocks needs two squares, so 2b rows).
With ``lists = L`` the items of each block are split into L lists, the members of one parent
group spread over different lists, so a respondent sees the parent or an isomorph, not both; the
list used for block b in a form with list l is ``(l + b) mod L``, another Latin square. Form k
(0-based) takes order row ``k mod R`` and list ``(k // R) mod L``, so every ``R * L`` consecutive
respondents complete the balance. Items are shuffled per form under the constraints, with a seed
derived from the study seed and the form number, so the same study gives the same forms and form
k does not change when more forms are built.

Forms are written to ``study.forms_dir`` as ``F001.json``...; ``design.json`` records the design
and the bank hash, ``assignment.json`` the respondent id of each form in use.
"""

from __future__ import annotations

import builtins
import dataclasses
import json
import zlib
from collections import Counter
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from .checks import check_choice, check_int, check_keys, check_number, fail
from .exceptions import SpecError
from .families import known_families
from .item import MODES, Item
from .logs import write_json_atomic

__all__ = [
    "BlockSpec",
    "Form",
    "FormBlock",
    "FormsSpec",
    "ORDERS",
    "assignment",
    "build_forms",
    "form_for",
    "latin_square",
    "load_forms",
    "parse_blocks",
    "parse_forms",
    "williams_square",
    "write_forms",
]

#: block-order designs
ORDERS = ("fixed", "latin", "williams")

_BLOCK_KEYS = (
    "name",
    "families",
    "items",
    "mode",
    "instructions",
    "time_limit_s",
    "practice",
    "feedback",
    "state_rule",
)
_FORM_KEYS = (
    "order",
    "lists",
    "max_run",
    "separate_isomorphs",
    "break_every",
    "break_between_blocks",
    "respondents",
)


# -- study-file tables ------------------------------------------------------------------------
@dataclasses.dataclass(frozen=True)
class BlockSpec:
    """One ``[[blocks]]`` entry, checked (item ids are resolved against the bank later)."""

    name: str
    families: tuple[str, ...]
    items: tuple[str, ...]
    mode: str
    instructions: str
    time_limit_s: float | None
    practice: int | tuple[str, ...]
    feedback: bool
    state_rule: bool = False


@dataclasses.dataclass(frozen=True)
class FormsSpec:
    """The ``[forms]`` table, checked, with defaults filled in."""

    order: str = "latin"
    lists: int = 1
    max_run: int = 3
    separate_isomorphs: bool = True
    break_every: int = 0
    break_between_blocks: bool = True
    respondents: int = 24


def _where(study: Any) -> str:
    return study.file.name


def _bool(field: str, value: Any, *, where: str) -> bool:
    if not isinstance(value, bool):
        raise fail(field, value, "true or false", where=where, error=SpecError)
    return value


def _str_list(field: str, value: Any, *, where: str, accepted: str) -> tuple[str, ...]:
    if isinstance(value, str):
        value = [value]
    if not isinstance(value, list) or not all(isinstance(v, str) and v for v in value):
        raise fail(field, value, accepted, where=where, error=SpecError)
    return tuple(value)


def parse_blocks(study: Any, *, check_files: bool = True) -> tuple[BlockSpec, ...]:
    """Check the study's ``[[blocks]]`` and return them.

    Parameters
    ----------
    study : Study
        A loaded study (:func:`twofold.study.load_study`).
    check_files : bool, default True
        Also require every instructions file to exist.

    Raises
    ------
    SpecError
        Naming the key (``blocks[1].mode``), what was found and what is accepted.
    """
    where = _where(study)
    raw = study.table("blocks")
    if not isinstance(raw, list) or not raw or not all(isinstance(b, dict) for b in raw):
        raise fail("blocks", raw, "one or more [[blocks]] tables", where=where, error=SpecError)
    out: list[BlockSpec] = []
    seen: set[str] = set()
    for i, b in enumerate(raw):
        key = f"blocks[{i}]"
        check_keys(b, _BLOCK_KEYS, prefix=f"{key}.", where=where, error=SpecError)
        name = b.get("name")
        if not isinstance(name, str) or not name.strip() or name in seen:
            raise fail(
                f"{key}.name",
                name,
                "a non-empty name, unique among blocks",
                where=where,
                error=SpecError,
            )
        seen.add(name)
        fams = _str_list(
            f"{key}.families",
            b.get("families", []),
            where=where,
            accepted="a list of family names: " + ", ".join(known_families()),
        )
        for f in fams:
            check_choice(f"{key}.families", f, known_families(), where=where, error=SpecError)
        items = _str_list(
            f"{key}.items", b.get("items", []), where=where, accepted="a list of item ids"
        )
        if not fams and not items:
            raise fail(
                f"{key}.families",
                None,
                "a list of families and/or items = [item ids]",
                where=where,
                error=SpecError,
            )
        mode = check_choice(
            f"{key}.mode", b.get("mode", "generate"), MODES, where=where, error=SpecError
        )
        # absent (""): the runner shows the shipped template for the block's family and mode
        instr = b.get("instructions", "")
        if not isinstance(instr, str):
            raise fail(
                f"{key}.instructions",
                instr,
                "the name of a text file in the study folder",
                where=where,
                error=SpecError,
            )
        if instr and check_files and not (study.root / instr).is_file():
            raise fail(
                f"{key}.instructions",
                instr,
                f"an existing text file (not found: {study.root / instr}; "
                "'twofold forms templates' writes one to edit)",
                where=where,
                error=SpecError,
            )
        tl = b.get("time_limit_s", 0)
        tl = check_number(f"{key}.time_limit_s", tl, low=0, high=3600, where=where, error=SpecError)
        practice = b.get("practice", 0)
        if isinstance(practice, list):
            practice = _str_list(
                f"{key}.practice",
                practice,
                where=where,
                accepted="a number of items or a list of item ids",
            )
        else:
            practice = check_int(
                f"{key}.practice", practice, low=0, high=20, where=where, error=SpecError
            )
        feedback = _bool(f"{key}.feedback", b.get("feedback", True), where=where)
        state_rule = _bool(f"{key}.state_rule", b.get("state_rule", False), where=where)
        out.append(
            BlockSpec(
                name=name,
                families=fams,
                items=items,
                mode=mode,
                instructions=instr,
                time_limit_s=tl or None,
                practice=practice,
                feedback=feedback,
                state_rule=state_rule,
            )
        )
    return tuple(out)


def parse_forms(study: Any) -> FormsSpec:
    """Check the study's ``[forms]`` table and return it with defaults filled in."""
    where = _where(study)
    raw = study.table("forms")
    if not isinstance(raw, dict):
        raise fail("forms", raw, "a [forms] table", where=where, error=SpecError)
    check_keys(raw, _FORM_KEYS, prefix="forms.", where=where, error=SpecError)
    d = FormsSpec()
    return FormsSpec(
        order=check_choice(
            "forms.order", raw.get("order", d.order), ORDERS, where=where, error=SpecError
        ),
        lists=check_int(
            "forms.lists", raw.get("lists", d.lists), low=1, high=26, where=where, error=SpecError
        ),
        max_run=check_int(
            "forms.max_run",
            raw.get("max_run", d.max_run),
            low=1,
            high=1000,
            where=where,
            error=SpecError,
        ),
        separate_isomorphs=_bool(
            "forms.separate_isomorphs",
            raw.get("separate_isomorphs", d.separate_isomorphs),
            where=where,
        ),
        break_every=check_int(
            "forms.break_every",
            raw.get("break_every", d.break_every),
            low=0,
            high=10000,
            where=where,
            error=SpecError,
        ),
        break_between_blocks=_bool(
            "forms.break_between_blocks",
            raw.get("break_between_blocks", d.break_between_blocks),
            where=where,
        ),
        respondents=check_int(
            "forms.respondents",
            raw.get("respondents", d.respondents),
            low=1,
            high=100000,
            where=where,
            error=SpecError,
        ),
    )


# -- Latin squares ----------------------------------------------------------------------------
def latin_square(n: int) -> list[list[int]]:
    """The cyclic Latin square of order ``n``: row r is ``r, r+1, ..., r+n-1 (mod n)``."""
    return [[(r + c) % n for c in range(n)] for r in range(n)]


def williams_square(n: int) -> list[list[int]]:
    """A Williams design for ``n`` treatments: rows where each treatment directly follows
    every other one equally often.

    Notes
    -----
    The first row is ``0, 1, n-1, 2, n-2, ...``; row r adds r (mod n). For odd ``n`` the mirror
    rows are appended, giving ``2n`` rows.

    References
    ----------
    Williams, E. J. (1949). Experimental designs balanced for the estimation of residual effects
    of treatments. Australian Journal of Scientific Research, A2, 149-168.
    """
    first = [0]
    lo, hi = 1, n - 1
    for k in range(1, n):
        if k % 2:
            first.append(lo)
            lo += 1
        else:
            first.append(hi)
            hi -= 1
    rows = [[(v + r) % n for v in first] for r in range(n)]
    if n % 2:
        rows += [row[::-1] for row in rows]
    return rows


def _orders(spec: FormsSpec, n_blocks: int) -> list[list[int]]:
    if spec.order == "fixed" or n_blocks == 1:
        return [list(range(n_blocks))]
    if spec.order == "williams":
        return williams_square(n_blocks)
    return latin_square(n_blocks)


# -- forms ----------------------------------------------------------------------------------
@dataclasses.dataclass(frozen=True)
class FormBlock:
    """One block of a form.

    Attributes
    ----------
    name, mode : str
        Block name and response mode.
    instructions : str
        Instructions file, relative to the study folder.
    time_limit_s : float or None
        Time limit per item (None: no limit).
    practice : tuple of str
        Practice item ids (shown first, with feedback when ``feedback``; not logged as trials).
    items : tuple of str
        The block's item ids in presentation order.
    feedback : bool
        Whether practice items get feedback.
    state_rule : bool
        Whether respondents also type a statement of the rule (kept verbatim).
    """

    name: str
    mode: str
    instructions: str
    time_limit_s: float | None
    practice: tuple[str, ...]
    items: tuple[str, ...]
    feedback: bool = True
    state_rule: bool = False


@dataclasses.dataclass(frozen=True)
class Form:
    """The ordered list of items one respondent gets.

    Attributes
    ----------
    form_id : str
        ``F001``, ``F002``...
    list : int
        The form's list number (0-based; 0 when ``lists = 1``).
    order : int
        The row of the block-order square the form uses.
    blocks : tuple of FormBlock
        In presentation order.
    bank_hash : str
        Hash of the bank the item ids belong to.
    break_every : int
        A break after every this many items within a block (0: none).
    break_between_blocks : bool
        A break between blocks.
    """

    form_id: str
    list: int
    order: int
    blocks: tuple[FormBlock, ...]
    bank_hash: str
    break_every: int = 0
    break_between_blocks: bool = True

    def item_ids(self) -> builtins.list[str]:  # the field `list` shadows the builtin here
        """The test items (no practice items) in presentation order; trial k is entry k."""
        return [i for b in self.blocks for i in b.items]

    def to_record(self) -> dict[str, Any]:
        """A JSON-ready dict (what ``F001.json`` holds)."""
        rec = dataclasses.asdict(self)
        rec["blocks"] = [dataclasses.asdict(b) for b in self.blocks]
        return rec

    @classmethod
    def from_record(cls, rec: Mapping[str, Any]) -> Form:
        blocks = tuple(
            FormBlock(
                name=b["name"],
                mode=b["mode"],
                instructions=b["instructions"],
                time_limit_s=b["time_limit_s"],
                practice=tuple(b["practice"]),
                items=tuple(b["items"]),
                feedback=bool(b.get("feedback", True)),
                state_rule=bool(b.get("state_rule", False)),
            )
            for b in rec["blocks"]
        )
        return cls(
            form_id=rec["form_id"],
            list=int(rec["list"]),
            order=int(rec["order"]),
            blocks=blocks,
            bank_hash=rec["bank_hash"],
            break_every=int(rec.get("break_every", 0)),
            break_between_blocks=bool(rec.get("break_between_blocks", True)),
        )


def _seed(*key: int | str) -> int:
    return zlib.crc32("/".join(map(str, key)).encode("utf-8"))


def _parents(items: Sequence[Item]) -> dict[str, str]:
    """Item id -> id of its root parent (itself when not a variant)."""
    by_id = {it.id: it for it in items}
    out: dict[str, str] = {}
    for it in items:
        cur, seen = it, set()
        while cur.variant_of and cur.variant_of in by_id and cur.id not in seen:
            seen.add(cur.id)
            cur = by_id[cur.variant_of]
        out[it.id] = cur.variant_of or cur.id
    return out


def _block_pools(study: Any, bank: Any, blocks: Sequence[BlockSpec]) -> list[list[Item]]:
    where = _where(study)
    used: dict[str, str] = {}
    pools: list[list[Item]] = []
    for i, b in enumerate(blocks):
        pool: list[Item] = []
        for iid in b.items:
            if iid not in bank:
                raise fail(
                    f"blocks[{i}].items",
                    iid,
                    f"item ids of the study's bank ({len(bank)} items)",
                    where=where,
                    error=SpecError,
                )
            pool.append(bank[iid])
        pool += [it for it in bank if it.family in b.families and it.id not in b.items]
        if not pool:
            raise fail(
                f"blocks[{i}].families",
                list(b.families),
                "families with items in the bank: " + ", ".join(bank.families()),
                where=where,
                error=SpecError,
            )
        for it in pool:
            if it.id in used:
                raise fail(
                    f"blocks[{i}]",
                    it.id,
                    f"items in one block only (already in block '{used[it.id]}')",
                    where=where,
                    error=SpecError,
                )
            used[it.id] = b.name
            if b.mode not in it.modes:
                raise fail(
                    f"blocks[{i}].mode",
                    b.mode,
                    f"a mode item {it.id} offers: " + ", ".join(it.modes),
                    where=where,
                    error=SpecError,
                )
        pools.append(pool)
    return pools


def _split_practice(
    spec: BlockSpec, pool: list[Item], seed: int, *, index: int, where: str
) -> tuple[list[Item], list[Item]]:
    if isinstance(spec.practice, tuple):
        ids = set(spec.practice)
        by_id = {it.id: it for it in pool}
        for pid in spec.practice:
            if pid not in by_id:
                raise fail(
                    f"blocks[{index}].practice",
                    pid,
                    "ids of items in this block",
                    where=where,
                    error=SpecError,
                )
        return [by_id[p] for p in spec.practice], [it for it in pool if it.id not in ids]
    n = spec.practice
    if n == 0:
        return [], pool
    if n >= len(pool):
        raise fail(
            f"blocks[{index}].practice",
            n,
            f"fewer practice items than the block holds ({len(pool)})",
            where=where,
            error=SpecError,
        )
    # practice items are parents (not isomorphs) when possible, the same for every respondent
    rng = np.random.default_rng(_seed(seed, "practice", spec.name))
    order = sorted(pool, key=lambda it: (it.variant_of is not None, it.id))
    parents = [it for it in order if it.variant_of is None] or order
    picked = [parents[k] for k in sorted(rng.choice(len(parents), size=n, replace=False))]
    # drop their isomorphs too, so the test items do not repeat a practised structure
    groups = _parents(pool)
    gone = {groups[it.id] for it in picked}
    rest = [it for it in pool if groups[it.id] not in gone]
    if not rest:
        rest = [it for it in pool if it not in picked]
    return picked, rest


def _lists(pool: list[Item], n_lists: int, seed: int, name: str) -> list[list[Item]]:
    """Split a block's items into lists, spreading each parent group over the lists."""
    if n_lists == 1:
        return [pool]
    groups = _parents(pool)
    by_group: dict[str, list[Item]] = {}
    for it in pool:
        by_group.setdefault(groups[it.id], []).append(it)
    rng = np.random.default_rng(_seed(seed, "lists", name))
    keys = sorted(by_group)
    keys = [keys[k] for k in rng.permutation(len(keys))]
    lists: list[list[Item]] = [[] for _ in range(n_lists)]
    for g, key in enumerate(keys):
        members = sorted(by_group[key], key=lambda it: (it.variant_of is not None, it.id))
        for j, it in enumerate(members):
            lists[(g + j) % n_lists].append(it)
    return lists


def _order_items(
    items: list[Item],
    rng: np.random.Generator,
    *,
    groups: Mapping[str, str],
    max_run: int,
    separate: bool,
    where: str,
    block: str,
    field: str,
) -> list[str]:
    """A random order with no two items of one parent group adjacent (when ``separate``) and at
    most ``max_run`` items of one family in a row (in blocks that mix families)."""
    mixed = len({it.family for it in items}) > 1
    for _ in range(500):
        remaining = [items[k] for k in rng.permutation(len(items))]
        seq: list[Item] = []
        while remaining:
            gleft = Counter(groups[it.id] for it in remaining)
            fleft = Counter(it.family for it in remaining)
            cands = []
            for it in remaining:
                if separate and seq and groups[seq[-1].id] == groups[it.id]:
                    continue
                if (
                    mixed
                    and len(seq) >= max_run
                    and all(s.family == it.family for s in seq[-max_run:])
                ):
                    continue
                cands.append(it)
            if not cands:
                break
            # weigh by what is left of the item's group and family: the scarce ones go last
            w = np.array([gleft[groups[c.id]] * fleft[c.family] for c in cands], dtype=float)
            pick = cands[int(rng.choice(len(cands), p=w / w.sum()))]
            seq.append(pick)
            remaining.remove(pick)
        else:
            return [it.id for it in seq]
    raise fail(
        field,
        f"block '{block}'",
        "constraints that can be met: fewer isomorphs per parent or a larger max_run "
        "(or separate_isomorphs = false)",
        where=where,
        error=SpecError,
    )


def build_forms(study: Any, n_respondents: int | None = None, *, bank: Any = None) -> list[Form]:
    """Make counterbalanced forms for ``n_respondents`` respondents (one form each).

    Parameters
    ----------
    study : Study
        The loaded study; its ``[[blocks]]`` and ``[forms]`` tables are checked here.
    n_respondents : int, optional
        Number of forms; default ``[forms] respondents``. Balance is complete for multiples of
        (order rows x lists).
    bank : Bank, optional
        The study's bank (default: ``study.bank()``).

    Returns
    -------
    list of Form
        ``F001``... in order; form k is the same whatever ``n_respondents`` is.

    Raises
    ------
    SpecError
        For invalid blocks/forms tables, unknown item ids, or unsatisfiable constraints.
    """
    spec = parse_forms(study)
    blocks = parse_blocks(study)
    n = spec.respondents if n_respondents is None else n_respondents
    n = check_int("n_respondents", n, low=1, high=100000, error=SpecError)
    bank = study.bank() if bank is None else bank
    where = _where(study)
    pools = _block_pools(study, bank, blocks)
    practice, lists = [], []
    for i, (b, pool) in enumerate(zip(blocks, pools, strict=True)):
        prac, rest = _split_practice(b, pool, study.seed, index=i, where=where)
        practice.append(tuple(it.id for it in prac))
        lists.append(_lists(rest, spec.lists, study.seed, b.name))
    groups = _parents(list(bank))
    orders = _orders(spec, len(blocks))
    forms = []
    for k in range(n):
        row = k % len(orders)
        lst = (k // len(orders)) % spec.lists
        rng = np.random.default_rng(_seed(study.seed, "form", k))
        fblocks = []
        for bi in orders[row]:
            b = blocks[bi]
            items = lists[bi][(lst + bi) % spec.lists]
            order = _order_items(
                items,
                rng,
                groups=groups,
                max_run=spec.max_run,
                separate=spec.separate_isomorphs,
                where=where,
                block=b.name,
                field="forms.max_run",
            )
            fblocks.append(
                FormBlock(
                    name=b.name,
                    mode=b.mode,
                    instructions=b.instructions,
                    time_limit_s=b.time_limit_s,
                    practice=practice[bi],
                    items=tuple(order),
                    feedback=b.feedback,
                    state_rule=b.state_rule,
                )
            )
        forms.append(
            Form(
                form_id=f"F{k + 1:03d}",
                list=lst,
                order=row,
                blocks=tuple(fblocks),
                bank_hash=bank.hash,
                break_every=spec.break_every,
                break_between_blocks=spec.break_between_blocks,
            )
        )
    return forms


# -- files ----------------------------------------------------------------------------------
def _read_json(path: Path) -> Any:
    try:
        return json.loads(path.read_text("utf-8"))
    except json.JSONDecodeError as err:
        raise SpecError(f"{path}: not valid JSON ({err.msg}).", where=str(path)) from err


def _plain(rec: Any) -> Any:
    return json.loads(json.dumps(rec))


def assignment(study: Any) -> dict[str, str]:
    """Respondent id -> form id for every respondent given a form so far."""
    p = study.forms_dir / "assignment.json"
    return dict(_read_json(p)) if p.exists() else {}


def write_forms(study: Any, forms: Sequence[Form]) -> Path:
    """Write forms to ``study.forms_dir`` and return the folder.

    Forms already handed to respondents must stay as they are: writing a different form under
    an assigned form id raises :class:`SpecError` (same seed and study give the same forms, so
    building more forms later is safe).
    """
    d = study.forms_dir
    d.mkdir(parents=True, exist_ok=True)
    taken = set(assignment(study).values())
    for f in forms:
        p = d / f"{f.form_id}.json"
        if f.form_id in taken and p.exists() and _read_json(p) != _plain(f.to_record()):
            raise SpecError(
                f"{p}: form {f.form_id} is assigned to a respondent and would change; the study "
                "file or bank changed after sessions started. Use a new study folder.",
                where=str(p),
            )
    for f in forms:
        write_json_atomic(d / f"{f.form_id}.json", f.to_record())
    design = {
        "study": study.name,
        "seed": study.seed,
        "n_forms": len(forms),
        "bank_hash": forms[0].bank_hash if forms else None,
        "forms": dataclasses.asdict(parse_forms(study)),
        "form_ids": [f.form_id for f in forms],
    }
    write_json_atomic(d / "design.json", design)
    return d


def load_forms(study: Any) -> list[Form]:
    """The forms written by ``twofold forms build`` (in form-id order)."""
    d = study.forms_dir
    p = d / "design.json"
    if not p.exists():
        raise SpecError(
            f"{d}: no forms yet; run 'twofold forms build {study.file}' first.", where=str(d)
        )
    ids = _read_json(p)["form_ids"]
    return [Form.from_record(_read_json(d / f"{fid}.json")) for fid in ids]


def form_for(study: Any, respondent_id: str, *, assign: bool = True) -> Form:
    """The form of ``respondent_id``; a new respondent gets the next unassigned form.

    The assignment is recorded in ``assignment.json`` (rewritten atomically) before returning.

    Raises
    ------
    SpecError
        When the forms are not built, or every form is taken (build more with
        ``--respondents``), or ``assign`` is false and the respondent has no form.
    """
    forms = {f.form_id: f for f in load_forms(study)}
    taken = assignment(study)
    if respondent_id in taken:
        return forms[taken[respondent_id]]
    if not assign:
        known = ", ".join(sorted(taken)) if taken else "none assigned yet"
        raise fail(
            "respondent",
            respondent_id,
            f"a respondent id with a form ({known})",
            where=_where(study),
            error=SpecError,
        )
    used = set(taken.values())
    free = [fid for fid in forms if fid not in used]
    if not free:
        raise SpecError(
            f"{study.forms_dir}: all {len(forms)} forms are assigned; build more with "
            f"'twofold forms build {study.file} --respondents N'.",
            where=str(study.forms_dir),
            field="respondents",
        )
    taken[respondent_id] = free[0]
    write_json_atomic(study.forms_dir / "assignment.json", taken)
    return forms[free[0]]
