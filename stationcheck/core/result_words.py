"""The words people read for a result, the same on every screen, in text output, CSV/JSON
exports and the demo summary.

The step log keeps the result words of the OPC UA joining result model (OK, NotOK,
NotDecidable) so that other systems can read it; everything shown maps them through here once.
"""

from __future__ import annotations

from stationcheck.core.events import RESULT_NOK, RESULT_OK, RESULT_UNDECIDED

UNIT_OPEN = "open"
SHOWN_RESULT: dict[str, str] = {
    RESULT_OK: "OK",  # released
    RESULT_NOK: "NOK",  # not released: goes to rework
    RESULT_UNDECIDED: "aborted",  # ended undecided: aborted, or replaced by the next unit
    UNIT_OPEN: "open",  # not finished yet
}
VOCABULARY_NOTE = (
    "Results: OK (released), NOK (not released, to rework), aborted (ended undecided), "
    "open (not finished). The step log keeps the OPC UA joining result words OK, NotOK and "
    "NotDecidable for these."
)


def unit_word(status: str) -> str:
    """The shown word for a logged result or unit status (unknown words pass unchanged)."""
    return SHOWN_RESULT.get(status, status)
