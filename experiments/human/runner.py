"""The participant session loop: consent, instructions, practice, items, breaks, end screen.

PsychoPy is imported inside :func:`run_session` only. Timing: an item's onset is the return
value of the ``win.flip()`` that first showed it (PsychoPy's core clock); a key response's time
is the psychtoolbox keyboard queue's own ``tDown`` on the same clock; a mouse press's time is
PsychoPy's press-event time. Response time = event time - onset.

Redrawing: by default (``[runner] redraw = "on_change"``) a screen is drawn and flipped when it
changes (onset, typing, painting...); in between, the loop takes in input events every half
millisecond without flipping. ``redraw = "every_frame"`` flips on every refresh instead (useful
on a vsync-locked display to watch every frame). Intervals between consecutive flips are kept;
an interval over 1.5 refresh periods (refresh rate measured at start) counts as a dropped frame.
Per trial they go to ``frames/<session>.frames.csv`` below the log folder (see
:data:`FRAMES_HEADER`; always with its header, out of the way of log readers); the
session totals go to the sidecar (``frames``, ``dropped_frames``).

The screen of the next item is built right after the current item's onset (0.1-0.5 s in
software rendering); key times are unaffected (they come from the keyboard queue), a mouse press
during the build is time-stamped when the build ends.

Choice order: with ``[runner] shuffle_choices`` (the default) a select-mode trial draws its
choices in the order :func:`~twofold.experiments.human.prepare.choice_order` gives that trial;
the screen numbers them 1..n as shown, the response logged is the bank's choice number, and the
order shown goes to the log's ``choice_order`` column (bank numbers, space separated).

Every trial row is written and fsynced (TrialLogWriter) before the next item appears; the
sidecar is rewritten atomically after each trial, so a crash loses at most the trial on screen.

Test hook: when the environment variable ``TWOFOLD_RUNNER_PROBE`` names a file, the runner
rewrites it (atomically) after every onset flip with the screen name, the trial index, the onset
on psychtoolbox's GetSecs clock and the click targets in X root-window pixels. The test driver
and the benchmark use it to know what is on screen; sessions never depend on it.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import json
import math
import os
import platform
import sys
import time
from pathlib import Path
from typing import Any

from twofold.study import __version__, get_family
from twofold.study._version import package_version
from twofold.study.exceptions import ResponseError, RunnerError
from twofold.study.scene import MIN_TEXT

from .prepare import SessionPlan, choice_order, paginate, reflow, shown_item
from .screens.widgets import ACCENT, DIM, make_text

__all__ = [
    "FRAMES_HEADER",
    "SessionResult",
    "Step",
    "break_text",
    "frames_file",
    "preview_form",
    "run_session",
    "walk",
]

#: columns of ``<session>.frames.csv``: one row per trial; intervals between consecutive flips
#: (ms, space separated), dropped = intervals over 1.5 refresh periods, prep = time spent
#: building the next item's screen after this onset (the screen stood still meanwhile)
FRAMES_HEADER = "trial,n_intervals,mean_interval_ms,max_interval_ms,dropped,prep_ms,intervals_ms"


def frames_file(csv_path: Path) -> Path:
    """Where a session's frame intervals go: ``<logs>/human/frames/<session>.frames.csv``."""
    return csv_path.parent / "frames" / f"{csv_path.stem}.frames.csv"


class Aborted(Exception):  # noqa: N818 - control flow
    """The respondent or experimenter ended the session with ESC (confirmed)."""


class _Restart(Exception):  # noqa: N818 - control flow
    """ESC was pressed but not confirmed: show the item again with a fresh onset."""


def _now() -> str:
    return _dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat()


class SessionResult:
    """What a session ended with: status, trials written in this run, where the log is."""

    def __init__(self, status: str, n_written: int, csv_path: Path, sidecar: dict[str, Any]):
        self.status, self.n_written, self.csv_path, self.sidecar = (
            status,
            n_written,
            csv_path,
            sidecar,
        )

    def __repr__(self) -> str:
        return f"SessionResult(status={self.status!r}, n_written={self.n_written})"


class _Frames:
    """Flip times of a stretch of frames; dropped = intervals over 1.5 nominal frames."""

    def __init__(self, period: float | None):
        self.period = period
        self.n = 0
        self.prep_ms = 0.0
        self.dropped = 0
        self.max_ms = 0.0
        self.sum_ms = 0.0
        self.intervals: list[float] = []

    def add(self, interval: float) -> None:
        self.n += 1
        ms = interval * 1000
        self.intervals.append(ms)
        self.sum_ms += ms
        self.max_ms = max(self.max_ms, ms)
        if self.period is not None and interval > 1.5 * self.period:
            self.dropped += 1

    def merge(self, other: _Frames) -> None:
        self.n += other.n
        self.dropped += other.dropped
        self.sum_ms += other.sum_ms
        self.max_ms = max(self.max_ms, other.max_ms)

    def stats(self) -> dict[str, Any]:
        return {
            "n_intervals": self.n,
            "mean_interval_ms": round(self.sum_ms / self.n, 3) if self.n else None,
            "max_interval_ms": round(self.max_ms, 3),
            "dropped": self.dropped,
        }


#: how footers name keys
_KEY_NAMES = {"space": "SPACE", "left": "the left arrow", "right": "the right arrow"}


def _stim_box(stim: Any, w: int, h: int) -> list[float]:
    """A TextStim's drawn box in window pixels, origin top left, y down (for the probe)."""
    bw, bh = (float(v) for v in stim.boundingBox)
    x, y = (float(v) for v in stim.pos)
    ah = getattr(stim, "anchorHoriz", "center")
    av = getattr(stim, "anchorVert", "center")
    x0 = x if ah == "left" else x - bw if ah == "right" else x - bw / 2
    y1 = y if av == "top" else y + bh if av == "bottom" else y + bh / 2
    return [
        round(x0 + w / 2, 1),
        round(h / 2 - y1, 1),
        round(x0 + bw + w / 2, 1),
        round(h / 2 - y1 + bh, 1),
    ]


class _Page:
    """One page of a text screen: its text, what to draw, and the drawn boxes (probe)."""

    def __init__(self, text: str, stims: list[Any], boxes: dict[str, Any], number: int, of: int):
        self.text, self.stims, self.boxes, self.number, self.of = text, stims, boxes, number, of
        self.footer, self.letter = "", 0

    def draw(self) -> None:
        for s in self.stims:
            s.draw()


