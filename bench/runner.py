"""Participant-runner benchmark (under an X display; starts Xvfb when $DISPLAY is unset).

Prints:
1. draw + flip time per frame of the heaviest screen: the grid editor for a 15x15 test grid
   with four demonstration pairs (target < 8 ms), and the time to build that screen;
2. logged-vs-injected RT error over N key presses injected through XTEST into a real session
   (target: median <= 2 ms, max <= 16.7 ms), method as in tests/test_runner_timing.py;
3. submit-to-next-onset: from a response's event time to the next item's onset flip, which
   includes scoring, the fsynced log row and the sidecar rewrite (target < 50 ms);
4. the session process's peak memory (VmHWM).

Usage: python bench/runner.py [--responses 200]
Under Xvfb there is no vsync: frame times are pure drawing cost, not a refresh rate.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO / "tests"))

from _display import (  # noqa: E402
    MATRICES_ONLY,
    Driver,
    make_runner_study,
    start_display,
    timed_keys,
)

HEAVY = """
import sys, time, json
import numpy as np
from psychopy import visual, logging
logging.console.setLevel(logging.ERROR)
from twofold.study import generate_bank, parse_spec, render
from twofold.experiments.human.screens import Ctx, make_screen
spec = {"seed": 2, "families": {"grids": {"n": 12, "modes": ["generate"],
        "params": {"size": 12, "demos": 4}}}}
# the item with the largest probe (the size cap is 12 on a side)
item = max(generate_bank(parse_spec(spec)),
           key=lambda it: len(it.stimulus["probe"]) * len(it.stimulus["probe"][0]))
W, H = int(sys.argv[1]), int(sys.argv[2])
win = visual.Window(size=[W, H], units="pix", color="#20242b", checkTiming=False)
ctx = Ctx(win=win, visual=visual, size=(W, H), background="#20242b")
t0 = time.perf_counter()
screen = make_screen(ctx, item, "generate")
build = time.perf_counter() - t0
screen.press(screen.targets["copy"], 0.0)  # the probe copied into the editor
R, C = len(item.stimulus["probe"]), len(item.stimulus["probe"][0])
for _ in range(20):
    screen.draw(); win.flip()
times = []
for k in range(300):
    t0 = time.perf_counter()
    if k % 10 == 0:  # paint a cell now and then, as a respondent would
        screen.press(screen.targets[f"cell:{(k // 10) % R},{(k // 10) % C}"], 0.0)
    screen.draw()
    win.flip()
    times.append(time.perf_counter() - t0)
print(json.dumps({"build_ms": build * 1000, "frame_ms": [t * 1000 for t in times],
                  "test": [len(item.stimulus["probe"]), len(item.stimulus["probe"][0])],
                  "demos": len(item.stimulus["examples"])}))
win.close()
"""


def heavy_screen(display: str, home: Path, size: tuple[int, int]) -> dict:
    import json

    env = dict(
        os.environ,
        DISPLAY=display,
        HOME=str(home),
        MPLCONFIGDIR=str(home / "mpl"),
        PSYCHOPYNOPACKAGES="1",
    )
    out = subprocess.run(
        [sys.executable, "-c", HEAVY, *map(str, size)],
        env=env,
        capture_output=True,
        text=True,
        check=True,
    )
    return json.loads(out.stdout.strip().splitlines()[-1])


def peak_rss_mb(pid: int) -> float:
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("VmHWM:"):
            return int(line.split()[1]) / 1024
    return float("nan")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--responses", type=int, default=200)
    args = ap.parse_args()
    from twofold.study import load_study, read_trials

    display = start_display()
    tmp = Path(tempfile.mkdtemp(prefix="twofold-bench-runner-"))
    load = os.getloadavg()[0]
    print(f"load average at start: {load:.1f} on {os.cpu_count()} cores")

    for size in ((1280, 1024), (1024, 768)):
        h = heavy_screen(display, tmp / "home", size)
        f = np.array(h["frame_ms"])
        print(
            f"heaviest screen (grid editor, test {h['test'][0]}x{h['test'][1]}, "
            f"{h['demos']} demonstrations, {size[0]}x{size[1]} window): draw+flip per frame "
            f"median {np.median(f):.2f} ms, p95 {np.percentile(f, 95):.2f} ms, max "
            f"{f.max():.2f} ms (target < 8 ms); screen built in {h['build_ms']:.0f} ms"
        )

    n = args.responses
    st = load_study(make_runner_study(tmp / "study", MATRICES_ONLY.format(n=n + 1), n_forms=1))
    bank = st.bank()
    d = Driver(display, st.file, "P001", tmp)
    t0 = time.monotonic()
    expected = dict(timed_keys(d, bank, n, seed=1))
    rss = peak_rss_mb(d.proc.pid)
    time.sleep(0.5)  # let the last row reach the disk
    d.kill()
    elapsed = time.monotonic() - t0
    df = read_trials(st.logs_dir / "human" / "P001.csv")
    df = df[df["trial"].isin(list(expected))]
    err = np.array([r.rt_ms - expected[r.trial] for r in df.itertuples()])
    a = np.abs(err)
    print(
        f"RT error over {len(err)} injected key presses (logged - injected): median "
        f"{np.median(err):+.2f} ms, median |error| {np.median(a):.2f} ms, p95 |error| "
        f"{np.percentile(a, 95):.2f} ms, max |error| {a.max():.2f} ms "
        f"(targets: median <= 2 ms, max <= 16.7 ms)"
    )
    gap = (df["onset_s"].to_numpy()[1:] - df["response_s"].to_numpy()[:-1]) * 1000
    print(
        f"submit to next onset (score, fsynced row, sidecar, draw, flip) over {len(gap)} "
        f"trials: median {np.median(gap):.1f} ms, p95 {np.percentile(gap, 95):.1f} ms, "
        f"max {gap.max():.1f} ms (target < 50 ms)"
    )
    print(f"session process peak memory (VmHWM): {rss:.0f} MB; {n} trials in {elapsed:.0f} s")


if __name__ == "__main__":
    main()
