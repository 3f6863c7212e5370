"""Everything a participant session needs before a window opens, checked without PsychoPy.

``[runner]`` table of ``study.toml``::

    [runner]
    fullscreen = false
    size = [1280, 1024]                 # window size in pixels (windowed mode)
    respondent_pattern = '^P\\d{3}$'    # respondent ids: codes, never names
    consent = "consent.txt"             # the lab's consent text (from the template, replaced)
    background = "#20242b"              # screen colour
    end_text = "Thank you. The session is over."
    redraw = "on_change"                # or "every_frame" (flip on every refresh)
    shuffle_choices = true              # select mode: choices in a per-trial order
    countdown = false                   # timed items: the seconds left, in the top right corner

With ``shuffle_choices`` (the default) each select-mode trial shows the item's choices in an
order of its own (:func:`choice_order`): drawn from the study seed, the respondent id, the trial
index and the item id, so a resumed session shows a trial in the same order again. The screen
numbers the choices 1..n as shown; the log stores the bank's choice number as the response
(scoring and analysis are unchanged) and the order shown in the ``choice_order`` column.

Instructions
------------
A block's ``instructions`` file (study.toml) is shown as it is written, with the placeholders
below filled in; a block without one gets the shipped template for its family and response mode
(``templates/instructions-<family>-<mode>.txt``; ``instructions.txt`` for a mixed block or a
family without one). The placeholders (:data:`PLACEHOLDERS`)::

    {n_items}       number of test items in the block
    {n_practice}    number of practice items
    {time_limit_s}  seconds per item (empty without a limit)
    {time_limit}    a sentence stating the time limit per item (empty without a limit)
    {countdown}     a sentence saying where the seconds left are shown ([runner] countdown)
    {practice}      a sentence about the practice items (empty without practice)
    {feedback}      a sentence about feedback after practice items (empty without it)
    {how}           how to answer on the block's screen: its keys and clicks

A line left empty by its placeholders is dropped, so a sentence placeholder can stand on a line
of its own. Any other ``{word}`` is refused before a session starts (a typo would otherwise
reach the screen); braces around anything else are kept as they are.
"""

from __future__ import annotations

import dataclasses
import hashlib
import re
from importlib import resources
from pathlib import Path
from typing import Any

import numpy as np
from twofold.study import load_study
from twofold.study.checks import check_choice, check_int, check_keys, fail
from twofold.study.exceptions import RunnerError, SpecError
from twofold.study.forms import Form, form_for, parse_blocks, parse_forms
from twofold.study.logs import read_sidecar, read_trials
from twofold.study.studyfile import STUDY_FIELDS

__all__ = [
    "BANNER",
    "HOW",
    "PLACEHOLDERS",
    "RunnerOptions",
    "SessionPlan",
    "TEMPLATE_MARK",
    "block_instructions",
    "check_placeholders",
    "check_respondent",
    "choice_order",
    "fill_instructions",
    "how_to_answer",
    "instruction_template",
    "instruction_values",
    "paginate",
    "parse_runner",
    "prepare_session",
    "reflow",
    "shown_item",
    "write_templates",
]

#: first line of the shipped consent template; the runner refuses to start while it is present
TEMPLATE_MARK = "TEMPLATE - REPLACE THIS TEXT"

BANNER = (
    "twofold participant session. Run sessions only with the approval of your institution's "
    "ethics board and under your local data-protection law. Respondent ids are codes: never "
    "enter names or contact details."
)

_RUNNER_KEYS = tuple(STUDY_FIELDS["runner"].keys or ())  # declared once, in study.toml's spec


@dataclasses.dataclass(frozen=True)
class RunnerOptions:
    """The ``[runner]`` table, checked, with defaults."""

    fullscreen: bool = False
    size: tuple[int, int] = (1280, 1024)
    respondent_pattern: str = r"^P\d{3}$"
    consent: str = "consent.txt"
    background: str = "#20242b"
    end_text: str = "Thank you. The session is over.\n\nPlease tell the experimenter."
    allow_template_consent: bool = False
    redraw: str = "on_change"
    shuffle_choices: bool = True
    countdown: bool = False