#: px along the window's top edge kept free for the countdown (its text is MIN_TEXT high)
COUNTDOWN_ROOM = 34.0


class _Countdown:
    """The seconds left of a timed trial, small, in the window's top right corner (the screens
    keep :data:`COUNTDOWN_ROOM` along the top edge free for it, ``Ctx.top``), drawn after the
    screen; it changes once a second."""

    def __init__(self, sess: Any):
        w, h = sess.size
        self.size = int(MIN_TEXT)
        self.pos = (w / 2 - 10, h / 2 - 6)
        self.stim = make_text(
            sess.ctx, "", self.pos, height=self.size, color=DIM, anchor="right", valign="top"
        )
        self.w, self.h = w, h
        self.limit, self.shown = 0.0, -1

    def reset(self, limit: float) -> None:
        self.limit = float(limit)
        self._set(math.ceil(self.limit))

    def _set(self, left: int) -> None:
        self.shown = left
        self.stim.text = f"{left} s left"

    def due(self, elapsed: float) -> bool:
        """Whether the seconds shown are out of date (then they are updated)."""
        left = max(0, math.ceil(self.limit - elapsed))
        if left == self.shown:
            return False
        self._set(left)
        return True

    @property
    def box(self) -> list[float]:
        return _stim_box(self.stim, self.w, self.h)

    def over(self, screen: Any) -> Any:
        def paint() -> None:
            screen.draw()
            self.stim.draw()

        return paint


