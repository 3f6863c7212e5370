"""Generation specs (TOML) and bank generation.

A spec names, per family, how many items to make, the levels of each generator parameter, the
response modes, the distractor scheme and the variant operators to apply::

    seed = 7

    [families.strings]
    n = 40
    modes = ["generate"]
    design = "crossed"             # or "random" (default)
    [families.strings.params]
    length = [3, 5, 7]             # a list is levels; a scalar is fixed; {min=, max=} a range
    [families.strings.variants]
    operators = ["reverse"]        # operators applied to every generated (parent) item
    per_item = 1                   # how many of them per parent (default: all)

The same spec and seed give a byte-identical ``items.jsonl`` and the same bank hash.
"""

from __future__ import annotations

import dataclasses
import itertools
import tomllib
import zlib
from collections import Counter
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any

import numpy as np

from .bank import Bank
from .checks import check_choice, check_int, fail
from .exceptions import GenerationError, SpecError
from .families import Family, Rejected, get_family
from .item import MODES, Item
from .positions import (
    PLACEMENT,
    balanced_positions,
    place_answer,
    reshuffle_variant,
    variant_positions,
)

__all__ = ["FamilySpec", "GenerationSpec", "generate_bank", "item_rng", "load_spec", "parse_spec"]

MAX_ATTEMPTS = 200


@dataclasses.dataclass(frozen=True)
class FamilySpec:
    """What to generate for one family (checked against the family's declared parameters)."""

    family: str
    n: int
    levels: dict[str, list[Any]]
    modes: tuple[str, ...]
    distractor_scheme: str | None
    n_choices: int
    design: str
    variant_operators: tuple[str, ...]
    variants_per_item: int


@dataclasses.dataclass(frozen=True)
class GenerationSpec:
    """A whole generation spec: the seed and one :class:`FamilySpec` per family."""

    seed: int
    families: tuple[FamilySpec, ...]
    raw: dict[str, Any]


def load_spec(path: str | Path) -> GenerationSpec:
    """Read and check a generation spec file (TOML)."""
    p = Path(path)
    try:
        raw = tomllib.loads(p.read_bytes().decode("utf-8"))
    except (FileNotFoundError, IsADirectoryError):
        raise SpecError(f"{p}: no such spec file.", where=str(p)) from None
    except UnicodeDecodeError as err:
        raise SpecError(
            f"{p}: byte {err.start}: not UTF-8 text; accepted: a TOML file saved as UTF-8.",
            where=str(p),
        ) from None
    except tomllib.TOMLDecodeError as err:
        raise SpecError(f"{p}: not valid TOML ({err}).", where=str(p)) from err
    return parse_spec(raw, where=p.name)


_FAMILY_KEYS = ("n", "modes", "params", "distractor_scheme", "n_choices", "design", "variants")


def parse_spec(raw: Mapping[str, Any], *, where: str = "spec") -> GenerationSpec:
    """Check a spec given as a dict (e.g. the ``[bank]`` table of ``study.toml``)."""
    unknown = sorted(set(raw) - {"seed", "families"})
    if unknown:
        raise fail(
            unknown[0],
            raw[unknown[0]],
            "only the keys seed, families",
            where=where,
            error=SpecError,
        )
    seed = check_int(
        "seed", raw.get("seed", 0), low=0, high=2**63 - 1, where=where, error=SpecError
    )
    fams = raw.get("families")
    if not isinstance(fams, Mapping) or not fams:
        raise fail(
            "families",
            fams,
            "a table with one sub-table per family, e.g. [families.strings]",
            where=where,
            error=SpecError,
        )
    out = []
    for name, body in fams.items():
        w = f"{where}: families.{name}"
        fam = get_family(name, where=where, error=SpecError)
        if not isinstance(body, Mapping):
            raise fail(f"families.{name}", body, "a table", where=where, error=SpecError)
        out.append(_parse_family(fam, body, where=w))
    return GenerationSpec(seed=seed, families=tuple(out), raw=dict(raw))


