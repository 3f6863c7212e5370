"""Text screens of the participant runner: paging, instructions per family and mode, progress at
breaks, practice feedback with the correct answer, the optional countdown.

The layout rules are checked without a display (pagination, placeholders, break texts, the
form walk) and then on a real window under X at 1024x768: a consent text of about 800 words
pages, every page's text and its key footer stay inside the window, accepting keys act only on
the last page.
"""

from __future__ import annotations

import re
from importlib import resources

import pytest
from _display import x_display  # noqa: F401
from twofold.experiments.human.prepare import (
    PLACEHOLDERS,
    check_placeholders,
    fill_instructions,
    instruction_template,
    instruction_values,
    paginate,
    parse_runner,
    prepare_session,
)
from twofold.experiments.human.runner import break_text, walk
from twofold.study import load_study
from twofold.study.exceptions import SpecError
from twofold.study.forms import Form, FormBlock

# Our own consent wording for a made-up study (no real institution), about 800 words: what a
# lab's approved text typically holds (purpose, procedure, duration, risks, voluntariness,
# data handling, contacts) — common practice for research information sheets.
CONSENT_PARAGRAPHS = [
    "Information about this study",
    "You are invited to take part in a study about how people solve short reasoning puzzles. "
    "Before you decide, please read this information carefully. Take as much time as you need, "
    "and ask the person running the session about anything that is not clear to you. Taking "
    "part is entirely your own choice.",
    "What the study is about. We want to understand which kinds of puzzles people find easy "
    "and which they find hard, and how this compares with the answers of computer programs "
    "given the same puzzles. The puzzles show strings of symbols, small pictures arranged in "
    "rows, sets of panels, or coloured grids. Each puzzle follows a rule that you are asked to "
    "work out from examples. There are no trick questions, and nobody is expected to solve "
    "every puzzle.",
    "What you will be asked to do. The session takes place at this computer and lasts about "
    "forty-five minutes, including short breaks. First you will read instructions for each "
    "part and try a few practice puzzles. After each practice puzzle you will see whether your "
    "answer was correct. Then the main puzzles follow. Some parts have a time limit for each "
    "puzzle; the instructions of each part tell you so. You answer with the keyboard and the "
    "mouse. You can rest during the breaks for as long as you like.",
    "Possible discomforts and benefits. The puzzles are not dangerous in any way, but some "
    "people find long series of puzzles tiring or frustrating. If you feel tired, use the "
    "breaks, and remember that you can stop at any time. There is no direct benefit to you "
    "from taking part, apart from the compensation described below, but the results will help "
    "researchers understand human reasoning and the limits of computer programs.",
    "Taking part is voluntary. You do not have to take part. If you decide to take part, you "
    "can stop at any moment without giving a reason and without any disadvantage to you. To "
    "stop, tell the person running the session or press the ESC key and confirm. Answers you "
    "gave before stopping are kept under your code unless you ask us to delete them; you can "
    "ask for this until the data are made anonymous, as explained below.",
    "What data are kept. The program stores your answers, the time each answer took, and the "
    "order in which the puzzles were shown, under a code such as P017. It does not store your "
    "name, your contact details, or anything else that identifies you directly. The list that "
    "links codes to the compensation receipts is kept on paper in a locked cabinet, apart from "
    "the data, and is destroyed when the compensation has been settled. After that the data "
    "can no longer be linked to you.",
    "How the data are used. The coded data are analysed by the research team and may be "
    "published in scientific articles and shared with other researchers in an open data "
    "archive, always without any information that identifies you. The data are kept for at "
    "least ten years, as good research practice requires, so that the results can be checked.",
    "Who can take part. Adults who can read the instructions on the screen without difficulty "
    "can take part. If you need glasses for reading, please wear them. Some puzzles use "
    "colours; each colour also carries a pattern, so colour vision is not required. If you "
    "have taken part in an earlier session of this study, please tell the person running the "
    "session, because the puzzles would then no longer be new to you.",
    "How the session is run. The person running the session stays nearby but does not watch "
    "your answers. The computer records only what you do with the keyboard and the mouse in "
    "the puzzle window; it makes no sound or video recording and takes no pictures. When the "
    "session is over, the screen tells you so and you may ask any questions you still have.",
    "Compensation. You receive a fixed amount for taking part, whether or not you complete the "
    "session and however many puzzles you solve. The person running the session will explain "
    "how you receive it.",
    "Questions and complaints. If you have questions about the study, now or later, please ask "
    "the person running the session or write to the address on the printed sheet you were "
    "given. If you have a complaint about how the study was run, you can contact the ethics "
    "committee named on the same sheet, which has reviewed and approved this study.",
    "Consent. By pressing Y you confirm that you have read and understood this information, "
    "that you had the opportunity to ask questions, that you know that taking part is "
    "voluntary and that you can stop at any time, and that you agree that your coded data are "
    "used as described above. If you do not want to take part, press N; the session then ends "
    "and nothing is stored.",
]
CONSENT_800 = "\n\n".join(CONSENT_PARAGRAPHS) + "\n"


