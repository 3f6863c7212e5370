"""An X display for runner tests, and a driver that injects keys and mouse input through XTEST.

``x_display`` (a session-scoped pytest fixture) uses ``$DISPLAY`` when set; otherwise it starts
``Xvfb :N -screen 0 1280x1024x24`` that dies with the test process (parent-death signal), never
killed from a pytest hook. Without Xvfb the runner tests skip, except under CI (env ``CI`` set),
where they fail.

Sessions run in a subprocess (``python -m twofold.experiments.human``) with HOME, MPLCONFIGDIR and
PSYCHOPYNOPACKAGES set; :class:`Driver` watches the runner's probe file (what is on screen, when
it appeared, where its click targets are) and injects input with python-xlib XTEST.
"""

from __future__ import annotations

import ctypes
import json
import os
import shutil
import signal
import subprocess
import sys
import time
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import pytest

REPO = Path(__file__).resolve().parents[1]
HINT = "apt-get install xvfb xdotool libjack-jackd2-0"
_STATE: dict[str, Any] = {}


def _pdeathsig() -> None:  # runs in the child between fork and exec
    libc = ctypes.CDLL("libc.so.6", use_errno=True)
    libc.prctl(1, signal.SIGTERM)  # PR_SET_PDEATHSIG


def start_display() -> str:
    """The X display to use: ``$DISPLAY``, or a private Xvfb started once per process."""
    if os.environ.get("DISPLAY"):
        return os.environ["DISPLAY"]
    if "display" in _STATE:
        return _STATE["display"]
    if shutil.which("Xvfb") is None:
        msg = f"the runner tests need Xvfb: {HINT}"
        if os.environ.get("CI"):
            pytest.fail(msg)
        pytest.skip(msg)
    for n in range(90 + os.getpid() % 50, 400):
        if Path(f"/tmp/.X{n}-lock").exists() or Path(f"/tmp/.X11-unix/X{n}").exists():
            continue
        proc = subprocess.Popen(
            # -noreset: no server reset each time the last client leaves (sessions come and go)
            ["Xvfb", f":{n}", "-screen", "0", "1280x1024x24", "-nolisten", "tcp", "-noreset"],
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
            preexec_fn=_pdeathsig,
        )
        for _ in range(100):
            if Path(f"/tmp/.X11-unix/X{n}").exists():
                break
            if proc.poll() is not None:
                break
            time.sleep(0.05)
        if proc.poll() is None:
            _STATE["display"], _STATE["proc"] = f":{n}", proc
            return f":{n}"
    pytest.fail("could not start Xvfb on any display number")


@pytest.fixture(scope="session")
def x_display() -> str:
    """The DISPLAY string of a usable X server (see module docstring)."""
    try:
        import Xlib  # noqa: F401
    except ImportError:
        msg = "the runner tests need python-xlib (pip install python-xlib)"
        if os.environ.get("CI"):
            pytest.fail(msg)
        pytest.skip(msg)
    return start_display()


def session_env(display: str, home: Path, probe: Path) -> dict[str, str]:
    """Environment of a session subprocess: private HOME, no PsychoPy packages, the probe."""
    env = dict(os.environ)
    home.mkdir(parents=True, exist_ok=True)
    env.update(
        {
            "DISPLAY": display,
            "HOME": str(home),
            "MPLCONFIGDIR": str(home / "mpl"),
            "PSYCHOPYNOPACKAGES": "1",
            "TWOFOLD_RUNNER_PROBE": str(probe),
            "PYTHONPATH": os.pathsep.join(
                filter(None, [str(REPO / "tests"), env.get("PYTHONPATH", "")])
            ),
        }
    )
    return env