class _Session:
    def __init__(self, plan: SessionPlan):
        self.plan = plan
        self.probe_path = os.environ.get("TWOFOLD_RUNNER_PROBE")
        self.probe_seq = 0
        self.built: dict[tuple[Any, ...], Any] = {}
        self.seen_keys: dict[tuple[str, float], None] = {}

    # -- set-up ----------------------------------------------------------------------------
    def open_window(self, size: tuple[int, int], fullscreen: bool) -> None:
        """Open the window (and the screens' context); no keyboard, mouse or clocks yet."""
        os.environ.setdefault("PSYCHOPYNOPACKAGES", "1")
        try:
            from psychopy import core, event, logging, visual
        except Exception as err:  # no display, missing library...
            raise RunnerError(f"PsychoPy could not start: {err}") from err
        logging.console.setLevel(logging.ERROR)
        self.core, self.event, self.visual = core, event, visual
        opts = self.plan.options
        try:
            self.win = visual.Window(
                size=list(size),
                fullscr=fullscreen,
                units="pix",
                color=opts.background,
                checkTiming=False,
                allowGUI=not fullscreen,
                winType="pyglet",
            )
        except Exception as err:
            raise RunnerError(f"could not open the session window: {err}") from err
        self.size = (int(self.win.size[0]), int(self.win.size[1]))
        from .screens import Ctx

        self.ctx = Ctx(win=self.win, visual=visual, size=self.size, background=opts.background)
        if opts.countdown and any(b.time_limit_s for b in self.plan.form.blocks):
            self.ctx.top = COUNTDOWN_ROOM  # the screens keep the top edge free for it

    def open(self) -> None:
        opts = self.plan.options
        self.open_window(opts.size, opts.fullscreen)
        from psychopy import clock as pclock
        from psychopy.hardware import keyboard

        self.win.mouseVisible = True
        self.kb = keyboard.Keyboard()
        if self.kb.getBackend() != "ptb":
            self.win.close()
            raise RunnerError(
                f"keyboard backend is {self.kb.getBackend()!r}, not 'ptb'; install the "
                "psychtoolbox prerequisites (apt-get install libjack-jackd2-0)."
            )
        self.mouse = self.event.Mouse(win=self.win, visible=True)
        self.origin_abs = pclock.monotonicClock.getLastResetTime()
        rate = self.win.getActualFrameRate(
            nIdentical=10, nMaxFrames=60, nWarmUpFrames=5, threshold=1
        )
        self.refresh_hz = float(rate) if rate else None
        self.period = 1.0 / self.refresh_hz if self.refresh_hz else None
        self.start = self.core.getTime()
        self.every_frame = opts.redraw == "every_frame"
        self.frames = _Frames(self.period)

    # -- input -------------------------------------------------------------------------------
    def keys(self, since: float) -> list[Any]:
        """New key presses since ``since``: released ones and ones still held, by press time."""
        got = list(self.kb.getKeys(waitRelease=True)) + list(self.kb.getKeys(waitRelease=False))
        got.sort(key=lambda k: k.tDown)
        out = []
        for k in got:
            # a key seen while held comes back once more on release: report each press once
            mark = (k.name, round(float(k.tDown), 6))
            if mark in self.seen_keys or k.tDown < since:
                continue
            self.seen_keys[mark] = None
            out.append(k)
        while len(self.seen_keys) > 256:
            del self.seen_keys[next(iter(self.seen_keys))]
        return out

    def probe(self, screen: str, onset: float, **extra: Any) -> None:
        if not self.probe_path:
            return
        import psychtoolbox as ptb

        loc = (0, 0) if self.plan.options.fullscreen else self.win.winHandle.get_location()
        w, h = self.size
        targets = {
            k: [loc[0] + w / 2 + x, loc[1] + h / 2 - y]
            for k, (x, y) in (extra.pop("targets", None) or {}).items()
        }
        self.probe_seq += 1
        data = {
            "seq": self.probe_seq,
            "screen": screen,
            "onset": self.origin_abs + onset,
            "getsecs": ptb.GetSecs(),
            "time": time.time(),
            "targets": targets,
            "pid": os.getpid(),
            "window": [loc[0], loc[1], w, h],
            **extra,
        }
        tmp = f"{self.probe_path}.tmp"
        with open(tmp, "w", encoding="utf-8") as fh:
            json.dump(data, fh)
        os.replace(tmp, self.probe_path)

    def idle(self, draw: Any) -> None:
        """Wait a moment without redrawing (input events are still taken in), or redraw and
        flip when the study asks for a flip on every frame."""
        if self.every_frame and draw is not None:
            draw()
            self.win.flip()
            return
        self.win.backend.dispatchEvents()
        time.sleep(0.0005)

    # -- text screens ----------------------------------------------------------------------------
    def letter_height(self) -> int:
        """Letter height of text screens: 20 px below 1280 wide, 24 below 1920, then 28; never
        under the scene floor (18)."""
        w, h = self.size
        size = 20 if w < 1280 else 24 if w < 1920 else 28
        if h < 720:
            size = min(size, 20)
        return max(int(MIN_TEXT), size)

    def pages(
        self, text: str, accept: str, *, picture: Any = None, wait_note: str = ""
    ) -> list[_Page]:
        """``text`` laid out on pages that fit the window above a fixed footer.

        The footer of the last page says ``accept`` (what the accepting keys do); earlier pages
        say how to turn pages and, with ``wait_note``, that the accepting keys act on the last
        page. ``picture`` (a Scene and its scale, see :meth:`feedback`) is painted under the
        text of a single page.
        """
        w, h = self.size
        size = self.letter_height()
        fsize = max(int(MIN_TEXT), size - 2)
        mx, mt, mb = max(40.0, 0.06 * w), max(28.0, 0.05 * h), max(18.0, 0.03 * h)
        width = w - 2 * mx
        top = h / 2 - mt
        turn = "Press SPACE or the right arrow for the next page; left arrow goes back."
        turn += f" {wait_note}" if wait_note else ""
        foot_w = width - 9 * fsize  # room for "page 2 of 3" on the right
        # the footer's height: two lines at least, or what the longer footer needs
        footer_h = 2.6 * fsize
        for foot in (accept, turn):
            probe = make_text(self.ctx, foot, (0, 0), height=fsize, wrap=foot_w, anchor="left")
            footer_h = max(footer_h, float(probe.boundingBox[1]))
        sep_y = -h / 2 + mb + footer_h + 0.6 * fsize
        body_h = top - sep_y - 0.8 * size
        body = make_text(
            self.ctx, "", (-w / 2 + mx, top), height=size, wrap=width, anchor="left", valign="top"
        )

        def fits(page: str) -> bool:
            body.text = page
            return float(body.boundingBox[1]) <= body_h

        chunks = [reflow(text)] if picture is not None else paginate(text, fits)
        n = len(chunks)
        out = []
        for i, chunk in enumerate(chunks):
            last = i == n - 1
            foot = accept if last else turn
            stims = []
            stim = make_text(
                self.ctx,
                chunk,
                (-w / 2 + mx, top),
                height=size,
                wrap=width,
                anchor="left",
                valign="top",
            )
            stims.append(stim)
            boxes = {"body": _stim_box(stim, w, h)}
            footer = make_text(
                self.ctx,
                foot,
                (-w / 2 + mx, -h / 2 + mb),
                height=fsize,
                color=ACCENT,
                wrap=foot_w,
                anchor="left",
                valign="bottom",
            )
            stims.append(footer)
            boxes["footer"] = _stim_box(footer, w, h)
            stims.append(
                self.visual.Line(
                    self.win,
                    start=(-w / 2 + mx, sep_y),
                    end=(w / 2 - mx, sep_y),
                    lineColor=DIM,
                    lineWidth=1,
                    units="pix",
                )
            )
            if n > 1:
                mark = make_text(
                    self.ctx,
                    f"page {i + 1} of {n}",
                    (w / 2 - mx, -h / 2 + mb),
                    height=fsize,
                    color=DIM,
                    anchor="right",
                    valign="bottom",
                )
                stims.append(mark)
                boxes["page"] = _stim_box(mark, w, h)
            if picture is not None:
                painter = self.picture(picture, stim, sep_y, size)
                if painter is not None:
                    stims.append(painter)
                    x0, y0, x1, y1 = painter.extent()
                    boxes["picture"] = [x0 + w / 2, h / 2 - y1, x1 + w / 2, h / 2 - y0]
            page = _Page(chunk, stims, boxes, i + 1, n)
            page.footer, page.letter = foot, size
            out.append(page)
        return out

    def picture(self, picture: tuple[Any, float], stim: Any, floor_y: float, size: float) -> Any:
        """A ScenePainter for ``picture`` (scene, stimulus scale) in the room between the text
        ``stim`` and ``floor_y``, at the stimulus scale when it fits (else fitted)."""
        from .screens import ScenePainter

        scene, scale = picture
        w, h = self.size
        top = h / 2 - max(28.0, 0.05 * h) - float(stim.boundingBox[1]) - 0.8 * size
        bottom = floor_y + 0.8 * size
        mx = max(40.0, 0.06 * w)
        box = (-w / 2 + mx, bottom, w / 2 - mx, top)
        if top - bottom < MIN_TEXT:
            return None
        fits = scene.width * scale <= box[2] - box[0] and scene.height * scale <= box[3] - box[1]
        return ScenePainter(self.ctx, scene, box, scale=scale if fits else None)

    def text_pages(
        self, text: str, keys: tuple[str, ...], *, accept: str | None = None, picture: Any = None
    ) -> list[_Page]:
        """The pages of a text screen accepting ``keys`` (see :meth:`text_screen`)."""
        names = " / ".join(_KEY_NAMES.get(k, k.upper()) for k in keys)
        accept = accept or f"Press {names} to go on."
        note = "" if keys == ("space",) else f"({names} on the last page.)"
        return self.pages(text, accept, picture=picture, wait_note=note)

    def text_screen(
        self,
        text: str,
        keys: tuple[str, ...],
        name: str,
        *,
        max_s: float | None = None,
        escape: bool = True,
        accept: str | None = None,
        picture: Any = None,
    ) -> str | None:
        """Show ``text`` (paged when it does not fit) until one of ``keys`` is pressed on its
        last page; return that key (None: ``max_s`` passed on the last page).

        SPACE or the right arrow turn to the next page, the left arrow back; the footer says
        ``accept`` (default: the keys) on the last page and, on earlier pages, that the keys
        act on the last page.
        """
        pages = self.text_pages(text, keys, accept=accept, picture=picture)
        i = 0
        while True:
            page = pages[i]
            last = i == len(pages) - 1
            page.draw()
            onset = self.win.flip()
            self.probe(
                name,
                onset,
                text=page.text,
                page=page.number,
                pages=page.of,
                boxes=page.boxes,
                footer=page.footer,
                words=len(page.text.split()),
                letter=page.letter,
            )
            turn = 0
            while not turn:
                for k in self.keys(onset):
                    if k.name == "escape" and escape:
                        self.confirm_abort()
                        turn = 2  # ESC not confirmed: show the page again
                        break
                    if last and k.name in keys:
                        return str(k.name)
                    if not last and k.name in ("space", "right"):
                        i, turn = i + 1, 1
                        break
                    if i > 0 and k.name == "left":
                        i, turn = i - 1, 1
                        break
                else:
                    if last and max_s is not None and self.core.getTime() - onset > max_s:
                        return None
                    self.idle(page.draw)

    def confirm_abort(self) -> None:
        """Ask whether to end the session; raise :class:`Aborted` on yes."""
        key = self.text_screen(
            "End the session now?",
            ("y", "n"),
            "confirm",
            escape=False,
            accept="Y = end the session      N = go on",
        )
        if key == "y":
            raise Aborted()

    # -- one item ----------------------------------------------------------------------------
    def order(self, item: Any, block: Any, trial: int | str) -> tuple[int, ...] | None:
        """The screen order of ``item``'s choices on ``trial`` (bank choice numbers), or None:
        not shuffled (generate mode, no choices, or ``shuffle_choices = false``)."""
        if not self.plan.options.shuffle_choices or block.mode != "select" or not item.choices:
            return None
        return choice_order(
            len(item.choices),
            seed=self.plan.study.seed,
            respondent=self.plan.respondent,
            trial=trial,
            item_id=item.id,
        )

    def screen(self, item: Any, block: Any, order: tuple[int, ...] | None = None) -> Any:
        """The response screen of ``item`` in ``block`` with its choices in screen order
        ``order`` (built ahead when possible); ``screen.choice_order`` keeps the order."""
        from .screens import make_screen

        key = (item.id, block.mode, order)
        if key in self.built:
            return self.built.pop(key)
        shown = shown_item(item, order)  # the family's scene numbers the choices as shown
        screen = make_screen(
            self.ctx, shown, block.mode, state_rule=getattr(block, "state_rule", False)
        )
        screen.choice_order = order
        return screen

    def present(
        self,
        item: Any,
        block: Any,
        *,
        trial: int | None,
        order: tuple[int, ...] | None = None,
        ahead: tuple[Any, Any, Any] | None = None,
    ) -> tuple[Any, float, float | None, str, str | None, _Frames]:
        """Show ``item`` (choices in screen order ``order``) until a response or the block's
        time limit.

        ``ahead`` = (next item, its block, its order): its screen is built right after this
        item's onset, so the next onset follows a response quickly. Returns (response, onset,
        response time, status, detail, frames) on the core clock; a choice is returned as the
        bank's choice number (the screen's number mapped back through ``order``).
        """
        screen = self.screen(item, block, order)
        while True:
            try:
                resp, *rest = self._present(
                    screen,
                    time_limit=block.time_limit_s,
                    trial=trial,
                    block=block.name,
                    ahead=ahead,
                )
            except _Restart:
                ahead = None
                continue
            if order is not None and isinstance(resp, int) and 1 <= resp <= len(order):
                resp = order[resp - 1]
            return (resp, *rest)

    def _present(
        self,
        screen: Any,
        *,
        time_limit: float | None,
        trial: int | None,
        block: str,
        ahead: tuple[Any, Any, Any] | None,
    ) -> tuple[Any, float, float | None, str, str | None, _Frames]:
        frames = _Frames(self.period)
        cd = self.countdown(time_limit)
        paint = screen.draw if cd is None else cd.over(screen)
        paint()
        onset = self.win.flip()
        self.mouse.clickReset()
        reset_core = self.event.mouseClick[0].getLastResetTime() - self.origin_abs
        if ahead is not None and (ahead[0].id, ahead[1].mode, ahead[2]) not in self.built:
            # key times come from the keyboard queue, so building now does not shift them
            t0 = self.core.getTime()
            self.built = {(ahead[0].id, ahead[1].mode, ahead[2]): self.screen(*ahead)}
            frames.prep_ms = (self.core.getTime() - t0) * 1000
            paint()
            last: float | None = self.win.flip()  # static meanwhile: not a frame interval
        else:
            last = onset
        # the probe (tests only) goes out once the loop is ready to take input
        self.probe(
            "trial",
            onset,
            trial=trial,
            block=block,
            item=screen.item.id,
            mode=screen.mode,
            targets=screen.targets,
            choice_order=list(screen.choice_order) if screen.choice_order else None,
            countdown=cd.box if cd is not None else None,
            crossing=self.crossing(screen, cd) if cd is not None and self.probe_path else None,
        )
        answer, press_t, dirty = None, 0.0, False
        while answer is None:
            for k in self.keys(onset):
                if k.name == "escape":
                    self.confirm_abort()
                    raise _Restart()
                answer = screen.key(k.name, float(k.tDown))
                dirty = True
                if answer is not None:
                    break
            if answer is None:
                buttons, times = self.mouse.getPressed(getTime=True)
                # a new press shows as a new press time, even when already released (a short
                # click between two polls would be missed by the button state alone)
                if times[0] and times[0] != press_t:
                    press_t = times[0]
                    answer = screen.press(self.mouse.getPos(), reset_core + times[0])
                    dirty = True
                    if answer is None:  # the screen may have changed (e.g. a resized grid)
                        self.probe(
                            "update",
                            onset,
                            trial=trial,
                            block=block,
                            item=screen.item.id,
                            targets=screen.targets,
                        )
                elif buttons[0]:
                    screen.drag(self.mouse.getPos())
                    dirty = True
            if answer is not None:
                break
            now = self.core.getTime()
            if time_limit and now - onset >= time_limit:
                return None, onset, None, "timeout", None, frames
            if cd is not None and cd.due(now - onset):
                dirty = True  # the seconds left changed: once a second, never flashing
            if dirty or self.every_frame:
                paint()
                t = self.win.flip()
                if last is not None:  # intervals between consecutive flips only
                    frames.add(t - last)
                last, dirty = t, False
            else:
                self.idle(None)
                last = None
        return answer.value, onset, answer.t, "ok", answer.detail, frames

    @staticmethod
    def crossing(screen: Any, cd: _Countdown) -> list[str]:
        """What of ``screen`` the countdown's box overlaps (names from ``Screen.boxes()``)."""
        a = cd.box
        boxes = [(name, x0, y0, x1, y1) for name, x0, y0, x1, y1, _ in screen.boxes()]
        # the box the screen may paint its scene into (not only what this scene filled)
        if getattr(screen, "scene_box", None) is not None:
            x0, y0, x1, y1 = screen.scene_box
            boxes.append(("scene", x0 + cd.w / 2, cd.h / 2 - y1, x1 + cd.w / 2, cd.h / 2 - y0))
        return [
            name
            for name, x0, y0, x1, y1 in boxes
            if a[0] < x1 and x0 < a[2] and a[1] < y1 and y0 < a[3]
        ]

    def countdown(self, time_limit: float | None) -> _Countdown | None:
        """The seconds-left corner of a timed trial (``[runner] countdown``), or None."""
        if not time_limit or not self.plan.options.countdown:
            return None
        if getattr(self, "_countdown", None) is None:
            self._countdown = _Countdown(self)
        self._countdown.reset(time_limit)
        return self._countdown

    # -- the session ---------------------------------------------------------------------------
    def run(self) -> SessionResult:
        from twofold.study.logs import SessionRecord, TrialLogWriter

        plan = self.plan
        study, form = plan.study, plan.form
        writer = TrialLogWriter(plan.csv_path, sidecar=plan.sidecar_path)
        prev = dict(plan.previous)
        interruptions = list(prev.get("interruptions", []))
        first_open = min((k for k, _, _ in plan.trials if k not in plan.done), default=None)
        if plan.resume:
            interruptions.append(
                {
                    "previous_status": prev.get("status"),
                    "resumed": _now(),
                    "next_trial": first_open,
                    "trials_on_disk": len(plan.done),
                }
            )
        record = SessionRecord(
            study=study.name,
            bank_hash=plan.bank.hash,
            session=plan.respondent,
            respondent=plan.respondent,
            kind="human",
            synthetic=False,
            form=form.form_id,
            status="running",
            started=prev.get("started") or _now(),
            ended=None,
            n_trials=len(plan.done),
            interruptions=tuple(interruptions),
            details=dict(
                form_list=form.list,
                form_order=form.order,
                twofold_version=__version__,
                psychopy_version=package_version("psychopy-lib"),
                python_version=sys.version.split()[0],
                platform=platform.platform(),
                n_form_trials=len(plan.trials),
                screen={"size": list(self.size), "fullscreen": plan.options.fullscreen},
                refresh_hz=self.refresh_hz,
                keyboard_backend=self.kb.getBackend(),
                clock={
                    "name": "psychtoolbox GetSecs",
                    "session_origin": self.origin_abs + self.start,
                },
                consent=prev.get("consent", False),
                practice_done=prev.get("practice_done", []),
                frames_file=f"frames/{plan.csv_path.stem}.frames.csv",
            ),
        )
        meta = writer.update_sidecar(**record.to_dict())
        n_done = len(plan.done)
        session_frames = _Frames(self.period)
        # per-trial frame intervals in frames/ below the logs, where no log reader looks
        # (auxiliary: flushed, not fsynced)
        frames_path = frames_file(plan.csv_path)
        frames_path.parent.mkdir(parents=True, exist_ok=True)
        new_frames = not frames_path.exists() or frames_path.stat().st_size == 0
        self.frames_log = open(frames_path, "a", encoding="utf-8")  # noqa: SIM115
        if new_frames:
            self.frames_log.write(FRAMES_HEADER + "\n")
            self.frames_log.flush()
        prior = prev.get("frames") or {}
        try:
            if not meta.get("consent"):
                key = self.text_screen(
                    plan.consent_text, ("y", "n"), "consent", accept=CONSENT_KEYS
                )
                if key != "y":
                    writer.close()
                    self.frames_log.close()
                    plan.csv_path.unlink(missing_ok=True)
                    frames_path.unlink(missing_ok=True)
                    meta = writer.update_sidecar(
                        status="declined", ended=_now(), n_trials=0, consent=False
                    )
                    return SessionResult("declined", 0, plan.csv_path, meta)
                meta = writer.update_sidecar(consent=True)
            practice_done = list(meta.get("practice_done", []))
            for step in walk(form, plan.done, practice_done):
                if step.kind in ("break", "instructions", "end"):
                    self.show_step(step)
                elif step.kind == "practice":
                    self.practice(step.block, step.trial)
                    practice_done.append(step.block.name)
                    writer.update_sidecar(practice_done=practice_done)
                else:
                    row, frames = self.trial(
                        step.block,
                        step.trial,
                        step.item,
                        ahead=self.next_of(step.bi, step.pos, step.trial),
                    )
                    writer.append(row)
                    n_done += 1
                    session_frames.merge(frames)
                    writer.update_sidecar(
                        n_trials=n_done,
                        frames=_combine(prior, session_frames.stats()),
                        dropped_frames=_combine(prior, session_frames.stats())["dropped"],
                    )
            meta = writer.update_sidecar(status="complete", ended=_now(), n_trials=n_done)
            return SessionResult("complete", writer.n_written, plan.csv_path, meta)
        except Aborted:
            meta = writer.update_sidecar(status="aborted", ended=_now(), n_trials=n_done)
            return SessionResult("aborted", writer.n_written, plan.csv_path, meta)
        except BaseException as err:
            writer.update_sidecar(
                status="failed",
                ended=_now(),
                n_trials=n_done,
                failure=f"{type(err).__name__}: {err}",
            )
            raise
        finally:
            writer.close()
            self.frames_log.close()

    def step_text(self, step: Step) -> tuple[str, str]:
        """(text, footer) of a break, instructions or end step."""
        if step.kind == "break":
            return step.text, BREAK_KEYS
        if step.kind == "instructions":
            return self.plan.instructions[step.block.name], BEGIN_KEYS
        return self.plan.options.end_text, END_KEYS

    def show_step(self, step: Step) -> None:
        """A break, instructions or end screen of the form walk."""
        text, accept = self.step_text(step)
        max_s = 30 if step.kind == "end" else None
        self.text_screen(text, ("space",), step.kind, max_s=max_s, accept=accept)

    def next_of(self, bi: int, pos: int, k: int) -> tuple[Any, Any, Any] | None:
        """The item shown after position ``pos`` (trial ``k``) of block ``bi``: the item, its
        block and its choice order."""
        blocks = self.plan.form.blocks
        block = blocks[bi]
        bank = self.plan.bank
        if pos + 1 < len(block.items):
            item = bank[block.items[pos + 1]]
            return item, block, self.order(item, block, k + 1)
        if bi + 1 < len(blocks):
            nb = blocks[bi + 1]
            if nb.practice:
                item = bank[nb.practice[0]]
                return item, nb, self.order(item, nb, _practice_label(nb, 0))
            if nb.items:
                item = bank[nb.items[0]]
                return item, nb, self.order(item, nb, k + 1)
        return None

    def trial(
        self, block: Any, k: int, item_id: str, *, ahead: tuple[Any, Any, Any] | None = None
    ) -> tuple[dict[str, Any], _Frames]:
        plan = self.plan
        item = plan.bank[item_id]
        order = self.order(item, block, k)
        resp, onset, t_resp, status, detail, frames = self.present(
            item, block, trial=k, order=order, ahead=ahead
        )
        correct = error_type = None
        if status == "ok":
            try:
                sc = get_family(item.family).score(item, resp, block.mode)
                correct, error_type = sc.correct, sc.error_type
            except ResponseError as err:
                status, detail = "invalid", str(err)
        st = frames.stats()
        self.frames_log.write(
            f"{k},{st['n_intervals']},{st['mean_interval_ms'] or ''},{st['max_interval_ms']},"
            f"{st['dropped']},{frames.prep_ms:.1f},"
            + " ".join(f"{ms:.2f}" for ms in frames.intervals)
            + "\n"
        )
        self.frames_log.flush()
        row = {
            "study": plan.study.name,
            "bank_hash": plan.bank.hash,
            "respondent": plan.respondent,
            "kind": "human",
            "synthetic": False,
            "session": plan.respondent,
            "form": plan.form.form_id,
            "block": block.name,
            "trial": k,
            "item": item.id,
            "family": item.family,
            "mode": block.mode,
            "response": resp,
            "correct": correct,
            "error_type": error_type,
            "status": status,
            "rt_ms": None if t_resp is None else (t_resp - onset) * 1000.0,
            "onset_s": onset - self.start,
            "response_s": None if t_resp is None else t_resp - self.start,
            "detail": detail,
            "choice_order": " ".join(str(c) for c in order) if order else None,
        }
        return row, frames

    def practice(self, block: Any, first_trial: int | None) -> None:
        """The block's practice items (not logged), with feedback when the block asks for it;
        ``first_trial`` is the index of the block's first test trial (shown next)."""
        bank = self.plan.bank
        labels: list[int | str] = [_practice_label(block, j) for j in range(len(block.practice))]
        items = [bank[p] for p in block.practice]
        if block.items and first_trial is not None:
            items.append(bank[block.items[0]])
            labels.append(first_trial)
        orders = [self.order(it, block, lab) for it, lab in zip(items, labels, strict=True)]
        for j, item in enumerate(items[: len(block.practice)]):
            nxt = (items[j + 1], block, orders[j + 1]) if j + 1 < len(items) else None
            order = orders[j]
            resp, _, _, status, _, _ = self.present(item, block, trial=None, order=order, ahead=nxt)
            if not block.feedback:
                continue
            text, picture = self.feedback(item, block, order, status, resp)
            self.text_screen(text, ("space",), "feedback", accept=FEEDBACK_KEYS, picture=picture)

    def feedback(
        self, item: Any, block: Any, order: tuple[int, ...] | None, status: str, resp: Any
    ) -> tuple[str, tuple[Any, float] | None]:
        """The feedback after a practice item: its text ("Correct." / "Not correct." / time up,
        then where the correct answer is) and the correct answer as the family draws it
        (:meth:`~twofold.study.families.Family.answer_scene`) with the scale the item's
        screen gives its stimulus; the choice number is the one shown on the screen."""
        fam = get_family(item.family)
        if status == "timeout":
            verdict = "timeout"
        else:
            try:
                ok = fam.score(item, resp, block.mode).correct
            except ResponseError:
                ok = False
            verdict = "correct" if ok else "wrong"
        return self.feedback_view(item, block, order, verdict)

    def feedback_view(
        self, item: Any, block: Any, order: tuple[int, ...] | None, verdict: str
    ) -> tuple[str, tuple[Any, float] | None]:
        """Text and picture of a feedback screen for ``verdict`` (correct, wrong, timeout)."""
        fam = get_family(item.family)
        msg = {"timeout": "Time is up for this one.", "correct": "Correct."}.get(
            verdict, "Not correct."
        )
        shown = shown_item(item, order)
        right = fam.correct_response(shown, block.mode)
        if block.mode == "select" and isinstance(right, int) and shown.choices:
            # the number as it stood on this screen, not the bank's
            msg += f" The right choice was number {right}."
            msg += "\n\nThe right choice:"
        else:
            msg += "\n\nThe correct answer:"
        scene = fam.answer_scene(shown, block.mode, right)
        return msg, (scene, self.stimulus_scale(fam.scene(shown, block.mode)))

    def stimulus_scale(self, scene: Any) -> float:
        """Pixels per scene unit of ``scene`` on a trial screen of this window (fitted to the
        window less a margin, at most 1.6 as the screens cap it)."""
        w, h = self.size
        m = 0.03 * min(w, h)
        return min((w - 2 * m) / max(scene.width, 1e-9), (h - 2 * m) / max(scene.height, 1e-9), 1.6)

    def close(self) -> None:
        try:
            self.win.close()
        except Exception:  # noqa: BLE001 - closing must not hide the real outcome
            pass


