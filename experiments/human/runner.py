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

import datetime as _dt
import json
import os
import platform
import sys
import time
from pathlib import Path
from typing import Any

from twofold.study import __version__, get_family, render
from twofold.study._version import package_version
from twofold.study.exceptions import ResponseError, RunnerError

from .prepare import SessionPlan, choice_order, reflow, shown_item

__all__ = ["FRAMES_HEADER", "SessionResult", "frames_file", "run_session"]

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


class _Session:
    def __init__(self, plan: SessionPlan):
        self.plan = plan
        self.probe_path = os.environ.get("TWOFOLD_RUNNER_PROBE")
        self.probe_seq = 0
        self.built: dict[tuple[Any, ...], Any] = {}
        self.seen_keys: dict[tuple[str, float], None] = {}

    # -- set-up ----------------------------------------------------------------------------
    def open(self) -> None:
        os.environ.setdefault("PSYCHOPYNOPACKAGES", "1")
        try:
            from psychopy import clock as pclock
            from psychopy import core, event, logging, visual
            from psychopy.hardware import keyboard
        except Exception as err:  # no display, missing library...
            raise RunnerError(f"PsychoPy could not start: {err}") from err
        logging.console.setLevel(logging.ERROR)
        self.core, self.event, self.visual = core, event, visual
        opts = self.plan.options
        try:
            self.win = visual.Window(
                size=list(opts.size),
                fullscr=opts.fullscreen,
                units="pix",
                color=opts.background,
                checkTiming=False,
                allowGUI=not opts.fullscreen,
                winType="pyglet",
            )
        except Exception as err:
            raise RunnerError(f"could not open the session window: {err}") from err
        self.win.mouseVisible = True
        self.kb = keyboard.Keyboard()
        if self.kb.getBackend() != "ptb":
            self.win.close()
            raise RunnerError(
                f"keyboard backend is {self.kb.getBackend()!r}, not 'ptb'; install the "
                "psychtoolbox prerequisites (apt-get install libjack-jackd2-0)."
            )
        self.mouse = event.Mouse(win=self.win, visible=True)
        self.origin_abs = pclock.monotonicClock.getLastResetTime()
        self.size = (int(self.win.size[0]), int(self.win.size[1]))
        from .screens import Ctx

        self.ctx = Ctx(win=self.win, visual=visual, size=self.size, background=opts.background)
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

    # -- generic screens -----------------------------------------------------------------------
    def text_screen(
        self,
        text: str,
        keys: tuple[str, ...],
        name: str,
        *,
        max_s: float | None = None,
        escape: bool = True,
    ) -> str | None:
        stim = self.visual.TextStim(
            self.win,
            text=reflow(text),
            height=24,
            color="#e8e4da",
            wrapWidth=self.size[0] * 0.8,
            font="DejaVu Sans",
            units="pix",
        )
        while True:
            stim.draw()
            onset = self.win.flip()
            self.probe(name, onset, text=text[:200])
            while True:
                for k in self.keys(onset):
                    if k.name == "escape" and escape:
                        self.confirm_abort()
                        break
                    if k.name in keys:
                        return str(k.name)
                else:
                    if max_s is not None and self.core.getTime() - onset > max_s:
                        return None
                    self.idle(lambda: stim.draw())
                    continue
                break  # ESC not confirmed: show the screen again

    def confirm_abort(self) -> None:
        """Ask whether to end the session; raise :class:`Aborted` on yes."""
        key = self.text_screen(
            "End the session now?\n\nY = end the session      N = go on",
            ("y", "n"),
            "confirm",
            escape=False,
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
        shown = shown_item(item, order)
        view = render(shown, "structured", block.mode)
        screen = make_screen(
            self.ctx, shown, view, block.mode, state_rule=getattr(block, "state_rule", False)
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
        screen.draw()
        onset = self.win.flip()
        self.mouse.clickReset()
        reset_core = self.event.mouseClick[0].getLastResetTime() - self.origin_abs
        if ahead is not None and (ahead[0].id, ahead[1].mode, ahead[2]) not in self.built:
            # key times come from the keyboard queue, so building now does not shift them
            t0 = self.core.getTime()
            self.built = {(ahead[0].id, ahead[1].mode, ahead[2]): self.screen(*ahead)}
            frames.prep_ms = (self.core.getTime() - t0) * 1000
            screen.draw()
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
            if dirty or self.every_frame:
                screen.draw()
                t = self.win.flip()
                if last is not None:  # intervals between consecutive flips only
                    frames.add(t - last)
                last, dirty = t, False
            else:
                self.idle(None)
                last = None
        return answer.value, onset, answer.t, "ok", answer.detail, frames

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
                key = self.text_screen(plan.consent_text, ("y", "n"), "consent")
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
            trial, shown = 0, False  # shown: a block was presented in this run
            for bi, block in enumerate(form.blocks):
                idx = list(range(trial, trial + len(block.items)))
                trial += len(block.items)
                todo = [k for k in idx if k not in plan.done]
                if not todo:
                    continue
                if shown and form.break_between_blocks:
                    self.text_screen(
                        "Take a short break.\n\nPress SPACE when you are ready to go on.",
                        ("space",),
                        "break",
                    )
                self.text_screen(plan.instructions[block.name], ("space",), "instructions")
                shown = True
                if block.practice and block.name not in practice_done:
                    self.practice(block, idx[0] if idx else None)
                    practice_done.append(block.name)
                    writer.update_sidecar(practice_done=practice_done)
                for pos, k in enumerate(idx):
                    if k in plan.done:
                        continue
                    if (
                        form.break_every
                        and pos > 0
                        and pos % form.break_every == 0
                        and k != todo[0]
                    ):
                        self.text_screen(
                            "Take a short break.\n\nPress SPACE when you are ready to go on.",
                            ("space",),
                            "break",
                        )
                    row, frames = self.trial(
                        block, k, block.items[pos], ahead=self.next_of(bi, pos, k)
                    )
                    writer.append(row)
                    n_done += 1
                    session_frames.merge(frames)
                    writer.update_sidecar(
                        n_trials=n_done,
                        frames=_combine(prior, session_frames.stats()),
                        dropped_frames=_combine(prior, session_frames.stats())["dropped"],
                    )
            self.text_screen(plan.options.end_text, ("space",), "end", max_s=30)
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
            if status == "timeout":
                msg = "Time is up for this one."
            else:
                try:
                    ok = get_family(item.family).score(item, resp, block.mode).correct
                except ResponseError:
                    ok = False
                msg = "Correct." if ok else "Not correct."
            right = item.answer_choice if block.mode == "select" else None
            if right is not None and (status == "timeout" or msg != "Correct."):
                # the number as it stood on this screen, not the bank's
                shown = order.index(right) + 1 if order else right
                msg += f" The right choice was number {shown}."
            self.text_screen(msg + "\n\nPress SPACE to go on.", ("space",), "feedback")

    def close(self) -> None:
        try:
            self.win.close()
        except Exception:  # noqa: BLE001 - closing must not hide the real outcome
            pass


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