def parse_runner(study: Any) -> RunnerOptions:
    """Check the study's ``[runner]`` table."""
    where = study.file.name
    raw = study.table("runner")
    if not isinstance(raw, dict):
        raise fail("runner", raw, "a [runner] table", where=where, error=SpecError)
    check_keys(raw, _RUNNER_KEYS, prefix="runner.", where=where, error=SpecError)
    d = RunnerOptions()
    for key in ("fullscreen", "allow_template_consent", "shuffle_choices", "countdown"):
        if not isinstance(raw.get(key, False), bool):
            raise fail(f"runner.{key}", raw[key], "true or false", where=where, error=SpecError)
    size = raw.get("size", list(d.size))
    if not isinstance(size, list) or len(size) != 2:
        raise fail("runner.size", size, "[width, height] in pixels", where=where, error=SpecError)
    w = check_int("runner.size", size[0], low=640, high=8192, where=where, error=SpecError)
    h = check_int("runner.size", size[1], low=480, high=8192, where=where, error=SpecError)
    pattern = raw.get("respondent_pattern", d.respondent_pattern)
    try:
        re.compile(pattern)
    except (re.error, TypeError):
        raise fail(
            "runner.respondent_pattern",
            pattern,
            "a regular expression",
            where=where,
            error=SpecError,
        ) from None
    for key in ("consent", "background", "end_text"):
        if not isinstance(raw.get(key, ""), str):
            raise fail(f"runner.{key}", raw[key], "a string", where=where, error=SpecError)
    bg = raw.get("background", d.background)
    if not re.fullmatch(r"#[0-9a-fA-F]{6}", bg):
        raise fail("runner.background", bg, "a colour like '#20242b'", where=where, error=SpecError)
    redraw = check_choice(
        "runner.redraw",
        raw.get("redraw", d.redraw),
        ("on_change", "every_frame"),
        where=where,
        error=SpecError,
    )
    return RunnerOptions(
        redraw=redraw,
        fullscreen=raw.get("fullscreen", d.fullscreen),
        size=(w, h),
        respondent_pattern=pattern,
        consent=raw.get("consent", d.consent),
        background=bg,
        end_text=raw.get("end_text", d.end_text),
        allow_template_consent=raw.get("allow_template_consent", False),
        shuffle_choices=raw.get("shuffle_choices", d.shuffle_choices),
        countdown=raw.get("countdown", d.countdown),
    )


def choice_order(
    n_choices: int, *, seed: int, respondent: str, trial: int | str, item_id: str
) -> tuple[int, ...]:
    """The order a trial shows an item's choices in, as 1-based bank choice numbers.

    A uniform random permutation from a generator seeded by a SHA-256 over (``seed``,
    ``respondent``, ``trial``, ``item_id``): the same trial of the same respondent always gets
    the same order (a resumed session shows it again), other trials, respondents or studies
    get orders of their own. ``trial`` is the trial index (or a label for practice items).

    Examples
    --------
    >>> sorted(choice_order(4, seed=8, respondent="P001", trial=0, item_id="x-1"))
    [1, 2, 3, 4]
    """
    key = "\x1f".join(("twofold-choice-order", str(seed), respondent, str(trial), item_id))
    digest = hashlib.sha256(key.encode("utf-8")).digest()
    rng = np.random.default_rng(int.from_bytes(digest[:16], "big"))
    return tuple(int(k) + 1 for k in rng.permutation(n_choices))


def shown_item(item: Any, order: tuple[int, ...] | None) -> Any:
    """``item`` with its choices in the screen order ``order`` (same id: only for drawing).

    The screens number choices as they come, so drawing this copy shows position ``j`` as
    number ``j``; bank choice number = ``order[j - 1]``. ``None`` leaves the item as it is.
    """
    if order is None:
        return item
    choices = item.choices or ()
    if sorted(order) != list(range(1, len(choices) + 1)):
        raise ValueError(f"choice order {order} does not fit {len(choices)} choices")
    return dataclasses.replace(item, choices=tuple(choices[k - 1] for k in order))


def check_respondent(respondent: Any, pattern: str) -> str:
    """Check a respondent id against the study's pattern and return it."""
    if not isinstance(respondent, str) or not re.fullmatch(pattern, respondent):
        raise fail(
            "--respondent",
            respondent,
            f"an id matching {pattern} (a code, never a name)",
            error=SpecError,
        )
    return respondent