class Driver:
    """Start a session process and play the respondent: keys and clicks via XTEST."""

    def __init__(
        self,
        display: str,
        study: Path,
        respondent: str,
        tmp: Path,
        *,
        resume: bool = False,
        imports: tuple[str, ...] = (),
        cli: bool = False,
    ):
        from Xlib import display as xdisplay

        self.probe_path = tmp / f"probe-{respondent}-{time.monotonic_ns()}.json"
        env = session_env(display, tmp / "home", self.probe_path)
        # the session module, or the `twofold run human` command itself
        head = (
            ["-c", "from twofold.experiments.cli import _entry; _entry()", "run", "human"]
            if cli
            else ["-m", "twofold.experiments.human"]
        )
        cmd = [
            sys.executable,
            *head,
            str(study),
            "--respondent",
            respondent,
        ]
        if resume:
            cmd.append("--resume")
        for m in imports:
            cmd += ["--import", m]
        self.proc = subprocess.Popen(
            cmd, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True
        )
        self.x = xdisplay.Display(display)
        self.seq = 0
        self.state: dict[str, Any] = {}

    # -- what is on screen -------------------------------------------------------------------
    def wait(self, screen: str | None = None, timeout: float = 30.0) -> dict[str, Any]:
        """Wait for the next screen onset (optionally of a given kind) and return its probe."""
        t0 = time.monotonic()
        while time.monotonic() - t0 < timeout:
            if self.proc.poll() is not None:
                raise AssertionError(
                    f"session ended (rc {self.proc.returncode}) while waiting "
                    f"for {screen}: {self.proc.stderr.read()}"
                )
            try:
                data = json.loads(self.probe_path.read_text("utf-8"))
            except (FileNotFoundError, json.JSONDecodeError):
                data = None
            if data and data["seq"] > self.seq:
                self.seq = data["seq"]
                self.state = data
                x0, y0, w, h = data["window"]
                outside = {
                    k: v
                    for k, v in data["targets"].items()
                    if not (x0 <= v[0] < x0 + w and y0 <= v[1] < y0 + h)
                }
                assert not outside, f"targets outside the window: {outside}"
                if data["screen"] == screen or (screen is None and data["screen"] != "update"):
                    return data
            time.sleep(0.002)
        raise AssertionError(
            f"no {screen or 'new'} screen within {timeout} s (last: {self.state.get('screen')})"
        )

    def refresh(self) -> dict[str, Any]:
        """Re-read the probe of the current screen (targets may move, e.g. a resized grid)."""
        data = json.loads(self.probe_path.read_text("utf-8"))
        self.seq, self.state = data["seq"], data
        return data

    def refresh_until(
        self, present: Sequence[str] = (), absent: Sequence[str] = (), timeout: float = 15.0
    ) -> dict[str, Any]:
        """Re-read the probe until its targets include ``present`` and lack ``absent``.

        Input is handled on the runner's next frame; on a loaded machine that can come after
        the test's next read, so a test that needs a changed screen waits for it.
        """
        t0 = time.monotonic()
        while True:
            data = self.refresh()
            targets = data.get("targets", {})
            if all(n in targets for n in present) and not any(n in targets for n in absent):
                return data
            if time.monotonic() - t0 > timeout:
                raise AssertionError(f"screen never showed {list(present)} without {list(absent)}")
            time.sleep(0.02)

    # -- input ---------------------------------------------------------------------------------
    def key(self, name: str, hold: float = 0.02) -> float:
        """Press and release a key (X keysym name); return the press time (time.time())."""
        from Xlib import XK, X
        from Xlib.ext import xtest

        code = self.x.keysym_to_keycode(XK.string_to_keysym(name))
        assert code, f"no keycode for {name!r}"
        t = time.time()
        xtest.fake_input(self.x, X.KeyPress, code)
        self.x.sync()
        time.sleep(hold)
        xtest.fake_input(self.x, X.KeyRelease, code)
        self.x.sync()
        time.sleep(0.005)
        return t

    def type(self, text: str) -> None:
        for ch in text:
            self.key(ch if ch.isalnum() else {" ": "space", "-": "minus"}[ch])

    def move(self, xy: tuple[float, float]) -> None:
        from Xlib import X
        from Xlib.ext import xtest

        xtest.fake_input(self.x, X.MotionNotify, x=int(round(xy[0])), y=int(round(xy[1])))
        self.x.sync()
        time.sleep(0.02)

    def click(self, target: str | tuple[float, float], hold: float = 0.05) -> float:
        """Move to a named target of the current screen (or root x, y) and click."""
        from Xlib import X
        from Xlib.ext import xtest

        xy = self.state["targets"][target] if isinstance(target, str) else target
        self.move(xy)
        t = time.time()
        xtest.fake_input(self.x, X.ButtonPress, 1)
        self.x.sync()
        time.sleep(hold)
        xtest.fake_input(self.x, X.ButtonRelease, 1)
        self.x.sync()
        time.sleep(0.03)
        return t

    def drag(self, points: list[tuple[float, float]]) -> None:
        from Xlib import X
        from Xlib.ext import xtest

        self.move(points[0])
        xtest.fake_input(self.x, X.ButtonPress, 1)
        self.x.sync()
        time.sleep(0.04)
        for p in points[1:]:
            self.move(p)
        xtest.fake_input(self.x, X.ButtonRelease, 1)
        self.x.sync()
        time.sleep(0.03)

    def finish(self, timeout: float = 30.0) -> tuple[int, str]:
        try:
            _, err = self.proc.communicate(timeout=timeout)
        except subprocess.TimeoutExpired:
            self.kill()
            raise
        finally:
            self.x.close()
        return self.proc.returncode, err

    def kill(self) -> None:
        self.proc.send_signal(signal.SIGKILL)
        self.proc.wait()
        for pipe in (self.proc.stdout, self.proc.stderr):
            pipe.close()
        self.x.close()