def _parse_family(fam: Family, body: Mapping[str, Any], *, where: str) -> FamilySpec:
    for key in body:
        check_choice(key, key, _FAMILY_KEYS, where=where, error=SpecError)
    n = check_int("n", body.get("n", 10), low=1, high=1_000_000, where=where, error=SpecError)
    modes = body.get("modes", [fam.modes[0]])
    if isinstance(modes, str):
        modes = [modes]
    if not isinstance(modes, list) or not modes:
        raise fail(
            "modes",
            modes,
            "a non-empty list of " + ", ".join(fam.modes),
            where=where,
            error=SpecError,
        )
    for m in modes:
        check_choice("modes", m, [x for x in MODES if x in fam.modes], where=where, error=SpecError)
    scheme = body.get("distractor_scheme")
    if "select" in modes:
        if not fam.distractor_schemes:
            raise fail(
                "modes",
                modes,
                "generate only (this family has no select mode)",
                where=where,
                error=SpecError,
            )
        scheme = scheme if scheme is not None else next(iter(fam.distractor_schemes))
        check_choice(
            "distractor_scheme", scheme, fam.distractor_schemes, where=where, error=SpecError
        )
    elif scheme is not None:
        raise fail(
            "distractor_scheme",
            scheme,
            "no value unless modes include select",
            where=where,
            error=SpecError,
        )
    n_choices = check_int(
        "n_choices",
        body.get("n_choices", fam.default_choices),
        low=2,
        high=26,
        where=where,
        error=SpecError,
    )
    design = check_choice(
        "design", body.get("design", "random"), ("random", "crossed"), where=where, error=SpecError
    )
    params = body.get("params", {})
    if not isinstance(params, Mapping):
        raise fail("params", params, "a table of parameter levels", where=where, error=SpecError)
    declared = {p.name: p for p in fam.params}
    levels: dict[str, list[Any]] = {}
    for key, value in params.items():
        spec = declared.get(key)
        if spec is None:
            raise fail(
                f"params.{key}",
                value,
                "a parameter of " + fam.name + ": " + ", ".join(sorted(declared)),
                where=where,
                error=SpecError,
            )
        levels[key] = spec.levels(value, where=f"{where}.params")
    for p in fam.params:
        levels.setdefault(p.name, [p.default])
    variants = body.get("variants", {})
    if isinstance(variants, list):
        variants = {"operators": variants}
    if not isinstance(variants, Mapping):
        raise fail(
            "variants",
            variants,
            "a table {operators=[...], per_item=N}",
            where=where,
            error=SpecError,
        )
    ops = variants.get("operators", [])
    for op in ops:
        check_choice("variants.operators", op, fam.variant_operators, where=where, error=SpecError)
    per_item = check_int(
        "variants.per_item",
        variants.get("per_item", len(ops)),
        low=0,
        high=max(len(ops), 0),
        where=where,
        error=SpecError,
    )
    return FamilySpec(
        family=fam.name,
        n=n,
        levels=levels,
        modes=tuple(modes),
        distractor_scheme=scheme if "select" in modes else None,
        n_choices=n_choices,
        design=design,
        variant_operators=tuple(ops),
        variants_per_item=per_item,
    )


def item_rng(*key: int | str) -> tuple[int, np.random.Generator]:
    """A stable 63-bit seed and a generator for a key path (spec seed, family, index, attempt)."""
    ints = [k if isinstance(k, int) else zlib.crc32(k.encode("utf-8")) for k in key]
    ss = np.random.SeedSequence(ints)
    seed = int(ss.generate_state(2, np.uint64)[0] >> np.uint64(1))
    return seed, np.random.default_rng(seed)


def _design(fs: FamilySpec, seed: int) -> list[dict[str, Any]]:
    names = sorted(fs.levels)
    _, rng = item_rng(seed, fs.family, "design")
    if fs.design == "crossed":
        # every combination of levels in turn, so cells differ in size by at most one item
        combos = list(itertools.product(*(fs.levels[n] for n in names)))
        offset = int(rng.integers(len(combos)))
        return [
            dict(zip(names, combos[(offset + i) % len(combos)], strict=True)) for i in range(fs.n)
        ]
    out = []
    for _ in range(fs.n):
        out.append({n: fs.levels[n][int(rng.integers(len(fs.levels[n])))] for n in names})
    return out


