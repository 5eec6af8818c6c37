"""Text from files, logs and the network made safe to show.

- In a terminal: control characters (C0, DEL, C1: escape sequences, NUL, bell) and the
  invisible bidirectional controls (Unicode's right-to-left overrides and isolates, which can
  make a serial read backwards, "Trojan Source") are written out as ``\\u202e`` escapes.
- In a spreadsheet: a CSV cell that starts with ``=``, ``+``, ``-``, ``@``, a tab or a carriage
  return would be run as a formula; it gets a leading ``'`` as the OWASP guidance on CSV
  injection recommends (https://owasp.org/www-community/attacks/CSV_Injection).
"""

from __future__ import annotations

import re
from typing import Any

_UNSAFE = re.compile("[\x00-\x08\x0a-\x1f\x7f-\x9f\u061c\u200e\u200f\u202a-\u202e\u2066-\u2069]")
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def terminal_text(text: str, keep_newlines: bool = False) -> str:
    """``text`` with control and bidi-override characters escaped (tabs become a space; line
    breaks too unless ``keep_newlines``, so one record cannot forge another line)."""
    if keep_newlines:
        return "\n".join(terminal_text(line) for line in text.split("\n"))
    return _UNSAFE.sub(lambda m: f"\\u{ord(m.group()):04x}", text.replace("\t", " "))


def csv_cell(value: Any) -> Any:
    """A CSV cell value that a spreadsheet shows as text, never runs as a formula."""
    if isinstance(value, str) and value.startswith(FORMULA_STARTS):
        return "'" + value
    return value
