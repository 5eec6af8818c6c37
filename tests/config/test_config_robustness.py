"""Any value anywhere: checking never crashes and never shows pydantic's own wording."""

from __future__ import annotations

from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from stationcheck.config import check_data

RAW_PYDANTIC = ("Input should", "Field required", "Extra inputs", "Value error", "validation error",
                "Keys should", "should be")

junk = st.recursive(
    st.none() | st.booleans() | st.integers(-10**6, 10**6)
    | st.floats(allow_nan=True, allow_infinity=True) | st.text(max_size=12),
    lambda inner: st.lists(inner, max_size=4)
    | st.dictionaries(st.text(max_size=8) | st.integers(-3, 3), inner, max_size=3),
    max_leaves=8,
)


def paths(value: Any, path: tuple[str | int, ...] = ()) -> Iterator[tuple[str | int, ...]]:
    if path:
        yield path
    if isinstance(value, dict):
        for key, item in value.items():
            yield from paths(item, path + (key,))
    elif isinstance(value, list):
        for index, item in enumerate(value):
            yield from paths(item, path + (index,))


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                    HealthCheck.function_scoped_fixture])
@given(data=st.data(), replacement=junk)
def test_any_value_at_any_place_gives_plain_findings(
    data: st.DataObject,
    replacement: Any,
    base_config: Callable[[], dict[str, Any]],
    tmp_path: Path,
) -> None:
    config = base_config()
    path = data.draw(st.sampled_from(list(paths(config))))
    target: Any = config
    for part in path[:-1]:
        target = target[part]
    target[path[-1]] = replacement
    result = check_data(config, base_dir=tmp_path)
    for finding in result.findings:
        assert finding.message and not any(raw in finding.message for raw in RAW_PYDANTIC), (
            finding
        )
    if result.config is not None:
        result.config.to_plan()
