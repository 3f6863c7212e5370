"""strings: generator speed and ``strings-ref`` accuracy by factor level and budget.

Run: ``python bench/strings_solver.py``. Prints figures (items/s with validity checks on, target
1,000/s; solver accuracy and mean effort per factor level at several budgets; literal baseline).
"""

from __future__ import annotations

import time

from twofold.experiments.solvers import make_builtin
from twofold.study import generate_bank, parse_spec
from twofold.study.families import Rejected, get_family
from twofold.study.generate import item_rng
from twofold.study.render import render

FAM = get_family("strings")
LEVELS = {
    "default": {},
    "length=6": {"length": 6},
    "length=8": {"length": 8},
    "grouping=pairs": {"grouping": "pairs"},
    "grouping=mixed": {"grouping": "mixed"},
    "length=8,mixed": {"length": 8, "grouping": "mixed"},
    "wrap": {"wrap": True},
    "direction=down": {"direction": "down"},
    "alphabet=digits": {"alphabet": "digits"},
    "alphabet=glyphs": {"alphabet": "glyphs"},
}
BUDGETS = (5, 20, 50, 100, 400)


def items(params: dict, n: int) -> list:
    out, i = [], 0
    while len(out) < n:
        s, rng = item_rng(5, "bench", str(sorted(params.items())), i)
        i += 1
        try:
            out.append(
                FAM.generate(
                    params, rng, seed=s, modes=["generate"], distractor_scheme=None, n_choices=4
                )
            )
        except Rejected:
            continue
    return out


def accuracy(solver, its) -> tuple[float, float]:
    hits = effort = 0.0
    for it in its:
        ans = solver.solve(render(it, "structured", "generate"), "generate")
        hits += FAM.score(it, ans.answer, "generate").correct
        effort += ans.effort or 0
    return hits / len(its), effort / len(its)


def main() -> None:
    for modes in (["generate"], ["generate", "select"]):
        spec = parse_spec({"seed": 1, "families": {"strings": {"n": 2000, "modes": modes}}})
        t0, c0 = time.perf_counter(), time.process_time()
        bank = generate_bank(spec)
        rate = 2000 / (time.perf_counter() - t0)
        cpu_rate = 2000 / (time.process_time() - c0)
        rej = sum(bank.meta["generation"]["strings"]["rejections"].values())
        print(
            f"generator, modes={'+'.join(modes)}: {rate:.0f} items/s wall, {cpu_rate:.0f} per "
            f"CPU second (target 1000); {rej} rejections (mostly duplicates at default levels)"
        )
    print(f"\n{'level':<18}" + "".join(f"{'b=' + str(b):>12}" for b in BUDGETS) + f"{'literal':>9}")
    for name, params in LEVELS.items():
        its = items(params, 100)
        row = [accuracy(make_builtin("strings-ref", budget=b), its) for b in BUDGETS]
        lit, _ = accuracy(make_builtin("literal"), its)
        cells = "".join(f"{a:>6.2f} ({e:>3.0f})" for a, e in row)
        print(f"{name:<18}{cells}{lit:>9.2f}")
    print("\ncells: accuracy (mean effort in programs) over 100 items per level")


if __name__ == "__main__":
    main()