CONSENT_KEYS = "Y = I agree to take part        N = I do not agree"
BEGIN_KEYS = "Press SPACE to begin."
BREAK_KEYS = "Press SPACE when you are ready to go on."
FEEDBACK_KEYS = "Press SPACE to go on."
END_KEYS = "Press SPACE to close."


class Step:
    """One step of a form as a participant meets it (see :func:`walk`).

    ``kind`` is ``break`` (``text``), ``instructions``, ``practice`` (``trial`` = the
    block's first test trial), ``trial`` (``bi``, ``pos``, ``trial``, ``item``) or ``end``.
    """

    def __init__(
        self,
        kind: str,
        *,
        bi: int = -1,
        block: Any = None,
        pos: int = -1,
        trial: int | None = None,
        item: str = "",
        text: str = "",
    ):
        self.kind, self.bi, self.block, self.pos = kind, bi, block, pos
        self.trial, self.item, self.text = trial, item, text

    def __repr__(self) -> str:
        return (
            f"Step({self.kind!r}, block={getattr(self.block, 'name', None)!r}, trial={self.trial})"
        )


def _plural(n: int, word: str) -> str:
    return f"{n} {word}{'' if n == 1 else 's'}"


def break_text(finished: int, total: int, left_in_block: int, blocks_left: int) -> str:
    """The text of a break screen: how far the participant has come.

    ``left_in_block`` > 0: a break within a block (items left in it, and blocks after it);
    else a break between blocks, with ``blocks_left`` blocks to go.
    """
    head = f"Take a short break.\n\nYou have finished {finished} of {total} items."
    if left_in_block:
        more = f"This part has {_plural(left_in_block, 'more item')}"
        if blocks_left:
            more += f"; {_plural(blocks_left, 'more part')} after it."
        else:
            more += ", and it is the last part."
        return f"{head} {more}"
    return f"{head} {_plural(blocks_left, 'part')} to go."


