"""``stationcheck alarms``: the station's alarm list (number, name, meaning, what to do).

Made from the one table in :mod:`stationcheck.core.alarms`; the PLC's ``alarm_code`` and
``event_code`` registers carry these numbers. Exit code 0.
"""

from __future__ import annotations

import argparse
import json
import textwrap


def register(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = subparsers.add_parser(
        "alarms",
        help="list every alarm number with its meaning and what to do",
        description=(
            "Lists every alarm the station can raise: the number the PLC reads in alarm_code "
            "(standing conditions) or event_code (latched one-off events), its name, whether it "
            "is a condition or a one-off, what it means and what to do about it."
        ),
    )
    p.add_argument("--json", action="store_true", help="print the list as JSON")
    p.add_argument("--markdown", action="store_true", help="print the list as a Markdown table")
    p.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from stationcheck.core.alarms import alarm_rows, markdown_alarm_table

    if args.json:
        print(json.dumps(alarm_rows(), indent=2))
        return 0
    if args.markdown:
        print(markdown_alarm_table())
        return 0
    for row in alarm_rows():
        print(f"{row['number']:>3}  {row['code']}  ({row['severity']}, {row['kind']})")
        print(
            textwrap.fill(
                row["meaning"],
                96,
                initial_indent="     meaning: ",
                subsequent_indent="              ",
            )
        )
        if row["action"]:
            print(
                textwrap.fill(
                    row["action"],
                    96,
                    initial_indent="     to do:   ",
                    subsequent_indent="              ",
                )
            )
    return 0