ALL_FAMILIES = """
[bank.spec]
seed = 21
[bank.spec.families.strings]
n = 3
modes = ["generate", "select"]
design = "crossed"
[bank.spec.families.strings.params]
alphabet = ["letters", "glyphs"]
[bank.spec.families.matrices]
n = 3
modes = ["select", "generate"]
[bank.spec.families.contrast]
n = 2
modes = ["select", "generate"]
[bank.spec.families.grids]
n = 2
modes = ["generate", "select"]
[bank.spec.families.grids.params]
size = 4

[[blocks]]
name = "letters"
families = ["strings"]
mode = "generate"
instructions = "instructions.txt"
practice = 1

[[blocks]]
name = "figures"
families = ["matrices"]
mode = "select"
instructions = "instructions.txt"

[[blocks]]
name = "sets"
families = ["contrast"]
mode = "select"
instructions = "instructions.txt"
state_rule = true

[[blocks]]
name = "colours"
families = ["grids"]
mode = "generate"
instructions = "instructions.txt"

[forms]
order = "fixed"
"""


def make_runner_study(
    root: Path,
    body: str = ALL_FAMILIES,
    *,
    name: str = "runnertest",
    runner: str = "",
    n_forms: int = 20,
) -> Path:
    """A study folder with consent and instructions files and built forms."""
    from twofold.study import load_study
    from twofold.study.forms import build_forms, write_forms

    root.mkdir(parents=True, exist_ok=True)
    runner = runner or "size = [1024, 768]\n"
    (root / "study.toml").write_text(
        f'[study]\nname = "{name}"\nseed = 8\n{body}\n[runner]\n{runner}', "utf-8"
    )
    (root / "consent.txt").write_text(
        "Consent text approved for this test study.\n\nY = agree, N = do not agree.\n", "utf-8"
    )
    (root / "instructions.txt").write_text("Instructions.\n\nPress SPACE.\n", "utf-8")
    study = load_study(root)
    write_forms(study, build_forms(study, n_forms))
    return root / "study.toml"


