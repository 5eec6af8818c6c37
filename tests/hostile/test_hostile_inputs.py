"""Every file of the hostile-input corpus beside this test: configs, station-inputs files,
videos, models and raw HTTP requests. Each gives its documented exit code (or HTTP status) and
one line, never a traceback; nothing a request sends changes the config on disk.

Exit codes are the CLI's documented ones (``stationcheck/cli.py``): 1 findings, 2 config
error, 3 unreadable input file, 4 model error. Request statuses are RFC 9110's (400 bad
request, 403 refused, 413 content too large, 415 unsupported media type, 421 misdirected
request) and RFC 6585's 431 (request header fields too large).
"""

from __future__ import annotations

import json
import shutil
import socket
import subprocess
import sys
from collections.abc import Iterator
from pathlib import Path

import pytest

from stationcheck.cli import main
from stationcheck.web.access import AccessRule
from stationcheck.web.listener import WebServer
from stationcheck.web.setup import SetupSession, Workspace, build_router

CORPUS = Path(__file__).parent
REPO = CORPUS.parents[1]
VIDEO = REPO / "sample_video" / "demo_station.mp4"
INPUTS = REPO / "sample_video" / "demo_station_inputs.jsonl"
CONFIG = REPO / "configs" / "demo_station.yaml"

# file -> (exit code, a fragment of the one line it must print)
EXPECTED: dict[str, tuple[int, str]] = {
    "configs/alias_bomb.yaml": (2, "alias bomb"),
    "configs/recursive_alias.yaml": (2, "alias refers to the mapping or list it is in"),
    "configs/deep_nesting.yaml": (2, "nested deeper than 40 levels"),
    "configs/set_tag.yaml": (2, "the tag !!set is not taken"),
    "configs/python_tag.yaml": (2, "the tag !!python/object/apply:os.system is not taken"),
    "configs/not_utf8.yaml": (2, "is not a text file"),
    "configs/top_level_list.yaml": (2, "the top level must be a mapping"),
    "configs/empty.yaml": (2, "the file is empty"),
    "configs/two_documents.yaml": (2, "remove the '---' line"),
    "configs/unclosed.yaml": (2, "not valid YAML"),
    "configs/tabs.yaml": (2, "indent with spaces"),
    "configs/inf_coordinates.yaml": (1, "expected a finite number, got the number inf"),
    "configs/huge_coordinates.yaml": (1, "not a pixel position"),
    "configs/control_characters.yaml": (0, "OK, no errors"),
    "inputs/deep_nesting.jsonl": (3, "nested deeper than 32 levels"),
    "inputs/long_line.jsonl": (3, "a line longer than 65536 characters"),
    "inputs/not_json.jsonl": (3, "not valid JSON"),
    "inputs/array_line.jsonl": (3, "expected a JSON object"),
    "inputs/not_utf8.jsonl": (3, "cannot read station inputs"),
    "inputs/unknown_kind.jsonl": (3, "kind must be one of"),
    "inputs/nan_time.jsonl": (3, "must be a finite number"),
    "videos/text.mp4": (3, "not a video file OpenCV can open"),
    "videos/empty.mp4": (3, "not a video file OpenCV can open"),
    "videos/truncated.mp4": (3, "not a video file OpenCV can open"),
    "models/text.onnx": (4, "not a readable ONNX model"),
    "models/empty.onnx": (4, "not a readable ONNX model"),
}
FILES = sorted(str(p.relative_to(CORPUS)) for p in CORPUS.glob("*/*")
               if p.suffix != ".py" and p.parent.name != "http")
REQUESTS = sorted(p.name for p in (CORPUS / "http").glob("*.http"))


def argv_for(case: str) -> list[str]:
    path = str(CORPUS / case)
    kind = case.split("/")[0]
    if kind == "configs":
        return ["check", "--expand", path] if "control" in case else ["check", path]
    if kind == "inputs":
        return ["replay", str(VIDEO), "--config", str(CONFIG), "--inputs", path, "--frames", "3"]
    if kind == "videos":
        return ["replay", path, "--config", str(CONFIG), "--inputs", str(INPUTS)]
    return ["replay", str(VIDEO), "--config", str(CONFIG), "--inputs", str(INPUTS),
            "--model", path, "--frames", "3"]


@pytest.fixture(scope="module")
def setup_screen(tmp_path_factory: pytest.TempPathFactory) -> Iterator[tuple[WebServer, Path]]:
    root = tmp_path_factory.mktemp("hostile-setup")
    shutil.copy(CONFIG, root / "station.yaml")
    session = SetupSession.open(Workspace(root), root / "station.yaml")
    server = WebServer(build_router(session), "127.0.0.1", 0, AccessRule(None)).start()
    yield server, root / "station.yaml"
    server.close()


def send_raw(server: WebServer, raw: bytes) -> bytes:
    host, port = server.server_address[:2]
    with socket.create_connection((str(host), int(port)), timeout=10) as conn:
        try:
            conn.sendall(raw)
        except OSError:
            pass  # refused before the body was read: the answer is already on its way
        answer = b""
        try:
            while chunk := conn.recv(65536):
                answer += chunk
        except ConnectionResetError:
            pass
    return answer


def test_every_corpus_file_has_an_expectation() -> None:
    assert sorted(EXPECTED) == FILES


@pytest.mark.parametrize("case", FILES + [f"http/{name}" for name in REQUESTS])
def test_hostile_input(case: str, capsys: pytest.CaptureFixture[str],
                       setup_screen: tuple[WebServer, Path]) -> None:
    if case.startswith("http/"):
        server, config = setup_screen
        before = config.read_bytes()
        text = (CORPUS / case).read_bytes().decode("latin-1")
        first, raw = text.split("\n", 1)
        expected = int(first.removeprefix("# expect "))
        port = server.server_address[1]
        answer = send_raw(server, raw.replace("{host}", f"127.0.0.1:{port}").encode("latin-1"))
        status_line, _, rest = answer.partition(b"\r\n")
        assert status_line.split(b" ")[1] == str(expected).encode(), answer[:300]
        body = rest.partition(b"\r\n\r\n")[2]
        if body.startswith(b"{"):
            message = json.loads(body)["error"]
            assert "\n" not in message and "Traceback" not in message
        assert b"Traceback" not in answer
        assert config.read_bytes() == before
        return
    code, fragment = EXPECTED[case]
    assert main(argv_for(case)) == code
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    assert fragment in (err if code >= 2 else out)
    if code >= 2:
        assert len(err.strip().splitlines()) == 1, err
    assert "\x1b" not in out + err and "\u202e" not in out + err


def test_alias_bomb_is_refused_quickly_and_small() -> None:
    """The bomb in a fresh process: wall time of the check and how far it raised the
    process's peak memory (``ru_maxrss``) above what the imports took."""
    script = (
        "import resource, sys, time\n"
        "from stationcheck.cli import main\n"
        "import stationcheck.commands.check, stationcheck.config.config_check\n"
        "before_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024\n"
        "start = time.perf_counter()\n"
        f"code = main(['check', {str(CORPUS / 'configs' / 'alias_bomb.yaml')!r}])\n"
        "took_s = time.perf_counter() - start\n"
        "peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024 - before_mb\n"
        "print(code, took_s, peak_mb, file=sys.stdout)\n"
    )
    done = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True,
                          timeout=60, check=False)
    code, took_s, peak_mb = done.stdout.split()
    assert int(code) == 2
    assert float(took_s) < 1.0  # the bomb expanded takes minutes and gigabytes
    assert float(peak_mb) < 100.0
    assert "alias bomb" in done.stderr and "Traceback" not in done.stderr