def walk(form: Any, done: set[int] | frozenset[int], practice_done: list[str]) -> Any:
    """The steps of ``form`` a participant still meets, in order (a generator of :class:`Step`):
    breaks (with progress), each block's instructions, its practice (unless in
    ``practice_done``, read as the walk goes on) and its trials not in ``done``, then the end.
    """
    total = sum(len(b.items) for b in form.blocks)
    finished = len(done)
    starts, k = [], 0
    for b in form.blocks:
        starts.append(k)
        k += len(b.items)
    todo_by_block = [
        [t for t in range(starts[bi], starts[bi] + len(b.items)) if t not in done]
        for bi, b in enumerate(form.blocks)
    ]
    shown = False  # a block was presented in this run
    for bi, block in enumerate(form.blocks):
        todo = todo_by_block[bi]
        if not todo:
            continue
        left = sum(1 for t in todo_by_block[bi:] if t)
        if shown and form.break_between_blocks:
            yield Step("break", bi=bi, block=block, text=break_text(finished, total, 0, left))
        yield Step("instructions", bi=bi, block=block)
        shown = True
        if block.practice and block.name not in practice_done:
            first = starts[bi] if block.items else None
            yield Step("practice", bi=bi, block=block, trial=first)
        for pos, item in enumerate(block.items):
            t = starts[bi] + pos
            if t in done:
                continue
            if form.break_every and pos > 0 and pos % form.break_every == 0 and t != todo[0]:
                in_block = sum(1 for x in todo if x >= t)
                text = break_text(finished, total, in_block, left - 1)
                yield Step("break", bi=bi, block=block, text=text)
            yield Step("trial", bi=bi, block=block, pos=pos, trial=t, item=item)
            finished += 1
    yield Step("end")