def answer(d: Driver, item: Any, mode: str, *, step: int = 0) -> dict[str, Any]:
    """Answer ``item`` correctly on the current screen; return what the log should show.

    ``step`` varies the way of answering (key vs click) so both paths are exercised.
    """
    fam = item.family
    if mode == "select" and fam != "contrast":
        k = item.answer_choice  # the bank's number: what the log stores
        shown = on_screen(d.state, k)  # the number the participant sees
        if step % 2:
            d.click(f"choice:{shown}")
        else:
            d.key(str(shown))
        return {"response": k, "correct": True, "choice_order": d.state.get("choice_order")}
    if fam == "matrices":  # generate: pick every attribute of the missing panel
        for attr, val in item.answer.items():
            d.click(f"attr:{attr}={val}")
        d.click("submit")
        return {"response": item.answer, "correct": True}
    if fam == "strings":
        text = item.answer
        if all(ch.isascii() and ch.isalnum() for ch in text):
            d.key("x" if "x" not in text else "q")  # a wrong symbol, then correct it
            d.key("BackSpace")
            d.type(text)
            d.key("Return")
        else:
            d.click(f"symbol:{text[0]}")
            d.click("delete")
            for ch in text:
                d.click(f"symbol:{ch}")
            d.click("done")
        return {"response": text, "correct": True}
    if fam == "contrast" and mode == "generate":  # a rule in own words: kept, not scored
        d.type("dark ones")
        d.key("Return")
        return {"response": "dark ones", "correct": None, "status": "invalid"}
    if fam == "contrast":
        labels = item.answer["labels"]
        for j, lab in enumerate(labels):
            if j == 0:
                d.key(lab.lower())
            elif j == 1:  # the other key pair, F for A and J for B
                d.key({"A": "f", "B": "j"}[lab])
            else:
                d.click(f"label:{lab}")
        # the review state: nothing submitted yet; the rule box takes the typing
        d.type("dark ones")
        d.key("Return")
        return {"response": labels, "correct": True, "detail": "rule statement: dark ones"}
    if fam == "grids":
        from twofold.study import get_family

        opts = get_family(fam).scene(item, mode).response.options
        empty = int(opts.get("empty", 0))
        keys = [_KEYSYM.get(lab, lab.lower()) for lab in opts["labels"]]
        target = item.answer
        start = opts["start"]
        d.click("copy")
        d.click("clear")
        rows, cols = len(start), len(start[0])
        d.refresh_until(present=[f"cell:{rows - 1},{cols - 1}"], absent=[f"cell:{rows},0"])
        # a fast drag across the first row in one colour (a continuous stroke; repainted below)
        d.key(keys[1 if empty != 1 else 2])
        d.drag([d.state["targets"][f"cell:0,{c}"] for c in (0, cols - 1)])
        d.click("undo")  # the whole stroke is one undo step
        d.click("undo")  # and so is the clear: the copied probe is back
        d.click("clear")
        for name, diff in (("rows", len(target) - rows), ("cols", len(target[0]) - cols)):
            for _ in range(abs(diff)):
                d.click(f"{name}{'+' if diff > 0 else '-'}")
        rr, cc = len(target), len(target[0])
        d.refresh_until(
            present=[f"cell:{rr - 1},{cc - 1}"], absent=[f"cell:{rr},0", f"cell:0,{cc}"]
        )
        by_colour: dict[int, list[str]] = {}
        for r, line in enumerate(target):
            for c, v in enumerate(line):
                if v != empty:
                    by_colour.setdefault(int(v), []).append(f"cell:{r},{c}")
        for k, (colour, cells) in enumerate(sorted(by_colour.items())):
            if k % 2:
                d.click(f"colour:{colour}")
            else:
                d.key(keys[colour])  # the swatch's label
            for cell in cells:
                d.click(cell)
        d.click("submit")
        return {"response": target, "correct": True}
    raise AssertionError(f"no way to answer {fam} in {mode}")


#: X keysym names of swatch labels that are not letters or digits
_KEYSYM = {".": "period", ",": "comma", "-": "minus", "/": "slash", "+": "plus", "*": "asterisk"}


def on_screen(state: dict[str, Any], bank_choice: int) -> int:
    """The number shown on screen for bank choice ``bank_choice`` (the probe names the order)."""
    order = state.get("choice_order")
    return order.index(bank_choice) + 1 if order else bank_choice


