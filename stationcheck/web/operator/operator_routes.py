"""The operator screen's web routes.

``/``                  the page (``static/operator/``)
``/api/stream``        server-sent events: ``state`` when what the page says changed, ``tick``
                       with every rendered frame (frame number, time), comments to keep alive
``/api/video.mjpg``    the camera image with the zones drawn, as multipart JPEG (MJPEG)
``/api/frame.jpg``     the newest picture once
``/api/state``         the newest state as JSON (for scripts and checks)
``POST /api/ack``      an acknowledge press ``{"serial": ..., "step": ...}``
"""

from __future__ import annotations

import json
from collections.abc import Iterator

from stationcheck.web.app import STATIC_ROOT, add_common_files
from stationcheck.web.operator.acknowledge import AckPress
from stationcheck.web.operator.feed import OperatorFeed, ScreenFrame
from stationcheck.web.server import Request, Response, Router, WebError

OPERATOR_ROOT = STATIC_ROOT / "operator"
KEEPALIVE_S = 1.0
RECONNECT_MS = 1000
BOUNDARY = "stationcheckframe"


def _event(name: str, data: str) -> bytes:
    return f"event: {name}\ndata: {data}\n\n".encode()


def state_events(feed: OperatorFeed, keepalive_s: float = KEEPALIVE_S) -> Iterator[bytes]:
    """The page's text as server-sent events until the feed closes."""
    yield f"retry: {RECONNECT_MS}\n\n".encode()
    seq, sent = -1, ""
    latest = feed.latest
    if latest is not None:
        seq = latest.seq - 1  # a new page gets the current state at once
    while not feed.closed:
        frame = feed.wait_newer(seq, keepalive_s)
        if frame is None:
            yield b": alive\n\n"
            continue
        seq = frame.seq
        if frame.steady_json != sent:
            sent = frame.steady_json
            yield _event("state", sent)
        yield _event("tick", json.dumps(frame.tick, separators=(",", ":")))
    final = feed.latest  # e.g. the run's end, drawn just before the feed closed
    if final is not None and final.steady_json != sent:
        yield _event("state", final.steady_json)


PART_HEAD = f"--{BOUNDARY}\r\nContent-Type: image/jpeg\r\n\r\n".encode()


def _part(jpeg: bytes) -> bytes:
    """One picture, then the boundary and head of the next part: a browser shows a part only
    once the next one has begun, so beginning it at once keeps the picture from lagging one
    behind. Parts end at their boundary (no Content-Length), as multipart allows."""
    return jpeg + b"\r\n" + PART_HEAD


def picture_stream(feed: OperatorFeed, keepalive_s: float = KEEPALIVE_S) -> Iterator[bytes]:
    """Multipart JPEG until the feed closes; each part is the newest picture not sent yet."""
    with feed.watching_pictures():
        yield PART_HEAD
        seq = -1
        last: ScreenFrame | None = None
        while not feed.closed:
            frame = feed.wait_newer(seq, keepalive_s)
            if frame is None:
                if last is not None and last.jpeg is not None:
                    yield _part(last.jpeg)  # resend now and then: shows a dead viewer
                continue
            seq = frame.seq
            if frame.jpeg is None:
                continue
            last = frame
            yield _part(frame.jpeg)
            feed.note_sent(frame)  # resumed: the server has written and flushed the part


def add_operator_routes(router: Router, feed: OperatorFeed) -> None:
    add_common_files(router)

    def stream(request: Request) -> Response:
        return Response(
            200, content_type="text/event-stream; charset=utf-8", stream=state_events(feed)
        )

    def video(request: Request) -> Response:
        return Response(
            200,
            content_type=f"multipart/x-mixed-replace; boundary={BOUNDARY}",
            stream=picture_stream(feed),
        )

    def frame(request: Request) -> Response:
        jpeg = feed.snapshot_jpeg()
        if jpeg is None:
            raise WebError(404, "no frame yet")
        return Response(200, jpeg, "image/jpeg", {"Cache-Control": "no-store"})

    def state(request: Request) -> Response:
        latest = feed.latest
        if latest is None:
            return Response.json({"state": None, "tick": None})
        return Response.json({"state": latest.steady, "tick": latest.tick})

    def ack(request: Request) -> Response:
        if feed.decisions is None:
            raise WebError(
                403,
                "acknowledge is not possible here: "
                "a replay takes its acknowledges from the recording",
            )
        body = request.json()
        if not isinstance(body, dict):
            raise WebError(400, "expected a JSON object with serial and step")
        try:
            press = AckPress(str(body.get("serial") or ""), str(body.get("step") or ""))
        except ValueError as exc:
            raise WebError(400, str(exc)) from exc
        latest = feed.latest
        wanted = latest.steady["ack"] if latest is not None else None
        if (
            not wanted
            or not wanted["needed"]
            or wanted["serial"] != press.serial
            or wanted["step"] != press.step
        ):
            raise WebError(409, "nothing to acknowledge now: the step has moved on")
        feed.acks.post(press)
        return Response.json({"accepted": True}, 202)

    router.add("GET", "/api/stream", stream)
    router.add("GET", "/api/video.mjpg", video)
    router.add("GET", "/api/frame.jpg", frame)
    router.add("GET", "/api/state", state)
    router.add("POST", "/api/ack", ack, max_body_bytes=4096)


def operator_router(feed: OperatorFeed) -> Router:
    router = Router(OPERATOR_ROOT, name="operator")
    add_operator_routes(router, feed)
    return router
