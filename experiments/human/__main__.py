"""``python -m twofold.experiments.human STUDY --respondent ID [--resume]``: one session.

The same as ``twofold run human``; tests and the benchmark run sessions this way in a separate
process. ``--import MODULE`` (repeatable) imports a module first, e.g. a lab's own family.
Exit codes: 0 complete, 3 aborted, 4 declined, 2 an error (one line on stderr).
"""

from __future__ import annotations

import argparse
import importlib
import sys

EXIT = {"complete": 0, "aborted": 3, "declined": 4}


def main(argv: list[str] | None = None) -> int:
    from twofold.study.exceptions import TwofoldError

    from . import BANNER, prepare_session, run_session

    ap = argparse.ArgumentParser(prog="python -m twofold.experiments.human")
    ap.add_argument("study")
    ap.add_argument("--respondent", required=True)
    ap.add_argument("--resume", action="store_true")
    ap.add_argument("--import", dest="imports", action="append", default=[])
    args = ap.parse_args(argv)
    for mod in args.imports:
        importlib.import_module(mod)
    try:
        plan = prepare_session(args.study, args.respondent, resume=args.resume)
        print(BANNER, file=sys.stderr, flush=True)
        result = run_session(plan)
    except TwofoldError as err:
        print(f"error: {err}", file=sys.stderr)
        return 2
    print(
        f"session {result.status}: {result.n_written} trials written to {result.csv_path}",
        file=sys.stderr,
    )
    return EXIT[result.status]


if __name__ == "__main__":
    sys.exit(main())