def play(
    d: Driver,
    bank: Any,
    *,
    consent: str = "y",
    stop_after: int | None = None,
    feedback: list[str] | None = None,
) -> list[dict[str, Any]]:
    """Go through a session answering every item correctly; return the expected trial rows.

    Practice items are answered too (their rows are not logged). Stops (without ending the
    session) after ``stop_after`` logged trials when given. Feedback lines go to ``feedback``.
    """
    expected: list[dict[str, Any]] = []
    feedback = [] if feedback is None else feedback
    step = 0
    while True:
        s = d.wait(None)
        if s.get("page", 1) < s.get("pages", 1):  # a paged text screen: on to its last page
            d.key("Right")
            continue
        if s["screen"] == "consent":
            d.key(consent)
            if consent != "y":
                return expected
        elif s["screen"] == "trial":
            if stop_after is not None and len(expected) >= stop_after:
                return expected
            item = bank[s["item"]]
            exp = answer(d, item, s["mode"], step=step)
            step += 1
            if s["trial"] is not None:
                exp.update(trial=s["trial"], item=item.id)
                expected.append(exp)
        elif s["screen"] == "end":
            d.key("space")
            return expected
        elif s["screen"] == "feedback":
            feedback.append(s["text"].split("\n")[0])
            d.key("space")
        else:  # instructions, feedback, break
            d.key("space")


MATRICES_ONLY = """
[bank.spec]
seed = 4
[bank.spec.families.matrices]
n = {n}
modes = ["select"]

[[blocks]]
name = "figures"
families = ["matrices"]
mode = "select"
instructions = "instructions.txt"

[forms]
order = "fixed"
break_between_blocks = false
"""


def timed_keys(d: Driver, bank: Any, n: int, *, seed: int = 0) -> list[tuple[int, float]]:
    """Answer ``n`` select trials by key at random delays after each onset.

    Returns ``(trial, expected_rt_ms)`` where the expected RT is the injection time minus the
    onset, both on the system real-time clock (see the timing test's docstring).
    """
    import random

    rng = random.Random(seed)
    out = []
    while len(out) < n:
        s = d.wait(None)
        if s["screen"] != "trial":
            d.key("y" if s["screen"] == "consent" else "space")
            continue
        time.sleep(rng.uniform(0.03, 0.12))
        t_inject = d.key(str(on_screen(s, bank[s["item"]].answer_choice)))
        out.append((s["trial"], (t_inject - s["onset"]) * 1000.0))
    return out


# -- screens painted in a subprocess (window tests of the painter and of screen layouts) -----------
def screen_job(display: str, tmp: Path, job: dict[str, Any], timeout: float = 240.0) -> Any:
    """Run :func:`screen_worker` on ``job`` in a subprocess under ``display``; its JSON result.

    PsychoPy is imported only there (it changes ``HOME``-dependent state and ``sys.path``)."""
    env = session_env(display, tmp / "home", tmp / "probe-unused.json")
    out = subprocess.run(
        [sys.executable, "-c", "import _display; _display.screen_worker()"],
        input=json.dumps(job),
        env=env,
        capture_output=True,
        text=True,
        timeout=timeout,
    )
    assert out.returncode == 0, out.stderr[-4000:]
    return json.loads(out.stdout.strip().splitlines()[-1])


def _bank(job: dict[str, Any]) -> list[Any]:
    from twofold.study import generate_bank, parse_spec

    if job.get("toy"):
        import _toyfamily

        _toyfamily.use_toy()
    items: list[Any] = []
    for spec in job["specs"]:
        items += list(generate_bank(parse_spec(spec)).items)
    return items


