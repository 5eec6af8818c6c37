"""The setup screen's HTTP interface: the page's static files and a small JSON API.

The page holds the whole document and sends it with each request that needs it, so checking,
teaching and dry runs always see the config as edited, saved or not.
"""

from __future__ import annotations

from typing import Any

from stationcheck.web.app import STATIC_ROOT, add_common_files
from stationcheck.web.server import Request, Response, Router, WebError
from stationcheck.web.setup import checking, dry_run, frames, station_copy, teaching_service
from stationcheck.web.setup.labelling import LabelService
from stationcheck.web.setup.workspace import SetupSession

SETUP_STATIC = STATIC_ROOT / "setup"
# the page sends the whole config with most requests: room for ten thousand zones
DOCUMENT_BODY_BYTES = 8 * 1024 * 1024
FILE_KINDS = {"video": (".mp4", ".avi", ".mkv", ".mov", ".webm"), "inputs": (".jsonl",)}


class SetupApp:
    def __init__(self, session: SetupSession, labels: LabelService | None = None) -> None:
        self.session = session
        self.dry_runs = dry_run.DryRunStore()
        self.labels = labels or LabelService(session)

    def router(self) -> Router:
        router = Router(SETUP_STATIC, name="setup")
        add_common_files(router)
        routes = {
            ("GET", "/api/state"): self.state,
            ("POST", "/api/check"): self.check,
            ("POST", "/api/bolt-circle"): self.bolt_circle,
            ("POST", "/api/save"): self.save,
            ("GET", "/api/reference-image"): self.reference_image,
            ("POST", "/api/reference"): self.take_reference,
            ("GET", "/api/video-info"): self.video_info,
            ("GET", "/api/files"): self.files,
            ("POST", "/api/teach/list"): self.teach_list,
            ("POST", "/api/teach"): self.teach,
            ("POST", "/api/teach/clear"): self.teach_clear,
            ("GET", "/api/teach-image"): self.teach_image,
            ("POST", "/api/dry-run"): self.dry_run,
            ("GET", "/api/dry-run/frame"): self.dry_run_frame,
        }
        for (method, path), handler in routes.items():
            router.add(
                method,
                path,
                handler,
                max_body_bytes=None if method == "GET" else DOCUMENT_BODY_BYTES,
            )
        self.labels.add_routes(router)
        return router

    def _source(self) -> str:
        path = self.session.config_path
        return self.session.workspace.shown(path) if path is not None else "(new config)"

    def _checked(self, data: dict[str, Any]) -> dict[str, Any]:
        return checking.check_for_page(
            data,
            self.session.base_dir,
            self._source(),
            teaching_service.teaching_findings(self.session, data),
        )

    def state(self, request: Request) -> Response:
        data = self.session.data()
        path = self.session.config_path
        return Response.json(
            {
                "config_path": self.session.workspace.shown(path) if path is not None else None,
                "exists": path is not None and path.exists(),
                "root": str(self.session.workspace.root),
                "base_dir": self.session.workspace.shown(self.session.base_dir),
                "data": data,
                "check": self._checked(data),
                "video": self._default_video(data),
            }
        )

    def _default_video(self, data: dict[str, Any]) -> str | None:
        """The camera source when it is a video file inside the workspace (as the page names
        paths: relative to the config's folder)."""
        camera = data.get("camera")
        source = camera.get("source") if isinstance(camera, dict) else None
        if not isinstance(source, str) or "://" in source:
            return None
        try:
            path = self.session.resolve(source)
        except WebError:
            return None
        return source if path.is_file() else None

    def check(self, request: Request) -> Response:
        return Response.json(self._checked(_document(request.json())))

    def bolt_circle(self, request: Request) -> Response:
        body = _body(request)
        try:
            return Response.json(checking.bolt_circle_zones(body))
        except ValueError as exc:
            raise WebError(400, str(exc)) from exc

    def save(self, request: Request) -> Response:
        body = _body(request)
        data = _document(body)
        path = str(body["path"]) if body.get("path") else None
        plan = station_copy.plan_carry(
            data, self.session.base_dir, self.session.target_of(path).parent, self.session.workspace
        )
        station_copy.carry(plan)
        target = self.session.save(plan.data, path)
        return Response.json(
            {
                "path": self.session.workspace.shown(target),
                "data": plan.data,
                "carried": plan.notes,
                "video": self._default_video(plan.data),
                "check": self._checked(plan.data),
            }
        )

    def reference_image(self, request: Request) -> Response:
        path = self.session.resolve(request.query.get("path", ""))
        if path.suffix.lower() not in frames.IMAGE_SUFFIXES:
            raise WebError(403, "refused: only the reference frame image is served")
        if not path.is_file():
            raise WebError(
                404, f"no reference frame yet: tried {path}; take one in the Picture tab"
            )
        kind = "image/png" if path.suffix.lower() == ".png" else "image/jpeg"
        return Response(200, path.read_bytes(), kind, {"Cache-Control": "no-store"})

    def take_reference(self, request: Request) -> Response:
        body = _body(request)
        target = self.session.resolve(str(body.get("reference_frame") or ""))
        request_frames = frames.FrameRequest.from_json({**body, "count": 1}, self.session)
        size = (int(body.get("width_px") or 640), int(body.get("height_px") or 480))
        image, source = frames.grab(request_frames, size)[0]
        frames.write_reference(image, target)
        fps = (
            frames.video_info(request_frames.video)["fps"]
            if request_frames.video is not None
            else None
        )
        return Response.json(
            {
                "source": source,
                "width_px": int(image.shape[1]),
                "height_px": int(image.shape[0]),
                "fps": fps,
            }
        )

    def video_info(self, request: Request) -> Response:
        return Response.json(
            frames.video_info(
                self.session.existing_file(request.query.get("path", ""), "video file")
            )
        )

    def files(self, request: Request) -> Response:
        kind = request.query.get("kind", "")
        if kind not in FILE_KINDS:
            raise WebError(400, f"kind must be one of {', '.join(FILE_KINDS)}")
        workspace = self.session.workspace
        return Response.json(
            {
                "root": str(workspace.root),
                "kind": kind,
                "files": workspace.files(FILE_KINDS[kind], self.session.base_dir),
            }
        )

    def teach_list(self, request: Request) -> Response:
        body = _body(request)
        return Response.json(
            teaching_service.listing(self.session, _document(body), str(body.get("zone") or ""))
        )

    def teach(self, request: Request) -> Response:
        body = _body(request)
        return Response.json(
            teaching_service.teach_from_source(self.session, _document(body), body)
        )

    def teach_clear(self, request: Request) -> Response:
        body = _body(request)
        return Response.json(teaching_service.clear(self.session, _document(body), body))

    def teach_image(self, request: Request) -> Response:
        query = request.query
        path = teaching_service.image_path(
            self.session, query.get("reference", ""), query.get("zone", ""), query.get("file", "")
        )
        return Response(200, path.read_bytes(), "image/png")

    def dry_run(self, request: Request) -> Response:
        body = _body(request)
        config = dry_run.usable_config(_document(body), self.session.base_dir)
        video = self.session.existing_file(str(body.get("video") or ""), "video file")
        inputs_text = body.get("inputs")
        inputs = (
            self.session.existing_file(str(inputs_text), "inputs file")
            if inputs_text
            else dry_run.inputs_beside(video)
        )
        start_s, seconds = body.get("start_s", 0), body.get("seconds", 4)
        if (
            not all(
                isinstance(v, int | float) and not isinstance(v, bool) for v in (start_s, seconds)
            )
            or start_s < 0
            or not 0 < seconds <= dry_run.MAX_SECONDS
        ):
            raise WebError(
                400, f"start_s must be >= 0 and seconds from 0 to {dry_run.MAX_SECONDS:g}"
            )
        recorder = dry_run.run_dry(
            config, dry_run.DryRunRequest(video, inputs, float(start_s), float(seconds))
        )
        run_id = self.dry_runs.add(recorder.frames)
        return Response.json(
            {
                "run": run_id,
                "frames": len(recorder.frames),
                "frame_times_s": [round(t, 3) for t in recorder.frame_times_s],
                "every": recorder.every,
                "timeline": recorder.timeline,
                "inputs": self.session.workspace.shown(inputs) if inputs else None,
                "run_frames": recorder.run_frames,
                "enabled_frames": recorder.enabled_frames,
            }
        )

    def dry_run_frame(self, request: Request) -> Response:
        run_id = request.int_arg("run", 0, 0, 1 << 30)
        index = request.int_arg("i", 0, 0, 1 << 20)
        return Response(
            200, self.dry_runs.frame(run_id, index), "image/jpeg", {"Cache-Control": "max-age=600"}
        )


def _body(request: Request) -> dict[str, Any]:
    body = request.json()
    if not isinstance(body, dict):
        raise WebError(400, "the request body must be a JSON object")
    return body


def _document(body: Any) -> dict[str, Any]:
    data = body.get("data") if isinstance(body, dict) else None
    if not isinstance(data, dict):
        raise WebError(400, "send the document as 'data' (a mapping)")
    return data


def build_router(session: SetupSession) -> Router:
    return SetupApp(session).router()
