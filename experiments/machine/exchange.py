"""Export items for solvers run elsewhere, and import their answers into the trial logs.

Export (:func:`export_items`) writes a folder::

    manifest.json      format, bank_hash, medium, entries [{item, family, mode, answer_format,
                       n_choices, file or line}] and the answers file format -- never an answer
    prompts.jsonl      medium text: {"item", "family", "mode", "prompt"} per line
    views.jsonl        medium structured: {"item", "family", "mode", "view"} per line
    pictures/*.png     medium picture: one PNG per item and mode (<item>.<mode>.png)

Answers file (for :func:`import_answers`), JSON lines, one answer per line::

    {"bank_hash": "<from the manifest>", "item": "str-0123456789ab", "mode": "generate",
     "answer": <the answer, or a choice number in select mode>}
    -- or "text": "<free text>" instead of "answer" (the family extracts the answer)
    -- optional: "seed" (int, default 0; one session per seed), "effort" (number),
       "effort_unit" (string), "explanation" (string)

A line holding only ``bank_hash`` is allowed as a header. Every line must agree with the study's
bank hash and at least one line must carry it.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
import os
from collections import defaultdict
from collections.abc import Callable
from pathlib import Path
from typing import Any

from twofold.study import __version__
from twofold.study._io import atomic_folder, read_json_lines
from twofold.study.bank import Bank
from twofold.study.checks import check_choice, fail
from twofold.study.exceptions import InputError
from twofold.study.families import get_family
from twofold.study.logs import SessionRecord, read_sidecar, session_id, write_session
from twofold.study.render import MEDIA, render, render_picture

from ._core import FreeText, coerce_answer
from .runner import _now, _session_row, rebuild_session, run_trial

__all__ = ["EXPORT_FORMAT", "export_items", "import_answers"]

EXPORT_FORMAT = "twofold-export/1"
_FILES = {"text": "prompts.jsonl", "structured": "views.jsonl"}
_ANSWER_KEYS = (
    "bank_hash",
    "item",
    "mode",
    "answer",
    "text",
    "seed",
    "effort",
    "effort_unit",
    "explanation",
)
ANSWERS_DOC = (
    'JSON lines: {"bank_hash": <this bank_hash>, "item": <item id>, "mode": <mode>, '
    '"answer": <answer> or "text": <free text>, optional "seed", "effort", '
    '"effort_unit", "explanation"}; import with: twofold run machine STUDY.toml '
    "--import ANSWERS.jsonl --name NAME"
)


def _answer_format(item: Any, mode: str) -> str:
    if mode == "select":
        return f"a choice number from 1 to {len(item.choices or ())}"
    fam = get_family(item.family)
    return fam.answer_format or "the family's answer form (see the prompt)"


def export_items(
    bank: Bank,
    out: str | os.PathLike[str],
    *,
    medium: str = "text",
    overwrite: bool = False,
    progress: Callable[[int], None] | None = None,
) -> dict[str, Any]:
    """Write every item of ``bank`` (each of its modes) in ``medium`` to folder ``out``.

    The folder is assembled under a temporary name and renamed into place. Nothing written
    holds an item's answer, accepted answers or the number of the correct choice.

    Returns
    -------
    dict
        The manifest (also written as ``manifest.json``).
    """
    check_choice("--as", medium, MEDIA)
    dest = Path(out)
    if dest.exists() and any(dest.iterdir()) and not overwrite:
        raise InputError(
            f"{dest}: folder exists and is not empty; choose another output folder or pass "
            "--overwrite.",
            where=str(dest),
        )
    entries = []
    with atomic_folder(dest) as tmp:
        fh = None
        if medium in _FILES:
            fh = open(tmp / _FILES[medium], "w", encoding="utf-8", newline="\n")  # noqa: SIM115
        else:
            (tmp / "pictures").mkdir()
        line = 0
        for item in bank:
            for mode in item.modes:
                entry: dict[str, Any] = {
                    "item": item.id,
                    "family": item.family,
                    "mode": mode,
                    "answer_format": _answer_format(item, mode),
                    "n_choices": len(item.choices) if mode == "select" and item.choices else None,
                }
                if fh is not None:
                    line += 1
                    key = "prompt" if medium == "text" else "view"
                    rec = {
                        "item": item.id,
                        "family": item.family,
                        "mode": mode,
                        key: render(item, medium, mode),
                    }
                    fh.write(json.dumps(rec, ensure_ascii=False, sort_keys=True) + "\n")
                    entry["file"], entry["line"] = _FILES[medium], line
                else:
                    name = f"pictures/{item.id}.{mode}.png"
                    (tmp / name).write_bytes(render_picture(item, mode))
                    entry["file"] = name
                entries.append(entry)
            if progress is not None:
                progress(1)
        if fh is not None:
            fh.close()
        manifest = {
            "format": EXPORT_FORMAT,
            "bank_hash": bank.hash,
            "medium": medium,
            "n_items": len(bank),
            "n_entries": len(entries),
            "families": bank.families(),
            "created": _now(),
            "twofold_version": __version__,
            "answers_file": ANSWERS_DOC,
            "entries": entries,
        }
        (tmp / "manifest.json").write_text(
            json.dumps(manifest, indent=1, ensure_ascii=False) + "\n", encoding="utf-8"
        )
    return manifest


class _Replay:
    """A stand-in solver replaying one imported answer (so import scores like a live run)."""

    medium = "structured"

    def __init__(self, record: dict[str, Any]):
        self.record = record

    def solve(self, view: Any, mode: str) -> Any:
        return coerce_answer(self.record)


def import_answers(
    study: Any, answers: str | os.PathLike[str], *, name: str
) -> list[dict[str, Any]]:
    """Score answers produced elsewhere into machine sessions ``<name>-s<seed>``.

    Every line is checked before anything is written: unknown fields, unknown item ids, a mode
    the item does not have, duplicates (same seed, item, mode), a missing or different bank hash
    are errors naming the line; an answer that cannot be read or scored is logged as status
    ``invalid`` with its raw value. Sessions are rewritten as a whole (an import is repeatable).

    Returns
    -------
    list of dict
        Per session: session, seed, n_trials, n_correct, n_invalid, n_missing (bank items and
        modes with no answer).
    """
    from .spec import _NAME

    if not _NAME.match(name or ""):
        raise fail("--name", name, "1-64 letters, digits, '.', '-' or '_'")
    path = Path(answers)
    if not path.is_file():
        raise InputError(f"{path}: no such answers file.", where=str(path))
    bank = study.bank(create=False)
    data = path.read_bytes()  # its hash is recorded with the imported sessions
    records: dict[int, list[tuple[int, dict[str, Any]]]] = defaultdict(list)
    seen: dict[tuple[int, str, str], int] = {}
    hashes = 0
    # strict JSON per line: UTF-8, finite numbers, bounded nesting
    for lineno, where, rec in read_json_lines(path):
        if not isinstance(rec, dict):
            raise fail("(line)", rec, "a JSON object", where=where)
        for key in rec:
            check_choice(key, key, _ANSWER_KEYS, where=where)
        if "bank_hash" in rec:
            hashes += 1
            if rec["bank_hash"] != bank.hash:
                raise fail(
                    "bank_hash",
                    rec["bank_hash"],
                    f"the study's bank hash {bank.hash} (the answers were made for another bank; "
                    "export the study's bank again)",
                    where=where,
                )
            if set(rec) == {"bank_hash"}:
                continue
        item_id = rec.get("item")
        if item_id not in bank:
            raise fail(
                "item", item_id, f"an item id of the study's bank ({len(bank)} items)", where=where
            )
        item = bank[item_id]
        mode = rec.get("mode", item.modes[0] if len(item.modes) == 1 else None)
        check_choice("mode", mode, item.modes, where=where)
        seed = rec.get("seed", 0)
        if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
            raise fail("seed", seed, "an integer >= 0", where=where)
        if "answer" not in rec and "text" not in rec:
            raise fail("answer", None, "an 'answer' or a 'text' field", where=where)
        effort = rec.get("effort")
        if effort is not None and (isinstance(effort, bool) or not isinstance(effort, int | float)):
            raise fail("effort", effort, "a number", where=where)
        key = (seed, str(item_id), str(mode))
        if key in seen:
            raise InputError(
                f"{where}: duplicate answer for item {item_id}, mode {mode}, seed {seed} (first "
                f"on line {seen[key]}); keep one.",
                where=where,
                field="item",
            )
        seen[key] = lineno
        records[seed].append((lineno, {**rec, "mode": mode}))
    if not hashes:
        raise fail(
            "bank_hash",
            None,
            f"the bank hash {bank.hash} on at least one line (copy it from the export manifest)",
            where=path.name,
        )
    if not records:
        raise InputError(f"{path}: no answers found.", where=str(path))
    file_hash = hashlib.sha256(data).hexdigest()
    order = {(it.id, m): k for k, (it, m) in enumerate((it, m) for it in bank for m in it.modes)}
    folder = study.logs_dir / "machine"
    summaries = []
    for seed, recs in sorted(records.items()):
        session = session_id(name, seed)
        t0 = _dt.datetime.now(_dt.UTC).timestamp()
        rows = []
        for _, rec in recs:
            item = bank[rec["item"]]
            if "answer" not in rec or rec["answer"] is None:
                if rec.get("text") is not None:
                    rec = {**rec, "text": FreeText(str(rec["text"]))}
            fields = run_trial(_Replay(rec), item, rec["mode"], medium="structured", t0=t0)
            if rec.get("effort") is None:
                fields["effort"], fields["effort_unit"] = None, None
            fields["onset_s"] = fields["response_s"] = None
            rows.append(_session_row(study, bank, session, order[(item.id, rec["mode"])], fields))
        folder.mkdir(parents=True, exist_ok=True)
        csv_path, side_path = folder / f"{session}.csv", folder / f"{session}.json"
        if (
            side_path.exists()
            and read_sidecar(side_path).get("solver_spec", "").split(":")[0] != "import"
        ):
            raise InputError(
                f"{side_path}: session {session} exists and was not imported; choose another "
                "--name.",
                where=str(side_path),
                field="--name",
            )
        rebuild_session(csv_path, rows)
        units = sorted({r["effort_unit"] for r in rows if r.get("effort_unit")})
        record = SessionRecord(
            study=study.name,
            bank_hash=bank.hash,
            session=session,
            respondent=session,
            kind="machine",
            synthetic=False,
            form="all",
            status="complete",
            ended=_now(),
            n_trials=len(rows),
            details={
                "twofold_version": __version__,
                "solver": name,
                "seed": seed,
                "solver_spec": f"import:{path.name}",
                "config_hash": file_hash,
                "effort_unit": units[0] if len(units) == 1 else None,
                "n_rows": len(rows),
            },
        )
        write_session(side_path, record.to_dict())
        summaries.append(
            {
                "session": session,
                "seed": seed,
                "n_trials": len(rows),
                "n_correct": sum(r.get("correct") is True for r in rows),
                "n_invalid": sum(r["status"] == "invalid" for r in rows),
                "n_missing": len(order) - len(rows),
            }
        )
    return summaries