def _practice_label(block: Any, j: int) -> str:
    """What a practice item's choice order is drawn for (it has no trial index)."""
    return f"practice:{block.name}:{j}"


def _combine(prior: dict[str, Any], now: dict[str, Any]) -> dict[str, Any]:
    """Frame statistics over this run and the runs before it (resumed sessions)."""
    if not prior or not prior.get("n_intervals"):
        return now
    n = prior["n_intervals"] + now["n_intervals"]
    mean = None
    if n:
        mean = round(
            (
                (prior["mean_interval_ms"] or 0) * prior["n_intervals"]
                + (now["mean_interval_ms"] or 0) * now["n_intervals"]
            )
            / n,
            3,
        )
    return {
        "n_intervals": n,
        "mean_interval_ms": mean,
        "max_interval_ms": max(prior["max_interval_ms"], now["max_interval_ms"]),
        "dropped": prior["dropped"] + now["dropped"],
    }


def run_session(plan: SessionPlan) -> SessionResult:
    """Open the window and run a prepared session (see :func:`prepare_session`).

    Returns
    -------
    SessionResult
        ``status`` is ``complete``, ``aborted`` (ESC, confirmed) or ``declined`` (no consent).

    Raises
    ------
    RunnerError
        PsychoPy cannot start or the keyboard has no psychtoolbox backend; the sidecar is
        marked ``failed`` for errors during the session.
    """
    s = _Session(plan)
    s.open()
    try:
        return s.run()
    finally:
        s.close()


