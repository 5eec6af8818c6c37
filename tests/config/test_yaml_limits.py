"""The one YAML reader: the same values from libyaml's parser and the pure-Python one, and the
limits hold on both (YAML 1.2 core schema, https://yaml.org/spec/1.2.2/#103-core-schema)."""

from __future__ import annotations

from pathlib import Path

import pytest

from stationcheck.config import yaml_text
from stationcheck.errors import ConfigError

REPO = Path(__file__).resolve().parents[2]
HOSTILE = REPO / "tests" / "hostile" / "configs"


@pytest.fixture(params=["libyaml", "pure"])
def parser(request: pytest.FixtureRequest, monkeypatch: pytest.MonkeyPatch) -> str:
    if request.param == "pure":
        monkeypatch.setattr(yaml_text, "CParser", None)
    else:
        assert yaml_text.CParser is not None, "ruamel.yaml.clib is a dependency"
    return str(request.param)


def test_both_parsers_read_the_demo_config_alike(monkeypatch: pytest.MonkeyPatch) -> None:
    text = (REPO / "configs" / "demo_station.yaml").read_text(encoding="utf-8")
    fast = yaml_text.load_plain(text, "demo")
    monkeypatch.setattr(yaml_text, "CParser", None)
    assert yaml_text.load_plain(text, "demo") == fast


@pytest.mark.parametrize(("text", "value"), [
    ("a: on", "on"), ("a: no", "no"), ("a: yes", "yes"), ("a: off", "off"),
    ("a: true", True), ("a: 0o17", 15), ("a: 017", 17), ("a: 1_000", 1000), ("a: ~", None),
])
def test_yaml_1_2_scalars(parser: str, text: str, value: object) -> None:
    assert yaml_text.load_plain(text, "x") == {"a": value}


@pytest.mark.parametrize(("name", "message"), [
    ("alias_bomb.yaml", "alias bomb"),
    ("recursive_alias.yaml", "refers to the mapping or list it is in"),
    ("deep_nesting.yaml", "nested deeper than 40 levels"),
    ("set_tag.yaml", "the tag !!set is not taken"),
    ("python_tag.yaml", "is not taken"),
])
def test_limits_hold_on_both_parsers(parser: str, name: str, message: str) -> None:
    with pytest.raises(ConfigError, match=message):
        yaml_text.load_plain((HOSTILE / name).read_text(encoding="utf-8"), name)


def test_nesting_far_past_the_limit_is_refused_without_recursion(parser: str) -> None:
    with pytest.raises(ConfigError, match="nested deeper than 40"):
        yaml_text.load_plain("a: " + "[" * 200_000 + "]" * 200_000, "x")
