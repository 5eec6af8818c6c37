"""The manufacturing engineer's setup screen (``stationcheck setup``): reference frame, zones,
steps, teaching of check zones, live validation, dry run and a comment-keeping save."""

from __future__ import annotations

from stationcheck.web.setup.setup_routes import SetupApp, build_router
from stationcheck.web.setup.workspace import SetupSession, Workspace, default_root

__all__ = ["SetupApp", "SetupSession", "Workspace", "build_router", "default_root"]