def _act(screen: Any, item: Any, mode: str) -> None:
    """Bring ``screen`` to its fullest state: every label given and a rule typed, every
    attribute picked, the answer typed, the answer grid at its largest size."""
    kind = type(screen).__name__
    if kind == "LabelScreen":
        for k in range(screen.n):
            screen.key("a" if k % 2 == 0 else "j", 1.0)
        if screen.rule:
            for ch in "the dark ones with dashed edges":
                screen.key("space" if ch == " " else ch, 2.0)
    elif kind == "BuildScreen":
        for a, vals in screen.attrs.items():
            v = item.answer.get(a, vals[-1]) if isinstance(item.answer, dict) else vals[-1]
            screen.press(screen.targets[f"attr:{a}={v}"], 1.0)
    elif kind == "TypeScreen":
        text = item.answer if isinstance(item.answer, str) else str(item.answer)
        for ch in text * 3:  # longer than any answer: the entry must stay in its box
            screen.add(ch)
    elif kind == "EditorScreen":
        rows, cols = screen.max_size
        screen.press(screen.targets["size"], 1.0)
        for ch in f"{rows}x{cols}":
            screen.key(ch, 1.0)
        screen.key("return", 1.0)
        screen.press(screen.targets["copy"], 1.0)


def _interact(ctx: Any, item: Any, mode: str) -> list[dict[str, Any]]:
    """Scripted respondents on one item's screen(s); what each step gave (see the tests in
    test_screens_fit.py)."""
    from twofold.experiments.human.screens import make_screen

    def ans(a: Any) -> Any:
        return None if a is None else [a.value, a.t, a.detail]

    out: list[dict[str, Any]] = []
    s = make_screen(ctx, item, mode)
    kind = type(s).__name__
    if kind == "LabelScreen":
        for rule in (False, True):
            s = make_screen(ctx, item, mode, state_rule=rule)
            steps = [ans(s.key("a" if k % 2 == 0 else "j", 1.0 + k)) for k in range(s.n)]
            review = [s.showing("submit"), "submit" in s.targets]
            s.press(s.targets["test:1"], 20.0)  # change the first label by clicks
            s.press(s.targets["label:B"], 21.0)
            early = ans(s.key("return", 22.0)) if rule else None
            for ch in "ab":  # in the rule state, typing goes to the rule box
                s.key(ch, 23.0)
            out.append(
                {"kind": kind, "rule": rule, "n": s.n, "steps": steps, "review": review,
                 "given": list(s.given), "early": early, "final": ans(s.key("return", 30.0))}
            )  # fmt: skip
    elif kind == "BuildScreen":
        early = ans(s.press(s.targets["submit"], 1.0))
        picks = {a: vals[0] for a, vals in s.attrs.items()}
        for a, v in picks.items():
            s.press(s.targets[f"attr:{a}={v}"], 2.0)
        p = s.preview
        box = s.painter.box_px(s.scene.answer_box)
        out.append(
            {"kind": kind, "early": early, "picks": picks,
             "scales": [p.scale if p else None, s.painter.scale],
             "extent": list(p.extent()) if p else None, "answer_box": list(box),
             "final": ans(s.press(s.targets["submit"], 3.0))}
        )  # fmt: skip
    elif kind == "TypeScreen" and s.symbols:
        empty = ans(s.key("return", 1.0))
        a, b = s.symbols[0], s.symbols[-1]
        for name in (f"symbol:{a}", f"symbol:{b}", "delete", f"symbol:{a}"):
            s.press(s.targets[name], 2.0)
        out.append(
            {"kind": kind, "empty": empty, "typed": s.typed, "want": a + a,
             "help": s.help_text, "symbols": list(s.symbols),
             "final": ans(s.press(s.targets["done"], 3.0))}
        )  # fmt: skip
    elif kind == "EditorScreen":
        log: dict[str, Any] = {"kind": kind, "start": s.start, "empty": s.empty}
        grid = lambda: [list(r) for r in s.view.grid]  # noqa: E731
        s.press(s.targets["clear"], 0.0)
        log["cleared"] = grid()
        s.key(_KEYSYM.get(s.labels[2], s.labels[2].lower()), 0.0)  # a colour by its label
        log["colour"] = s.colour
        s.press(s.targets["fill"], 0.0)
        s.press(s.targets["cell:0,0"], 0.0)
        log["filled"] = grid()
        s.press(s.targets["undo"], 0.0)
        log["fill_undone"] = grid()
        s.press(s.targets["copy"], 0.0)
        log["copied"] = grid()
        rows, cols = s.view.rows, s.view.cols
        s.press(s.targets["rows+"], 0.0)
        s.press(s.targets["cols-"], 0.0)
        log["resized"] = [s.view.rows, s.view.cols, f"cell:{rows},0" in s.targets]
        s.press(s.targets["size"], 0.0)
        for ch in ("3", "x", "4"):
            s.key(ch, 0.0)
        s.key("return", 0.0)
        log["typed_size"] = [s.view.rows, s.view.cols]
        for _ in range(3):  # typed size, cols-, rows+: each one undo step
            s.press(s.targets["undo"], 0.0)
        log["undone"] = grid()
        log["size"] = [rows, cols]
        log["final"] = ans(s.key("return", 5.0))
        out.append(log)
    return out


