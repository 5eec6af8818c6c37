from __future__ import annotations

from stationcheck.cli import main

raise SystemExit(main())
