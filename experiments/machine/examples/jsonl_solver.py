#!/usr/bin/env python3
"""An example outside solver speaking twofold-jsonl v1 -- plain Python, no twofold import.

Run by the machine runner as::

    twofold run machine study.toml --solver "command:python3 jsonl_solver.py"

It is a deliberately naive solver, written to show the protocol, not to be good:

* select mode: picks the choice that agrees most, attribute by attribute, with the other choices
  (the context-blind "odd one in" guess);
* generate mode: if the structured view carries a "target" (as symbol-string analogies do), it
  answers the target unchanged; otherwise it sends free text saying it has no idea, which the
  runner logs as an invalid answer.

Write anything you like to stderr for debugging; stdout carries protocol lines only.
"""

import json
import sys
from collections import Counter

PROTOCOL, VERSION = "twofold-jsonl", 1


def flatten(value, prefix=""):
    if isinstance(value, dict):
        out = {}
        for k in sorted(value):
            out.update(flatten(value[k], f"{prefix}.{k}"))
        return out
    if isinstance(value, list):
        out = {}
        for i, v in enumerate(value):
            out.update(flatten(v, f"{prefix}.{i}"))
        return out
    return {prefix: json.dumps(value, sort_keys=True)}


def pick_choice(choices):
    flat = [flatten(c) for c in choices]
    paths = set().union(*flat)
    majority = {p: Counter(f[p] for f in flat if p in f).most_common(1)[0][0] for p in paths}
    scores = [sum(f.get(p) == majority[p] for p in paths) for f in flat]
    return scores.index(max(scores)) + 1, len(paths)


def solve(request):
    view, mode = request.get("view"), request.get("mode")
    if mode == "select" and isinstance(view, dict) and view.get("choices"):
        k, n_paths = pick_choice(view["choices"])
        return {
            "answer": k,
            "effort": n_paths,
            "effort_unit": "attributes",
            "explanation": "choice closest to the attribute-wise majority",
        }
    if isinstance(view, dict) and "target" in view:
        return {
            "answer": view["target"],
            "effort": 1,
            "effort_unit": "guesses",
            "explanation": "answered the target unchanged",
        }
    return {"text": "I have no idea.", "effort": 0, "effort_unit": "guesses"}


def main():
    for line in sys.stdin:
        if not line.strip():
            continue
        msg = json.loads(line)
        if msg.get("type") == "hello":
            reply = {
                "protocol": PROTOCOL,
                "version": VERSION,
                "type": "hello",
                "medium": "structured",
                "name": "naive example",
            }
        elif msg.get("type") == "solve":
            try:
                reply = {"version": VERSION, "id": msg["id"], **solve(msg)}
            except Exception as err:  # report, never die on one request
                reply = {"version": VERSION, "id": msg.get("id"), "error": repr(err)}
        else:
            print(f"unknown message type {msg.get('type')!r}", file=sys.stderr)
            continue
        sys.stdout.write(json.dumps(reply) + "\n")
        sys.stdout.flush()


if __name__ == "__main__":
    main()
