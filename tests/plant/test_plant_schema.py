"""The plant schema's versioned migrations on a real PostgreSQL server: applying them again
changes nothing, and a database newer than this code is refused rather than written."""

from __future__ import annotations

from typing import Any

import pytest

from stationcheck.errors import PlantDatabaseError
from stationcheck.plant import plant_schema


def test_migrate_again_keeps_the_version_and_the_data(admin: Any) -> None:
    before = admin.execute("SELECT count(*) FROM plant.stations").fetchone()[0]
    assert plant_schema.migrate(admin) == plant_schema.SCHEMA_VERSION == len(plant_schema.MIGRATIONS)
    assert plant_schema.schema_version(admin) == plant_schema.SCHEMA_VERSION
    assert admin.execute("SELECT count(*) FROM plant.stations").fetchone()[0] == before


def test_a_newer_database_is_refused(admin: Any) -> None:
    admin.execute("UPDATE plant.schema_version SET version = version + 1")
    try:
        with pytest.raises(PlantDatabaseError, match="newer than this stationcheck"):
            plant_schema.migrate(admin)
        with pytest.raises(PlantDatabaseError, match="plant setup"):
            plant_schema.require_current(admin)
    finally:
        admin.execute("UPDATE plant.schema_version SET version = %s", (plant_schema.SCHEMA_VERSION,))
