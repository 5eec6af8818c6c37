"""A station process for the SIGKILL test: appends event batches to a real step log, one commit
each, and reports every commit on stdout; after batch STOP_AT it waits on stdin (forever, until
it is killed).

usage: python append_child.py LOG BATCHES_JSONL STOP_AT
"""

from __future__ import annotations

import json
import sys
import time

from stationcheck.core.events import Event
from stationcheck.store import SqliteStepLog


def main(log_path: str, batches_path: str, stop_at: int) -> None:
    with open(batches_path, encoding="utf-8") as lines:
        batches = [[Event.from_dict(raw) for raw in json.loads(line)] for line in lines]
    log = SqliteStepLog(log_path)
    for index, batch in enumerate(batches):
        last_seq = log.append(batch, time.time())
        print(f"committed {index} {last_seq}", flush=True)
        if index == stop_at:
            print("waiting", flush=True)
            sys.stdin.readline()


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2], int(sys.argv[3]))