# -- preview: every screen of a form, to PNG, without a participant ------------------------------
class _Preview(_Session):
    """Walks a form's screens like a session (the same layouts and screens) and saves each
    drawn frame instead of waiting for input. Writes no log."""

    def __init__(self, plan: SessionPlan, out: Path, on_step: Any = None):
        super().__init__(plan)
        self.out, self.on_step = out, on_step
        self.rows: list[dict[str, Any]] = []

    def save(self, draw: Any, screen: str, **where: Any) -> None:
        draw()
        img = self.win.getMovieFrame(buffer="back")
        self.win.movieFrames.clear()
        n = len(self.rows) + 1
        parts = [f"{n:04d}", screen]
        if where.get("block"):
            parts.append(str(where["block"]))
        if where.get("pages", 1) > 1:
            parts.append(f"p{where['page']}")
        name = "-".join(parts).replace("/", "_").replace(" ", "_") + ".png"
        img.save(self.out / name)
        self.win.flip()  # show it too (a real display watches the walk), clearing the buffer
        row: dict[str, Any] = {"file": name, "screen": screen, "block": None, "item": None}
        row["trial"] = None
        row.update({"page": 1, "pages": 1, "note": None})
        row.update(where)
        self.rows.append(row)

    def text(self, text: str, keys: tuple[str, ...], screen: str, **kw: Any) -> None:
        picture = kw.pop("picture", None)
        accept = kw.pop("accept", None)
        pages = self.text_pages(text, keys, accept=accept, picture=picture)
        for page in pages:
            self.save(page.draw, screen, page=page.number, pages=page.of, **kw)

    def item_screen(
        self,
        item: Any,
        block: Any,
        order: tuple[int, ...] | None,
        trial: int | None,
        note: str | None,
    ) -> None:
        screen = self.screen(item, block, order)
        cd = self.countdown(block.time_limit_s)
        paint = screen.draw if cd is None else cd.over(screen)
        kind = "trial" if trial is not None else "practice"
        self.save(paint, kind, block=block.name, item=item.id, trial=trial, note=note)

    def walk_form(self) -> list[dict[str, Any]]:
        plan = self.plan
        self.text(plan.consent_text, ("y", "n"), "consent", accept=CONSENT_KEYS)
        for step in walk(plan.form, set(), []):
            if self.on_step is not None:
                self.on_step(step)
            block = step.block
            if step.kind in ("break", "instructions", "end"):
                text, accept = self.step_text(step)
                where = {"block": block.name} if block is not None else {}
                self.text(text, ("space",), step.kind, accept=accept, **where)
            elif step.kind == "practice":
                for j, pid in enumerate(block.practice):
                    item = plan.bank[pid]
                    order = self.order(item, block, _practice_label(block, j))
                    self.item_screen(item, block, order, None, _order_note(order))
                    if block.feedback:
                        text, picture = self.feedback_view(item, block, order, "wrong")
                        self.text(
                            text,
                            ("space",),
                            "feedback",
                            accept=FEEDBACK_KEYS,
                            picture=picture,
                            block=block.name,
                            item=item.id,
                            note="as after an answer that was not correct",
                        )
            else:
                item = plan.bank[step.item]
                order = self.order(item, block, step.trial)
                self.item_screen(item, block, order, step.trial, _order_note(order))
        return self.rows


