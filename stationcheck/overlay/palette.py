"""IEC 60073 indicator meanings as colours (BGR), the text colour that reads on each, and the
symbol that doubles each meaning:

========  ==========  =========================  ==========================
meaning   colour      symbol                     used for
========  ==========  =========================  ==========================
normal    green       check mark                 tool enabled, position OK
abnormal  yellow      triangle with "!"          wrong position, tool not seen
fault     red         cross in a circle          camera moved, NOK, not released
action    blue        arrow                      the next thing to do
neutral   white       plain circle               waiting, pending positions
========  ==========  =========================  ==========================
"""

from __future__ import annotations

from stationcheck.overlay.station_view import Meaning

BGR = tuple[int, int, int]

COLOURS: dict[Meaning, BGR] = {
    "normal": (60, 170, 30),
    "abnormal": (0, 210, 255),
    "fault": (40, 40, 225),
    "action": (215, 120, 20),
    "neutral": (235, 235, 235),
}
TEXT_ON: dict[Meaning, BGR] = {
    "normal": (255, 255, 255),
    "abnormal": (0, 0, 0),
    "fault": (255, 255, 255),
    "action": (255, 255, 255),
    "neutral": (0, 0, 0),
}
DARK: BGR = (25, 25, 25)
PANEL: BGR = (48, 44, 40)
MUTED: BGR = (170, 170, 170)
