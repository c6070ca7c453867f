"""The ``model.*`` keys of a curve: defaults from the contract (max_months 120, factors 5), refusals
that name the key and the allowed values."""

from __future__ import annotations

import tomllib
from pathlib import Path

import pytest

from pipeline.config import ConfigError, parse_config
from pipeline.config_template import CONFIG_TEMPLATE


def parse(model: dict | None):  # noqa: ANN201
    data = tomllib.loads(CONFIG_TEMPLATE)
    data["curves"]["govt"].pop("model", None)
    if model is not None:
        data["curves"]["govt"]["model"] = model
    return parse_config(data, base=Path("."))


def test_defaults_are_the_contracts() -> None:
    c = parse(None).curves["govt"]
    assert (c.model_max_months, c.model_factors) == (120, 5)  # CONTRACT.md, second round
    c = parse({"max_months": 60, "factors": 3}).curves["govt"]
    assert (c.model_max_months, c.model_factors) == (60, 3)


@pytest.mark.parametrize(("model", "key"), [
    ({"factors": 0}, "curves.govt.model.factors"),
    ({"factors": 2.5}, "curves.govt.model.factors"),
    ({"factors": True}, "curves.govt.model.factors"),
    ({"max_months": 12}, "curves.govt.model.max_months"),
    ({"max_months": "120"}, "curves.govt.model.max_months"),
], ids=["zero-factors", "fractional", "bool", "under-24-months", "string"])
def test_a_bad_model_setting_is_refused_naming_key_and_allowed_values(model: dict, key: str) -> None:
    with pytest.raises(ConfigError) as err:
        parse(model)
    msg = str(err.value)
    assert key in msg and "allowed: a whole number from" in msg and "\n" not in msg


def test_an_unknown_model_key_is_refused() -> None:
    with pytest.raises(ConfigError, match=r"unknown key curves\.govt\.model\.'lags'; allowed: factors, max_months"):
        parse({"lags": 3})
