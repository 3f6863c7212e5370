"""The HTTP chat adapter's picture view (image parts), prompt template and its hash in sidecars.

A fake chat endpoint on 127.0.0.1 records every request body and answers "Answer: 1".
"""

from __future__ import annotations

import base64
import hashlib
import io
import json
import threading
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path

import pytest
from PIL import Image
from twofold.experiments.cli import main
from twofold.experiments.machine import run_solvers, study_solvers
from twofold.experiments.machine.chat import DEFAULT_PICTURE_USER
from twofold.study import load_study, read_trials
from twofold.study.render import render, scene_of

STUDY = """[study]
name = "http-images"
seed = 3
[bank]
path = "bank"
[bank.spec]
seed = 17
[bank.spec.families.strings]
n = 2
modes = ["generate", "select"]
[bank.spec.families.matrices]
n = 2
modes = ["select"]
"""

SOLVER = """
[[solvers]]
name = "{name}"
spec = "http:{url}"
{medium}
[solvers.options]
model = "vision-model-7"
retries = 0
concurrency = 2
"""

PNG_URL = "data:image/png;base64,"


class Endpoint:
    """A chat-style endpoint on 127.0.0.1 that records request bodies and answers "Answer: 1"."""

    def __init__(self) -> None:
        self.bodies: list[dict] = []
        lock = threading.Lock()
        bodies = self.bodies

        class Handler(BaseHTTPRequestHandler):
            protocol_version = "HTTP/1.1"

            def log_message(self, *args):
                pass

            def do_GET(self):  # noqa: N802 - the adapter's start-up probe
                self._send(405, b"use POST")

            def do_POST(self):  # noqa: N802
                body = json.loads(self.rfile.read(int(self.headers["Content-Length"])))
                with lock:
                    bodies.append(body)
                reply = {
                    "choices": [{"message": {"role": "assistant", "content": "Answer: 1"}}],
                    "usage": {"completion_tokens": 3},
                }
                self._send(200, json.dumps(reply).encode())

            def _send(self, code, data):
                self.send_response(code)
                self.send_header("Content-Type", "application/json")
                self.send_header("Content-Length", str(len(data)))
                self.end_headers()
                self.wfile.write(data)

        class Server(ThreadingHTTPServer):
            daemon_threads = True

        self.httpd = Server(("127.0.0.1", 0), Handler)
        self.url = f"http://127.0.0.1:{self.httpd.server_address[1]}/v1/chat/completions"
        self.thread = threading.Thread(target=self.httpd.serve_forever, daemon=True)

    def __enter__(self) -> Endpoint:
        self.thread.start()
        return self

    def __exit__(self, *exc) -> None:
        self.httpd.shutdown()
        self.httpd.server_close()
        self.thread.join(timeout=10)


def _study(root: Path, extra: str = "") -> Path:
    root.mkdir(parents=True, exist_ok=True)
    (root / "study.toml").write_text(STUDY + extra, "utf-8")
    return root