def generate_family(
    fs: FamilySpec,
    seed: int,
    *,
    progress: Callable[[int], None] | None = None,
    existing: set[str] | None = None,
) -> tuple[list[Item], dict[str, Any]]:
    """Generate the parents and variants for one family; return items and generation statistics."""
    fam = get_family(fs.family)
    seen = existing if existing is not None else set()
    rejections: Counter[str] = Counter()
    items: list[Item] = []
    n_variants = 0
    # answer positions: balanced per family for parents and for each isomorph slot
    _, prng = item_rng(seed, fs.family, "answer-positions")
    positions = balanced_positions(fs.n, fs.n_choices, prng)
    vpositions = [
        variant_positions(positions, fs.n_choices, prng) for _ in range(fs.variants_per_item)
    ]
    for idx, params in enumerate(_design(fs, seed)):
        parent = None
        duplicates_here = 0
        for attempt in range(MAX_ATTEMPTS):
            item_seed, rng = item_rng(seed, fs.family, idx, attempt)
            try:
                cand = fam.generate(
                    params,
                    rng,
                    seed=item_seed,
                    modes=fs.modes,
                    distractor_scheme=fs.distractor_scheme,
                    n_choices=fs.n_choices,
                )
            except Rejected as rej:
                rejections[rej.reason] += 1
                continue
            cand = place_answer(cand, positions[idx], rng)
            if cand.id in seen:
                rejections["duplicate"] += 1
                duplicates_here += 1
                continue
            parent = cand
            break
        if parent is None and duplicates_here >= MAX_ATTEMPTS // 2:
            made = sum(1 for it in items if it.variant_of is None)
            raise GenerationError(
                f"families.{fs.family}: n = {fs.n} asks for more items than these levels can "
                f"make: after {made} distinct items, {duplicates_here} of {MAX_ATTEMPTS} "
                f"attempts with params {params} repeated an item already made; lower n or add "
                "levels."
            )
        if parent is None:
            top = ", ".join(f"{r} ({c})" for r, c in rejections.most_common(3))
            raise GenerationError(
                f"families.{fs.family}: no valid item after {MAX_ATTEMPTS} attempts with params "
                f"{params}; most frequent rejections: {top}. The parameter levels may be "
                "impossible together; widen or change them."
            )
        seen.add(parent.id)
        items.append(parent)
        if fs.variants_per_item:
            _, vrng = item_rng(seed, fs.family, idx, "variants")
            ops = list(fs.variant_operators)
            start = idx % len(ops)
            ops = ops[start:] + ops[:start]
            made = 0
            for op in ops:
                if made >= fs.variants_per_item:
                    break
                try:
                    var = fam.vary(parent, op, vrng)
                except Rejected as rej:
                    rejections[f"variant {op}: {rej.reason}"] += 1
                    continue
                var = reshuffle_variant(var, parent, vpositions[made][idx], vrng)
                if var.id in seen:
                    rejections[f"variant {op}: duplicate"] += 1
                    continue
                seen.add(var.id)
                items.append(var)
                made += 1
                n_variants += 1
        if progress is not None:
            progress(1)
    stats = {
        "parents": fs.n,
        "variants": n_variants,
        "rejections": dict(sorted(rejections.items())),
    }
    if "select" in fs.modes:
        stats["answer_placement"] = PLACEMENT
    return items, stats


def generate_bank(
    spec: GenerationSpec, *, progress: Callable[[str, int], None] | None = None
) -> Bank:
    """Generate every family of ``spec`` into a :class:`Bank` (not yet written).

    ``progress(family, k)`` is called as parents are made, for progress bars.
    """
    items: list[Item] = []
    stats: dict[str, Any] = {}
    seen: set[str] = set()
    for fs in spec.families:
        cb = (lambda k, f=fs.family: progress(f, k)) if progress else None
        fam_items, fam_stats = generate_family(fs, spec.seed, progress=cb, existing=seen)
        items.extend(fam_items)
        stats[fs.family] = fam_stats
    return Bank.from_items(items, spec=spec.raw, seed=spec.seed, generation=stats)