def _order_note(order: tuple[int, ...] | None) -> str | None:
    return None if order is None else "choice order (bank numbers) " + " ".join(map(str, order))


def preview_steps(form: Any) -> int:
    """How many steps :func:`preview_form` reports through ``on_step`` for ``form``."""
    return sum(1 for _ in walk(form, set(), []))


def preview_form(
    study_file: str | Path,
    out: str | Path,
    *,
    form_id: str | None = None,
    list_no: int | None = None,
    size: tuple[int, int] | None = None,
    respondent: str | None = None,
    on_start: Any = None,
    on_step: Any = None,
) -> dict[str, Any]:
    """Paint every screen a participant of a form sees to numbered PNGs in ``out``.

    Consent pages, each block's instructions, practice items and their feedback (as after an
    answer that was not correct), every trial with its choices in the order ``respondent``
    would see them, breaks and the end screen, through the session's own screen code, in a
    window of ``size`` (default: the study's ``[runner] size``). Writes ``index.json`` (the
    form, respondent, size and one row per PNG: file, screen, block, item, trial, page,
    pages, note) beside them; never writes logs. ``on_start(form, respondent, n_steps)`` and
    ``on_step(step)`` report progress.

    Raises
    ------
    RunnerError
        No display or no PsychoPy (naming what is missing), or the window cannot open.
    SpecError
        A broken study, an unknown form id or list.
    """
    import importlib.util

    from twofold.study import load_study
    from twofold.study.checks import fail
    from twofold.study.exceptions import SpecError
    from twofold.study.forms import assignment, load_forms, parse_blocks

    from .prepare import _read, block_instructions, check_placeholders, parse_runner

    study = load_study(study_file)
    opts = parse_runner(study)
    where = study.file.name
    forms = load_forms(study)
    if form_id is not None:
        chosen = [f for f in forms if f.form_id == form_id]
        accepted = "a form id of the study: " + ", ".join(f.form_id for f in forms[:5])
        if len(forms) > 5:
            accepted += ", ..."
        if not chosen:
            raise fail("--form", form_id, accepted, where=where, error=SpecError)
    elif list_no is not None:
        chosen = [f for f in forms if f.list == list_no]
        if not chosen:
            lists = sorted({f.list for f in forms})
            raise fail("--list", list_no, f"a list number of the forms: {lists}", error=SpecError)
    else:
        chosen = forms[:1]
    form = chosen[0]
    bank = study.bank()
    if form.bank_hash != bank.hash:
        raise RunnerError(
            f"form {form.form_id} was built on bank {form.bank_hash[:12]}, the study's bank is "
            f"{bank.hash[:12]}; rebuild the forms in a new study folder."
        )
    if respondent is None:
        owners = [r for r, f in assignment(study).items() if f == form.form_id]
        respondent = owners[0] if owners else "EXAMPLE"
    own = {}
    for b in parse_blocks(study):
        if b.instructions:
            own[b.name] = _read(study.root / b.instructions, "instructions", where)
            check_placeholders(own[b.name], f"instructions of block {b.name}", where)
    consent = _read(study.root / opts.consent, "runner.consent", where)
    if size is not None:
        opts = dataclasses.replace(opts, size=size, fullscreen=False)
    plan = SessionPlan(
        study=study,
        options=dataclasses.replace(opts, fullscreen=False),
        bank=bank,
        form=form,
        respondent=respondent,
        csv_path=Path(os.devnull),
        sidecar_path=Path(os.devnull),
        resume=False,
        done=set(),
        consent_text=consent,
        instructions=block_instructions(form, bank, opts, own),
        previous={},
    )
    if importlib.util.find_spec("psychopy") is None:
        raise RunnerError(
            "forms preview needs PsychoPy, which is not installed: pip install 'twofold[human]'"
        )
    if sys.platform.startswith("linux") and not (
        os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY")
    ):
        raise RunnerError(
            "forms preview needs a display and DISPLAY is not set: run it on a desktop or "
            "under a virtual display (xvfb-run -a twofold forms preview ...; "
            "apt-get install xvfb)"
        )
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    for old in out.glob("[0-9][0-9][0-9][0-9]-*.png"):
        old.unlink()  # a previous preview's screens: the index below lists only this one's
    if on_start is not None:
        on_start(form, respondent, preview_steps(form))
    p = _Preview(plan, out, on_step)
    p.open_window(plan.options.size, False)
    try:
        rows = p.walk_form()
    finally:
        p.close()
    index = {
        "study": study.name,
        "form": form.form_id,
        "list": form.list,
        "respondent": respondent,
        "size": list(p.size),
        "screens": rows,
    }
    (out / "index.json").write_text(json.dumps(index, indent=1) + "\n", "utf-8")
    return index
