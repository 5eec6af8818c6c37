"""Model training and ONNX export (needs the ``train`` extra: torch, onnx).

Importing this package without torch raises :class:`~stationcheck.errors.MissingExtraError`
with the install hint, so the CLI can print one line instead of a traceback.
"""

from __future__ import annotations

from stationcheck.errors import MissingExtraError

INSTALL_HINT = "pip install 'stationcheck[train]'"

try:
    import torch  # noqa: F401
except ImportError as exc:  # pragma: no cover - exercised by the no-torch test in a subprocess
    raise MissingExtraError(f"training needs torch; install it with: {INSTALL_HINT}") from exc