def test_the_consent_text_is_realistic_in_length():
    assert 750 <= len(CONSENT_800.split()) <= 900


# -- pagination ---------------------------------------------------------------------------------
def _fits(limit):
    """A stand-in measure: a page fits when its estimated line count stays within ``limit``
    (40 characters a line, a blank line between paragraphs)."""

    def fits(page):
        lines = sum(max(1, -(-len(p) // 40)) + 1 for p in page.split("\n\n"))
        return lines <= limit

    return fits


def test_paginate_keeps_every_word_in_order_and_each_page_fits():
    fits = _fits(12)
    pages = paginate(CONSENT_800, fits)
    assert len(pages) > 5
    assert all(fits(p) for p in pages)
    assert " ".join(" ".join(p.split()) for p in pages).split() == CONSENT_800.split()


def test_paginate_keeps_paragraphs_whole_when_they_fit_and_splits_a_long_one():
    short = "alpha beta\n\ngamma delta"
    assert paginate(short, _fits(100)) == ["alpha beta\n\ngamma delta"]
    long_para = " ".join(f"w{k}" for k in range(400))  # ~2000 characters, one paragraph
    pages = paginate(long_para, _fits(10))
    assert len(pages) >= 5 and all(_fits(10)(p) for p in pages)
    assert " ".join(pages).split() == long_para.split()


def test_paginate_gives_a_word_too_long_for_any_page_a_page_of_its_own():
    pages = paginate("tiny\n\n" + "x" * 500 + "\n\nend", lambda page: len(page) < 50)
    assert pages == ["tiny", "x" * 500, "end"]


# -- instructions -------------------------------------------------------------------------------
def _block(**kw):
    base = dict(
        name="b",
        mode="generate",
        instructions="",
        time_limit_s=None,
        practice=(),
        items=("i1", "i2", "i3"),
        feedback=True,
    )
    base.update(kw)
    return FormBlock(**base)


def test_placeholders_fill_from_the_block_and_empty_sentences_drop_out():
    text = (
        "Title\n\n{how}\n\nThis part has {n_items} puzzles. {time_limit}\n{countdown}\n\n"
        "{practice} {feedback}\n"
    )
    plain = fill_instructions(text, instruction_values(_block(), how="Press a key."))
    assert plain == "Title\n\nPress a key.\n\nThis part has 3 puzzles.\n"
    assert "practice" not in plain and "second" not in plain
    timed = fill_instructions(
        text,
        instruction_values(
            _block(time_limit_s=90.0, practice=("p1", "p2")), how="Type.", countdown=True
        ),
    )
    assert "You have 90 seconds for each puzzle" in timed
    assert "top right corner" in timed
    assert "The first 2 puzzles are practice" in timed
    assert "whether your answer was correct, and the correct answer" in timed
    no_feedback = instruction_values(_block(practice=("p1",), feedback=False))
    assert no_feedback["practice"] == "The first puzzle is practice and does not count."
    assert no_feedback["feedback"] == ""
    assert instruction_values(_block(time_limit_s=120.0))["time_limit"].startswith(
        "You have 2 minutes"
    )
    # no countdown sentence without a time limit, even when the countdown is on
    assert instruction_values(_block(), countdown=True)["countdown"] == ""


def test_an_unknown_placeholder_is_refused_with_the_accepted_ones():
    with pytest.raises(SpecError) as err:
        check_placeholders("You have {time_limt}.", "instructions of block b")
    msg = str(err.value)
    assert "field 'instructions of block b': got '{time_limt}'; accepted: placeholders" in msg
    assert all("{" + p + "}" in msg for p in PLACEHOLDERS)
    check_placeholders("A set {like this one} and {n_items} items.", "x")  # other braces pass


@pytest.mark.parametrize("family", ["strings", "matrices", "contrast", "grids"])
@pytest.mark.parametrize("mode", ["generate", "select"])
def test_every_builtin_family_and_mode_has_its_own_template(family, mode):
    name, text = instruction_template([family], mode)
    assert name == f"instructions-{family}-{mode}.txt"
    check_placeholders(text, name)
    for p in ("{n_items}", "{time_limit}", "{practice}", "{feedback}", "{how}"):
        assert p in text, f"{name} lacks {p}"
    assert "Letter strings" not in text and "letter string" not in text.lower()
    if family == "strings":  # digits, letters and glyphs alike
        assert text.startswith("Symbol strings")


def test_a_mixed_block_gets_the_general_template():
    assert instruction_template(["strings", "grids"], "select")[0] == "instructions.txt"


STRINGS_BODY = """
[bank.spec]
seed = 5
[bank.spec.families.strings]
n = 4
modes = ["generate"]
[bank.spec.families.strings.params]
alphabet = ["letters"]

[[blocks]]
name = "letters"
families = ["strings"]
mode = "generate"
time_limit_s = 30
practice = 1
feedback = true

[forms]
order = "fixed"
break_every = 2
"""


def test_a_block_without_a_file_gets_the_shipped_template_filled(tmp_path):
    from _display import make_runner_study

    path = make_runner_study(tmp_path / "s", STRINGS_BODY, runner="countdown = true\n", n_forms=1)
    plan = prepare_session(path, "P001")
    text = plan.instructions["letters"]
    assert text.startswith("Symbol strings")
    assert "This part has 3 puzzles." in text  # 4 items, 1 of them practice
    assert "You have 30 seconds for each puzzle" in text
    assert "The first puzzle is practice" in text
    assert "top right corner" in text
    assert "{" not in text


def test_a_blocks_own_file_wins_and_its_placeholders_are_filled(tmp_path):
    from _display import make_runner_study

    body = STRINGS_BODY.replace(
        "time_limit_s = 30\n", 'time_limit_s = 30\ninstructions = "own.txt"\n'
    )
    (tmp_path / "s").mkdir()
    (tmp_path / "s" / "own.txt").write_text("Our own words: {n_items} items, {time_limit_s} s.\n")
    path = make_runner_study(tmp_path / "s", body, n_forms=1)
    plan = prepare_session(path, "P001")
    assert plan.instructions["letters"] == "Our own words: 3 items, 30 s.\n"
    (path.parent / "own.txt").write_text("{nitems} items\n")
    with pytest.raises(SpecError, match=r"got '\{nitems\}'"):
        prepare_session(path, "P002")


def test_how_to_answer_follows_each_blocks_screen(tmp_path):
    from _display import ALL_FAMILIES, make_runner_study

    body = ALL_FAMILIES.replace('instructions = "instructions.txt"\n', "")
    plan = prepare_session(make_runner_study(tmp_path / "s", body, n_forms=1), "P001")
    text = plan.instructions
    assert text["letters"].startswith("Symbol strings")
    # letters can be typed, glyphs are clicked on screen keys: the block has both
    assert "Type your answer" in text["letters"]
    assert "Click the symbols of your answer" in text["letters"]
    assert "press the number shown beside it" in text["figures"]
    assert "A (or F) for set A" in text["sets"] and "type the rule" in text["sets"]  # state_rule
    assert "Paint the answer grid" in text["colours"]
    assert "The first puzzle is practice" in text["letters"]
    assert all("practice" not in text[b] for b in ("figures", "sets", "colours"))
    assert all("for each puzzle" not in t for t in text.values())  # no time limits here


def test_countdown_option_is_checked(tmp_path):
    from _display import make_runner_study

    path = make_runner_study(tmp_path / "s", STRINGS_BODY, runner="countdown = true\n", n_forms=1)
    assert parse_runner(load_study(path)).countdown is True
    path.write_text(path.read_text().replace("countdown = true", 'countdown = "yes"'))
    with pytest.raises(SpecError, match=r"field 'runner.countdown': got 'yes'; accepted: true or"):
        parse_runner(load_study(path))
    path.write_text(path.read_text().replace('countdown = "yes"', ""))
    assert parse_runner(load_study(path)).countdown is False


# -- progress at breaks -----------------------------------------------------------------------
def _form(break_every=2, between=True):
    return Form(
        form_id="F001",
        list=0,
        order=0,
        blocks=(
            _block(name="a", items=("a1", "a2", "a3", "a4"), practice=("ap",)),
            _block(name="b", items=("b1", "b2")),
        ),
        bank_hash="x",
        break_every=break_every,
        break_between_blocks=between,
    )


def test_walk_states_progress_on_every_break():
    steps = list(walk(_form(), set(), []))
    kinds = [s.kind for s in steps]
    assert kinds == [
        "instructions",
        "practice",
        "trial",
        "trial",
        "break",
        "trial",
        "trial",
        "break",
        "instructions",
        "trial",
        "trial",
        "end",
    ]
    within, between = (s.text for s in steps if s.kind == "break")
    assert "You have finished 2 of 6 items." in within
    assert "This part has 2 more items; 1 more part after it." in within
    assert "You have finished 4 of 6 items. 1 part to go." in between
    assert [s.trial for s in steps if s.kind == "trial"] == list(range(6))


def test_walk_of_a_resumed_session_counts_the_trials_already_done():
    steps = list(walk(_form(), {0, 1, 2}, ["a"]))
    assert [s.kind for s in steps] == [
        "instructions",
        "trial",
        "break",
        "instructions",
        "trial",
        "trial",
        "end",
    ]
    (brk,) = (s.text for s in steps if s.kind == "break")
    assert "You have finished 4 of 6 items." in brk


def test_break_text_wording():
    assert break_text(3, 10, 0, 2).endswith("You have finished 3 of 10 items. 2 parts to go.")
    assert break_text(1, 4, 1, 0).endswith("This part has 1 more item, and it is the last part.")


# -- on a real window ---------------------------------------------------------------------------
def _inside(box, w, h):
    return 0 <= box[0] < box[2] <= w and 0 <= box[1] < box[3] <= h


def _apart(a, b):
    return a[2] <= b[0] or b[2] <= a[0] or a[3] <= b[1] or b[3] <= a[1]


@pytest.mark.display
def test_long_consent_pages_with_keys_on_every_page(x_display, tmp_path):  # noqa: F811
    """~800 words at 1024x768: pages, each inside the window with its key footer; Y does nothing
    before the last page; LEFT goes back; all words are shown once."""
    from _display import Driver, make_runner_study

    path = make_runner_study(tmp_path / "s", STRINGS_BODY, n_forms=2)
    (path.parent / "consent.txt").write_text(CONSENT_800, "utf-8")
    d = Driver(x_display, path, "P001", tmp_path)
    try:
        s = d.wait("consent")
        n = s["pages"]
        assert n >= 2 and s["page"] == 1
        words: dict[int, int] = {}
        seen = []
        while True:
            x0, y0, w, h = s["window"]
            assert (w, h) == (1024, 768)
            assert s["letter"] >= 18
            boxes = s["boxes"]
            for name in ("body", "footer", "page"):
                assert _inside(boxes[name], w, h), (s["page"], name, boxes[name])
            assert _apart(boxes["body"], boxes["footer"]) and _apart(boxes["footer"], boxes["page"])
            assert boxes["body"][3] <= boxes["footer"][1]  # the footer is under the text
            words[s["page"]] = s["words"]
            seen.append(s["page"])
            if s["page"] < n:
                assert "(Y / N on the last page.)" in s["footer"]
                d.key("y")  # not the last page: ignored
                d.key("Right")
                s = d.wait("consent")
                assert s["page"] == seen[-1] + 1
                if s["page"] == 2 and seen.count(1) == 1:
                    d.key("Left")  # back once, then on again with SPACE
                    s = d.wait("consent")
                    assert s["page"] == 1
                    d.key("space")
                    s = d.wait("consent")
                    assert s["page"] == 2
                continue
            assert s["footer"].startswith("Y = I agree")
            break
        assert sum(words.values()) == len(CONSENT_800.split())
        d.key("y")
        s = d.wait("instructions")
        assert s["text"].startswith("Symbol strings") and s["footer"] == "Press SPACE to begin."
    finally:
        d.kill()


@pytest.mark.display
def test_practice_feedback_shows_the_answer_and_the_countdown_runs(x_display, tmp_path):  # noqa: F811
    from _display import Driver, make_runner_study

    path = make_runner_study(
        # a tall window: the scene is as wide as the window, so its top would reach the corner
        tmp_path / "s",
        STRINGS_BODY,
        runner="size = [800, 1000]\ncountdown = true\n",
        n_forms=2,
    )
    bank = load_study(path).bank()
    d = Driver(x_display, path, "P001", tmp_path)
    try:
        d.wait("consent")
        d.key("y")
        s = d.wait("instructions")
        assert "You have 30 seconds for each puzzle" in s["text"] or s["pages"] > 1
        d.key("space")
        s = d.wait("trial")
        assert s["trial"] is None  # the practice item
        w, h = s["window"][2:]
        cd = s["countdown"]
        assert _inside(cd, w, h) and cd[0] > w * 0.75 and cd[3] < h * 0.1  # top right, small
        assert s["crossing"] == []  # the screen keeps the corner free
        item = bank[s["item"]]
        wrong = "q" if item.answer != "q" else "z"
        d.key(wrong)
        d.key("Return")
        fb = d.wait("feedback")
        assert fb["text"].startswith("Not correct.\n\nThe correct answer:")
        assert fb["footer"] == "Press SPACE to go on."
        boxes = fb["boxes"]
        assert _inside(boxes["picture"], w, h)
        assert _apart(boxes["picture"], boxes["body"]) and _apart(boxes["picture"], boxes["footer"])
        d.key("space")
        s = d.wait("trial")
        assert s["trial"] == 0
    finally:
        d.kill()


def test_no_template_wording_says_letter_strings():
    src = resources.files("twofold.experiments").joinpath("templates")
    for f in src.iterdir():
        if f.name.startswith("instructions"):
            assert not re.search(r"letter strings", f.read_text("utf-8"), re.I), f.name