def _sha256_of_template(system: str | None, user: str) -> str:
    # the documented definition, written out here: SHA-256 of the sorted, compact JSON object
    text = json.dumps({"system": system, "user": user}, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def test_picture_view_arrives_as_a_png_data_url_of_the_items_picture(tmp_path):
    with Endpoint() as ep:
        folder = _study(
            tmp_path / "s", SOLVER.format(name="vlm", url=ep.url, medium='medium = "picture"')
        )
        study = load_study(folder)
        table = run_solvers(study, study_solvers(study))
        bodies = list(ep.bodies)
    bank = study.bank(create=False)
    planned = [(it, m) for it in bank for m in it.modes]
    pictures = {render(it, "picture", m): (it.id, m) for it, m in planned}
    assert len(pictures) == len(planned)  # every trial's picture differs from the others
    assert len(bodies) == len(planned) and table.loc[0, "n_failed"] == 0
    seen = []
    for body in bodies:
        assert body["model"] == "vision-model-7"
        (user,) = [m for m in body["messages"] if m["role"] == "user"]
        parts = user["content"]
        assert isinstance(parts, list)
        images = [p for p in parts if p["type"] == "image_url"]
        texts = [p for p in parts if p["type"] == "text"]
        assert len(images) == 1 and texts and all(p["text"].strip() for p in texts)
        url = images[0]["image_url"]["url"]
        assert url.startswith(PNG_URL)
        data = base64.b64decode(url[len(PNG_URL) :], validate=True)
        assert data[:8] == b"\x89PNG\r\n\x1a\n"
        with Image.open(io.BytesIO(data)) as img:
            img.verify()
        with Image.open(io.BytesIO(data)) as img:
            size = img.size
        assert data in pictures, "the image is one of the bank's item pictures"
        item_id, mode = pictures[data]
        scene = scene_of(bank[item_id], mode)
        assert max(size) == 800  # the longer side, at the scene's own aspect
        assert size[0] / size[1] == pytest.approx(scene.width / scene.height, abs=0.01)
        assert f"{mode} mode" in " ".join(p["text"] for p in texts)  # {mode} filled in
        seen.append((item_id, mode))
    assert sorted(seen) == sorted((it.id, m) for it, m in planned)  # each trial once
    df = read_trials(folder / "logs" / "machine" / "vlm-s0.csv")
    select = df[df["mode"] == "select"]
    assert (select["status"] == "ok").all() and (select["response"].astype(str) == "1").all()
    side = json.loads((folder / "logs" / "machine" / "vlm-s0.json").read_text("utf-8"))
    assert side["medium"] == "picture"
    assert side["prompt_sha256"] == _sha256_of_template(None, DEFAULT_PICTURE_USER)


def test_study_prompt_template_is_sent_and_its_hash_logged(tmp_path):
    system = "You solve puzzles for a study. Mode: {mode}."
    user = 'Puzzle follows.\n---\n{view}\n---\nEnd with a line "Answer: <answer>". {"json": 1}'
    head, tail = user.split("{view}")
    prompt = f"\n[machine.prompt]\nsystem = {json.dumps(system)}\nuser = {json.dumps(user)}\n"
    with Endpoint() as ep:
        folder = _study(tmp_path / "s", SOLVER.format(name="chat", url=ep.url, medium="") + prompt)
        study = load_study(folder)
        first = run_solvers(study, study_solvers(study))
        bodies = list(ep.bodies)
        # a changed template is a new solver identity: every trial runs again, with a new hash
        toml = folder / "study.toml"
        toml.write_text(toml.read_text("utf-8").replace("Puzzle follows.", "Here it is."), "utf-8")
        study = load_study(folder)
        second = run_solvers(study, study_solvers(study))
        later = ep.bodies[len(bodies) :]
    bank = study.bank(create=False)
    texts = {render(it, "text", m): m for it in bank for m in it.modes}
    assert len(bodies) == len(texts) == len(later)
    for body in bodies:
        sys_msg, user_msg = body["messages"]
        assert sys_msg["role"] == "system" and user_msg["role"] == "user"
        content = user_msg["content"]
        assert isinstance(content, str) and content.startswith(head) and content.endswith(tail)
        view = content[len(head) : -len(tail)]
        assert view in texts, "the item's text view sits where {view} was"
        assert sys_msg["content"] == f"You solve puzzles for a study. Mode: {texts[view]}."
    assert all(b["messages"][1]["content"].startswith("Here it is.") for b in later)
    assert first.loc[0, "n_run"] == len(texts)
    assert second.loc[0, "n_cached"] == 0 and second.loc[0, "n_run"] == len(texts)
    side = json.loads((folder / "logs" / "machine" / "chat-s0.json").read_text("utf-8"))
    new_user = user.replace("Puzzle follows.", "Here it is.")
    assert side["prompt_sha256"] == _sha256_of_template(system, new_user)
    assert side["prompt_sha256"] != _sha256_of_template(system, user)
    assert side["medium"] == "text"
    assert side["solver_config"]["options"]["user"] == new_user  # the template, on record


def test_without_a_template_the_user_message_is_the_text_view(tmp_path):
    with Endpoint() as ep:
        folder = _study(tmp_path / "s", SOLVER.format(name="plain", url=ep.url, medium=""))
        study = load_study(folder)
        run_solvers(study, study_solvers(study))
        bodies = list(ep.bodies)
    bank = study.bank(create=False)
    texts = sorted(render(it, "text", m) for it in bank for m in it.modes)
    assert sorted(b["messages"][-1]["content"] for b in bodies) == texts
    assert all(len(b["messages"]) == 1 and b["model"] == "vision-model-7" for b in bodies)
    side = json.loads((folder / "logs" / "machine" / "plain-s0.json").read_text("utf-8"))
    assert side["prompt_sha256"] == _sha256_of_template(None, "{view}")


@pytest.mark.parametrize(
    ("extra", "options", "message"),
    [
        (
            '[machine.prompt]\nuser = "no placeholder here"\n',
            [],
            "error: study.toml: field 'machine.prompt.user': got 'no placeholder here'; "
            "accepted: text holding {view} exactly once, where the item's view goes.",
        ),
        (
            '[machine.prompt]\nsystem = "see {view}"\nuser = "{view}"\n',
            [],
            "error: study.toml: field 'machine.prompt.system': got 'see {view}'; "
            "accepted: text without {view} (the view goes in the user text).",
        ),
        (
            "",
            ["--option", "medium=structured"],
            "error: solver 'x': field 'medium': got 'structured'; accepted: text or picture (the "
            "chat adapter sends the text view, or the picture as an image part).",
        ),
        (
            "",
            ["--option", "model="],
            "error: solver 'x': field 'options.model': got ''; accepted: the model name the "
            'endpoint expects (model = "..." in [solvers.options], or --option model=NAME).',
        ),
        (
            "",
            ["--option", "user={view} and {view}"],
            "error: solver 'x': field 'options.user': got '{view} and {view}'; accepted: text "
            "holding {view} exactly once, where the item's view goes.",
        ),
    ],
)
def test_bad_template_or_options_stop_before_the_first_trial(
    tmp_path, capsys, extra, options, message
):
    with Endpoint() as ep:
        folder = _study(tmp_path / "s", extra)
        code = main(
            ["run", "machine", str(folder / "study.toml"), "--solver", f"http:{ep.url}"]
            + ["--name", "x", "--option", "model=m1", *options]
        )
        n_requests = len(ep.bodies)
    err = " ".join(capsys.readouterr().err.split())
    assert code == 2
    assert err == message
    assert n_requests == 0
    assert not (folder / "logs").exists() and not (folder / "cache").exists()
