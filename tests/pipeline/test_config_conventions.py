"""The curve keys of issue 15: read.*, spot_days, coupon_frequency and the ACT/ACT (ISDA) spellings.

A bad value is refused with one line naming the key and the allowed values (CONTRACT, "Configuration")."""

from __future__ import annotations

import tomllib
from pathlib import Path

import pytest

from pipeline.config import ConfigError, parse_config
from pipeline.config_template import CONFIG_TEMPLATE
from pipeline.readers import DEFAULT_MISSING, ReadOptions


def _curve(extra: str, quote: str = "zero", compounding: str = "annual", tenors: str = '["3M", "1Y"]'):  # noqa: ANN202
    text = f"""
[curves.mm]
quote = "{quote}"
compounding = "{compounding}"
tenors = {tenors}
{extra}
"""
    return parse_config(tomllib.loads(text), base=Path("/tmp")).curves["mm"]


def _refused(extra: str, **kw) -> str:  # noqa: ANN003
    with pytest.raises(ConfigError) as info:
        _curve(extra, **kw)
    msg = str(info.value)
    assert "\n" not in msg
    return msg


def test_read_defaults_and_values():
    assert _curve("").read == ReadOptions(0, 0, DEFAULT_MISSING)
    c = _curve('read.skip_rows = 3\nread.sheet = "Curve"\nread.missing = ["n.a."]')
    assert c.read == ReadOptions(3, "Curve", ("n.a.",))
    assert c.read.missing_set == {"n.a.", ""}          # an empty cell is always missing
    assert _curve("read.sheet = 2").read.sheet == 2


@pytest.mark.parametrize(("extra", "part"), [
    ("read.skip_rows = -1", "curves.mm.read.skip_rows"),
    ('read.skip_rows = "2"', "curves.mm.read.skip_rows"),
    ("read.sheet = -1", "curves.mm.read.sheet"),
    ('read.sheet = ""', "curves.mm.read.sheet"),
    ('read.missing = "N/A"', "curves.mm.read.missing"),
    ("read.header = 2", "unknown key curves.mm.read.'header'; allowed: missing, sheet, skip_rows"),
    ('read = "x"', "curves.mm.read"),
], ids=["negative-skip", "text-skip", "negative-sheet", "empty-sheet", "missing-not-list", "unknown", "not-table"])
def test_bad_read_values_are_refused_naming_the_key(extra, part):
    assert part in _refused(extra)


def test_spot_days():
    assert _curve("").spot_days == 0
    c = _curve("spot_days = 2")
    assert c.spot_days == 2 and c.calendar.spot_days == 2
    assert "curves.mm.spot_days" in _refused("spot_days = -1")
    assert "curves.mm.spot_days" in _refused("spot_days = 1.5")
    assert "curves.mm.spot_days" in _refused("spot_days = 40")


def test_coupon_frequency_defaults_to_the_compounding_so_old_configs_are_unchanged():
    assert _curve("", quote="par", compounding="semiannual").coupons_per_year == 2
    c = _curve('coupon_frequency = "annual"', quote="par", compounding="continuous")
    assert (c.coupon_frequency, c.coupons_per_year, c.frequency_per_year) == ("annual", 1, None)
    assert _curve('coupon_frequency = "Quarterly"', quote="par").coupons_per_year == 4


def test_bad_coupon_frequency_is_refused_naming_the_key_and_the_allowed_values():
    msg = _refused('coupon_frequency = "weekly"', quote="par")
    assert "curves.mm.coupon_frequency" in msg and "annual, semiannual, quarterly, monthly" in msg
    msg = _refused("", quote="par", compounding="continuous")
    assert "curves.mm.coupon_frequency is required" in msg and "annual, semiannual, quarterly, monthly" in msg


@pytest.mark.parametrize("spelling", ["ACT/ACT", "act/act", "ACT/ACT ISDA", "ACT/ACT (ISDA)", "Actual/Actual (ISDA)"])
def test_act_act_isda_spellings_are_one_convention(spelling):
    assert _curve(f'day_count = "{spelling}"').day_count == "ACT/ACT"


def test_unknown_day_count_names_the_isda_variant():
    msg = _refused('day_count = "ACT/ACT ICMA"')
    assert "curves.mm.day_count" in msg and "ACT/ACT (ISDA)" in msg


@pytest.mark.parametrize(("tenors", "spot", "pair"), [
    ('["ON", "SN", "1M"]', 0, "ON and SN"),
    ('["TN", "SN", "1M"]', 1, "TN and SN"),
    ('["2D", "TN", "1M"]', 2, "2D and TN"),
    ('["3D", "SN", "1M"]', 2, "3D and SN"),
], ids=["sn-on-spot0", "sn-tn-spot1", "2d-tn", "3d-sn-spot2"])
def test_day_tenors_that_always_share_a_maturity_are_refused(tenors, spot, pair):
    msg = _refused(f"spot_days = {spot}", tenors=tenors)
    assert "curves.mm.tenors" in msg and pair in msg


def test_the_short_end_with_a_spot_lag_is_accepted():
    c = _curve("spot_days = 2", tenors='["ON", "TN", "SN", "1W", "2W", "1M", "1Y"]')
    assert [t.label for t in c.tenors] == ["ON", "TN", "SN", "1W", "2W", "1M", "1Y"]


def test_the_init_template_documents_and_parses_the_new_keys():
    for key in ("read.skip_rows", "read.sheet", "read.missing", "spot_days", "coupon_frequency", "ACT/ACT (ISDA)"):
        assert key in CONFIG_TEMPLATE, key
    govt = parse_config(tomllib.loads(CONFIG_TEMPLATE), base=Path("/tmp")).curves["govt"]
    assert govt.read == ReadOptions() and govt.spot_days == 0 and govt.coupons_per_year == 2