@dataclasses.dataclass
class SessionPlan:
    """A checked session, ready to run: study, form, items, texts and the log files."""

    study: Any
    options: RunnerOptions
    bank: Any
    form: Form
    respondent: str
    csv_path: Path
    sidecar_path: Path
    resume: bool
    done: set[int]
    consent_text: str
    instructions: dict[str, str]
    previous: dict[str, Any]

    @property
    def trials(self) -> list[tuple[int, str, str]]:
        """``(trial index, block name, item id)`` for every test trial of the form."""
        out, k = [], 0
        for b in self.form.blocks:
            for iid in b.items:
                out.append((k, b.name, iid))
                k += 1
        return out


#: the placeholders an instructions text may hold (see the module docstring)
PLACEHOLDERS = (
    "n_items",
    "n_practice",
    "time_limit_s",
    "time_limit",
    "countdown",
    "practice",
    "feedback",
    "how",
)
_PLACEHOLDER = re.compile(r"\{([A-Za-z_][A-Za-z0-9_]*)\}")

#: how to answer, by the kind of response the block's screen takes (Scene.response.kind)
HOW = {
    "choose": "Click the answer you choose, or press the number shown beside it.",
    "type": "Type your answer; BACKSPACE corrects and ENTER submits.",
    "type_symbols": (
        "Click the symbols of your answer on the screen keys (or type them); DELETE removes the "
        "last one and DONE submits."
    ),
    "paint": (
        "Paint the answer grid: pick a colour (click it or press its label), then click or drag "
        "over cells. The tools beside the grid fill, copy, clear, change the size and undo; "
        "BACKSPACE also undoes. Press ENTER or click SUBMIT when the grid is done."
    ),
    "label": (
        "Label each new panel: A (or F) for set A, B (or J) for set B; click a panel to change "
        "its label. Press ENTER or click SUBMIT when every panel has its label."
    ),
    "label_rule": (
        "Label each new panel: A (or F) for set A, B (or J) for set B; click a panel to change "
        "its label. Then type the rule in your own words and press ENTER."
    ),
    "rule": "Type the rule in your own words and press ENTER.",
    "build": (
        "Pick one value of each property of the missing panel; the preview shows the panel you "
        "build. Press ENTER or click SUBMIT when it is complete."
    ),
}


def _duration(seconds: float) -> str:
    s = round(seconds)
    if s >= 60 and s % 60 == 0:
        m = s // 60
        return f"{m} minute{'s' if m != 1 else ''}"
    return f"{s:g} second{'s' if s != 1 else ''}"


def check_placeholders(text: str, what: str, where: str | None = None) -> None:
    """Refuse a ``{word}`` in an instructions text that is not one of :data:`PLACEHOLDERS`."""
    for name in _PLACEHOLDER.findall(text):
        if name not in PLACEHOLDERS:
            raise fail(
                what,
                "{" + name + "}",
                "placeholders " + ", ".join("{" + p + "}" for p in PLACEHOLDERS),
                where=where,
                error=SpecError,
            )


def how_to_answer(response: Any, mode: str, *, state_rule: bool = False) -> str:
    """The :data:`HOW` sentence for a screen's :class:`~twofold.study.scene.Response`
    (``state_rule``: the block also asks for the rule in words)."""
    kind = getattr(response, "kind", None) or ("choose" if mode == "select" else "type")
    opts = dict(getattr(response, "options", None) or {})
    if kind == "type" and opts.get("symbols"):
        return HOW["type_symbols"]
    if kind == "type" and opts.get("rule"):
        return HOW["rule"]
    if kind == "label":
        return HOW["label_rule"] if opts.get("rule") or state_rule else HOW["label"]
    how = HOW.get(kind, HOW["type"])
    return f"{how} {HOW['rule']}" if state_rule else how


def instruction_values(block: Any, *, how: str = "", countdown: bool = False) -> dict[str, str]:
    """The placeholder values for a form block (see :data:`PLACEHOLDERS`)."""
    n_practice = len(block.practice)
    limit = block.time_limit_s
    values = {
        "n_items": str(len(block.items)),
        "n_practice": str(n_practice),
        "time_limit_s": f"{limit:g}" if limit else "",
        "time_limit": (
            f"You have {_duration(limit)} for each puzzle; when the time is up, the next "
            "puzzle appears."
            if limit
            else ""
        ),
        "countdown": (
            "The seconds left are shown in the top right corner of the screen."
            if limit and countdown
            else ""
        ),
        "practice": (
            ""
            if not n_practice
            else "The first puzzle is practice and does not count."
            if n_practice == 1
            else f"The first {n_practice} puzzles are practice and do not count."
        ),
        "feedback": (
            "After each practice puzzle you will see whether your answer was correct, and the "
            "correct answer."
            if n_practice and block.feedback
            else ""
        ),
        "how": how,
    }
    return values


