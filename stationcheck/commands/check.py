"""``stationcheck check CONFIG``: report every problem in a station config.

Output, one finding per line, in file order, then a summary line::

    configs/station.yaml:42: error: steps[2].zone: no zone named 'bin_b'; bin zones are: ...
    configs/station.yaml:17: warning: zones[4]: zone 'bin_spare' is not used by any step
    configs/station.yaml: NOT usable: 1 error, 1 warning

``--json`` prints one JSON object instead: ``{"file", "ok", "errors", "warnings",
"findings": [{"severity", "path", "line", "message"}]}`` (plus ``"expanded"`` with
``--expand``; an unreadable file gives ``{"file", "ok": false, "error"}``).

``--expand`` prints the zones and steps written out in full (bolt circles as single zones,
``order: cross`` as the explicit order) as YAML, with the findings as ``#`` comments above.

Exit codes: 0 no errors (warnings allowed); 1 errors found; 2 the file is missing,
unreadable, not YAML, empty or not a mapping; 64 bad command line.
"""

from __future__ import annotations

import argparse
import json
import sys
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from stationcheck.config import StationConfig

EXIT_OK = 0
EXIT_FINDINGS = 1

_EPILOG = """\
output: one line per finding, 'FILE:LINE: error|warning: PATH: MESSAGE', in file order, then
a summary line. Errors make the config unusable; warnings point at likely mistakes.

exit codes: 0 no errors (warnings allowed), 1 errors found, 2 the file is missing,
unreadable, not YAML, empty or not a mapping, 64 bad command line.
"""


def register(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    parser = subparsers.add_parser(
        "check",
        help="check a station config and report every problem",
        description=(
            "Check a station config file: its keys and values, the zone geometry (inside the "
            "camera frame, no crossing outlines, no overlapping fastener positions, big enough "
            "for the hysteresis) and that every step names a zone of the right kind."
        ),
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("config", metavar="CONFIG", help="station config file (.yaml)")
    parser.add_argument("--json", action="store_true", help="print one JSON object")
    parser.add_argument(
        "--expand",
        action="store_true",
        help="also print zones and steps written out in full (bolt circles, cross order)",
    )
    parser.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from stationcheck.config import check_file
    from stationcheck.config.expansion import expanded_sections, expanded_yaml
    from stationcheck.errors import ConfigError
    from stationcheck.shown_text import terminal_text

    try:
        result = check_file(args.config)
    except ConfigError as exc:
        if not args.json:
            raise
        print(json.dumps({"file": args.config, "ok": False, "error": str(exc)}, indent=2))
        return exc.exit_code
    code = EXIT_OK if result.ok else EXIT_FINDINGS
    if args.json:
        report = result.to_json()
        if args.expand and result.config is not None:
            report["expanded"] = expanded_sections(result.config)
        print(json.dumps(report, indent=2))
        return code
    if args.expand and result.config is not None:
        for line in [*result.lines(), result.summary()]:
            print(terminal_text(f"# {line}"))
        sys.stdout.write(terminal_text(expanded_yaml(result.config), keep_newlines=True))
        return code
    for line in result.lines():
        print(terminal_text(line))
    print(terminal_text(result.summary()))
    if result.config is not None and not any(f.path == ("model", "path") for f in result.findings):
        warn_unproven_model(result.config)
    return code


def warn_unproven_model(config: StationConfig) -> None:
    """Says on stderr, framed so it is not missed, when the station's model is unproven or
    unfit (``check`` and ``run``)."""
    from stationcheck.config.model_proof import station_model_proof

    proof = station_model_proof(config)
    if proof.warns:
        sys.stdout.flush()
        bar = "!" * 78
        print(f"{bar}\n!! {proof.message}\n{bar}", file=sys.stderr, flush=True)