def screen_worker() -> None:
    """Subprocess side of :func:`screen_job`. Jobs (JSON on stdin):

    - ``{"task": "records", "specs": [...], "toy": bool}``: for every item and mode, the records
      :class:`ScenePainter` reads back from its stimuli (1024x768 window);
    - ``{"task": "boxes", "specs": [...], "sizes": [[w, h], ...]}``: for every window size,
      item, mode (and rule state for contrast), the screen's boxes when built and in its
      fullest state (see :func:`_act`), the window size, the scene scale;
    - ``{"task": "drag", "specs": [...]}``: a fast drag across a row of the grid editor (two
      pointer positions, first and last cell): the cells painted and the undo steps.
    """
    import logging as _logging

    job = json.loads(sys.stdin.read())
    from psychopy import logging, visual

    logging.console.setLevel(_logging.ERROR)
    from twofold.experiments.human.screens import Ctx, ScenePainter, make_screen
    from twofold.study import get_family

    items = _bank(job)
    out: list[Any] = []
    sizes = job.get("sizes") or [[1024, 768]]
    for w, h in sizes:
        win = visual.Window(size=[w, h], units="pix", color="#20242b", checkTiming=False)
        ctx = Ctx(win=win, visual=visual, size=(w, h), background="#20242b")
        for item in items:
            for mode in item.modes:
                fam = get_family(item.family)
                if job["task"] == "records":
                    sc = fam.scene(item, mode)
                    p = ScenePainter(ctx, sc, (-w / 2 + 12, -h / 2 + 12, w / 2 - 12, h / 2 - 12))
                    recs = [
                        {k: (list(map(list, v)) if k == "points" else v) for k, v in r.items()}
                        for r in p.records()
                    ]
                    out.append({"item": item.id, "mode": mode, "records": recs})
                    continue
                if job["task"] == "interact":
                    out += _interact(ctx, item, mode)
                    continue
                if job["task"] == "drag":
                    if mode != "generate" or item.family != "grids":
                        continue
                    s = make_screen(ctx, item, mode)
                    s.press(s.targets["clear"], 0.0)
                    cols = s.view.cols
                    s.press(s.targets["cell:0,0"], 0.0)  # one press, one jump, no stops
                    s.drag(s.targets[f"cell:0,{cols - 1}"])
                    row = list(s.view.grid[0])
                    s.press(s.targets["undo"], 0.0)
                    after_undo = list(s.view.grid[0])
                    from twofold.experiments.human.screens.paint import hex_of

                    inks = [hex_of(t.color, t.colorSpace) for t in s.swatches.labels]
                    out.append(
                        {"colour": s.colour, "row": row, "after_undo": after_undo,
                         "empty": s.empty, "fills": s.swatches.fills, "inks": inks}
                    )  # fmt: skip
                    continue
                rules = [False, True] if item.family == "contrast" and mode == "select" else [False]
                for rule in rules:
                    s = make_screen(ctx, item, mode, state_rule=rule)
                    first = s.boxes()
                    _act(s, item, mode)
                    s.draw()
                    win.flip()
                    out.append(
                        {
                            "item": item.id,
                            "family": item.family,
                            "mode": mode,
                            "rule": rule,
                            "size": [w, h],
                            "kind": type(s).__name__,
                            "scale": s.painter.scale,
                            "boxes": [first, s.boxes()],
                        }
                    )
        win.close()
    print(json.dumps(out))