def fill_instructions(text: str, values: dict[str, str]) -> str:
    """``text`` with its placeholders filled; lines that only held empty placeholders are
    dropped, and runs of blank lines become one."""
    out: list[str] = []
    for line in text.splitlines():
        had = bool(_PLACEHOLDER.search(line))
        filled = _PLACEHOLDER.sub(lambda m: values.get(m.group(1), m.group(0)), line)
        filled = re.sub(r"[ \t]{2,}", " ", filled).rstrip()
        if had and not filled.strip():
            continue
        if not filled.strip() and out and not out[-1].strip():
            continue
        out.append(filled)
    return "\n".join(out).strip() + "\n"


def instruction_template(families: set[str] | list[str], mode: str) -> tuple[str, str]:
    """The shipped instructions template for a block: ``(file name, text)``.

    One family with a template of its own for ``mode`` gets it; mixed blocks and other
    families get ``instructions.txt``.
    """
    src = resources.files("twofold.experiments").joinpath("templates")
    fams = sorted(set(families))
    name = f"instructions-{fams[0]}-{mode}.txt" if len(fams) == 1 else ""
    if not name or not src.joinpath(name).is_file():
        name = "instructions.txt"
    return name, src.joinpath(name).read_text("utf-8")


def block_instructions(
    form: Form, bank: Any, options: RunnerOptions, own: dict[str, str]
) -> dict[str, str]:
    """The instructions screen text of each block of ``form``: the block's own file (``own``,
    by block name) or the shipped template, with the placeholders filled from the block."""
    from twofold.study import get_family

    out = {}
    for b in form.blocks:
        ids = [*b.practice, *b.items]
        fams = {bank[i].family for i in ids}
        hows: dict[str, None] = {}  # each way of answering the block's screens ask for, once
        for i in ids:
            item = bank[i]
            scene = get_family(item.family).scene(item, b.mode)
            hows[how_to_answer(scene.response, b.mode, state_rule=b.state_rule)] = None
        how = " ".join(hows)
        text = own.get(b.name)
        if text is None:
            text = instruction_template(fams, b.mode)[1]
        values = instruction_values(b, how=how, countdown=options.countdown)
        out[b.name] = fill_instructions(text, values)
    return out


def paginate(text: str, fits: Any) -> list[str]:
    """Split ``text`` into pages that each ``fits(page) -> bool``.

    Whole paragraphs (blank-line separated, see :func:`reflow`) go on a page while they fit; a
    paragraph too long for a page of its own is split between words. A single word that does
    not fit still gets a page (the painter shrinks nothing; the caller's box is the limit).
    """
    paragraphs = [p for p in reflow(text).split("\n\n") if p]
    pages: list[str] = []
    cur: list[str] = []
    for para in paragraphs:
        if fits("\n\n".join([*cur, para])):
            cur.append(para)
            continue
        if cur:
            pages.append("\n\n".join(cur))
            cur = []
        words = para.split(" ")
        while words:
            if fits(" ".join(words)):
                cur = [" ".join(words)]
                break
            lo, hi = 1, len(words) - 1  # the longest prefix that fits (at least one word)
            while lo < hi:
                mid = (lo + hi + 1) // 2
                if fits(" ".join(words[:mid])):
                    lo = mid
                else:
                    hi = mid - 1
            pages.append(" ".join(words[:lo]))
            words = words[lo:]
    if cur or not pages:
        pages.append("\n\n".join(cur))
    return pages


def reflow(text: str) -> str:
    """Join the lines of each paragraph, so the window's own wrapping sets line breaks.

    Paragraphs are separated by blank lines; a file's hard line breaks inside a paragraph would
    otherwise break lines in mid-sentence on a screen narrower than the file.
    """
    paragraphs = [
        " ".join(line.strip() for line in block.splitlines() if line.strip())
        for block in text.strip().split("\n\n")
    ]
    return "\n\n".join(p for p in paragraphs if p)


def _read(path: Path, field: str, where: str) -> str:
    try:
        return path.read_text("utf-8")
    except (FileNotFoundError, IsADirectoryError):
        raise fail(
            field,
            str(path.name),
            f"an existing text file (not found: {path}; "
            "'twofold forms templates' writes one to edit)",
            where=where,
            error=SpecError,
        ) from None


def prepare_session(
    study_file: str | Path, respondent: str, *, resume: bool = False
) -> SessionPlan:
    """Check everything a session needs, before any window opens.

    Raises
    ------
    SpecError
        Broken study file, unknown family in a block, missing instructions or consent file,
        a respondent id not matching the pattern.
    RunnerError
        An existing respondent id without ``resume``, or ``resume`` with nothing to resume.
    """
    study = load_study(study_file)
    opts = parse_runner(study)
    check_respondent(respondent, opts.respondent_pattern)
    blocks = parse_blocks(study)
    parse_forms(study)
    where = study.file.name
    consent = _read(study.root / opts.consent, "runner.consent", where)
    if TEMPLATE_MARK in consent and not opts.allow_template_consent:
        raise SpecError(
            f"{study.root / opts.consent}: still the shipped consent template; replace it with "
            "the text your ethics board approved (and delete the TEMPLATE line).",
            where=str(study.root / opts.consent),
            field="runner.consent",
        )
    raw_instructions = {
        b.name: _read(study.root / b.instructions, "instructions", where)
        for b in blocks
        if b.instructions
    }
    for name, text in raw_instructions.items():
        check_placeholders(text, f"instructions of block {name}", where)
    folder = study.logs_dir / "human"
    csv_path, side = folder / f"{respondent}.csv", folder / f"{respondent}.json"
    previous: dict[str, Any] = {}
    done: set[int] = set()
    if side.exists() or csv_path.exists():
        # partial: the runner rewrites the whole record when the session goes on
        previous = read_sidecar(side, partial=True) if side.exists() else {"status": "failed"}
        status = previous.get("status")
        if not resume:
            raise RunnerError(
                f"respondent {respondent} already has a session ({status}); it is never "
                "overwritten: continue it with --resume or choose another id."
            )
        if status in ("complete", "declined"):
            raise RunnerError(
                f"respondent {respondent}: the session is {status}; nothing to resume."
            )
        if csv_path.exists():
            df = read_trials(csv_path, torn="ignore")  # the writer repairs a torn row
            done = {int(t) for t in df["trial"].dropna()}
    elif resume:
        raise RunnerError(
            f"respondent {respondent}: no session to resume; start it without --resume."
        )
    bank = study.bank()
    form = form_for(study, respondent)
    if form.bank_hash != bank.hash:
        raise RunnerError(
            f"form {form.form_id} was built on bank {form.bank_hash[:12]}, the study's bank is "
            f"{bank.hash[:12]}; rebuild the forms in a new study folder."
        )
    instructions = block_instructions(form, bank, opts, raw_instructions)
    return SessionPlan(
        study=study,
        options=opts,
        bank=bank,
        form=form,
        respondent=respondent,
        csv_path=csv_path,
        sidecar_path=side,
        resume=resume,
        done=done,
        consent_text=consent,
        instructions=instructions,
        previous=previous,
    )


def write_templates(study: Any, *, overwrite: bool = False) -> list[Path]:
    """Copy the consent and instructions templates into the study folder (to be edited).

    Writes the consent file named in ``[runner] consent`` and every block's instructions file
    that does not exist yet (the template for the block's family and mode, placeholders kept).
    """
    opts = parse_runner(study)
    src = resources.files("twofold.experiments").joinpath("templates")
    targets = {study.root / opts.consent: "consent.txt"}
    for b in study.table("blocks") or []:
        if isinstance(b, dict) and isinstance(b.get("instructions"), str) and b["instructions"]:
            fams = b.get("families") or []
            name = instruction_template(fams, str(b.get("mode", "generate")))[0]
            targets.setdefault(study.root / b["instructions"], name)
    written = []
    for path, name in targets.items():
        if path.exists() and not overwrite:
            continue
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(src.joinpath(name).read_text("utf-8"), encoding="utf-8")
        written.append(path)
    return written
