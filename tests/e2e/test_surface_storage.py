"""Built surfaces in narrow tables (sql/007): a store from before migrates and answers the same; the
build after it carries on; days are found due in the store; the shape checks skipped on certified days
find what the full grid finds.

References: the store's own views before the migration (the old tables, filled with exactly what a
build wrote, are what the old views read); a fresh store built from the same files; and
``pipeline.checks.curve_shape_checks`` evaluated on every built day.
"""

from __future__ import annotations

import duckdb
import numpy as np
import pytest

from flows.build_step import run_build
from flows.check_step import accept_day, run_checks
from flows.load_step import load_files
from pipeline.checks import curve_shape_checks
from pipeline.config import CurveConfig
from pipeline.curves import build_curves
from pipeline.dates import BusinessCalendar
from pipeline.surfaces import _shape_findings
from tests.e2e.stores import Project, clone_project, make_project, write_wide_csv
from warehouse.connect import writer
from warehouse.schema import SCHEMA_FILES

TENORS = ["1M", "3M", "6M", "1Y", "2Y", "3Y", "5Y"]
HOLIDAYS = ["2031-12-25", "2032-01-01"]
TOML = f"""
[store]
path = "store.duckdb"

[curves.zc]
files = "zc_*.csv"
quote = "zero"
compounding = "annual"
day_count = "ACT/365F"
units = "percent"
interpolation = "monotone_convex"
tenors = [{", ".join(f'"{t}"' for t in TENORS)}]
calendar.weekend = ["Sat", "Sun"]
calendar.holidays = [{", ".join(f'"{h}"' for h in HOLIDAYS)}]
forward.starts = ["0M", "3M", "1Y"]
forward.tenors = ["3M", "1Y", "2Y"]
checks.jump_bp = 500
"""
VIEWS = {  # view: its key, for the comparisons
    "forwards": "curve, as_of, start_months, tenor_months",
    "zero_rates": "curve, as_of, tenor",
    "pending_forwards": "curve, as_of, start_months, tenor_months",
    "forward_built": "curve, scenario, as_of, start_months, tenor_months",
    "zero_rate_built": "curve, scenario, as_of, tenor",
}
OLD_BUILT_DAY = "curve, scenario, as_of, method, code_version, built_at, quotes_as_of"


def _days(first: str, last: str) -> np.ndarray:
    span = np.arange(np.datetime64(first), np.datetime64(last) + 1)
    return span[np.is_busday(span, holidays=HOLIDAYS)]


def _rates(n: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    base = np.array([3.10, 3.22, 3.35, 3.50, 3.71, 3.86, 4.05])
    return np.round(base[None, :] + np.cumsum(rng.normal(0, 0.03, n))[:, None], 4)


DAYS = _days("2031-12-01", "2032-01-30")
RATES = _rates(len(DAYS), 3)


def _write_month(p: Project, name: str, days: np.ndarray, rates: np.ndarray) -> None:
    write_wide_csv(p.root / name, days, TENORS, rates, "%.4f")
    load_files(p.cfg, [p.root / name])


@pytest.fixture(scope="module")
def built(tmp_path_factory) -> Project:
    p = make_project(tmp_path_factory.mktemp("surfaces"), TOML)
    _write_month(p, "zc_all.csv", DAYS, RATES)
    run_checks(p.cfg)
    run_build(p.cfg)
    run_build(p.cfg, method="linear_zero")  # a what-if scenario beside the official surface
    return p


def _old_layout_copy(src: Project, root) -> Project:  # noqa: ANN001
    """The same store in the layout before sql/007: schema files up to 006 applied, every table copied,
    and the old forward_built / zero_rate_built / built_day tables filled with what the build wrote."""
    p = clone_project(src, root)
    p.cfg.store_path.unlink()
    con = duckdb.connect(str(p.cfg.store_path))
    con.execute("CREATE TABLE schema_migration (version INTEGER PRIMARY KEY, name VARCHAR NOT NULL, "
                "applied_at TIMESTAMP NOT NULL DEFAULT current_timestamp)")
    for version, path in SCHEMA_FILES():
        if version < 7:
            con.execute(path.read_text(encoding="utf-8"))
            con.execute("INSERT INTO schema_migration (version, name) VALUES (?, ?)", [version, path.name])
    con.execute(f"ATTACH '{src.cfg.store_path}' AS src (READ_ONLY)")
    tables = [r[0] for r in con.execute("SELECT table_name FROM information_schema.tables WHERE table_schema = "
                                        "'main' AND table_catalog = current_database() AND table_type = 'BASE TABLE' "
                                        "AND table_name <> 'schema_migration'").fetchall()]
    for t in tables:
        cols = ", ".join(r[0] for r in con.execute(
            "SELECT column_name FROM information_schema.columns WHERE table_catalog = current_database() "
            "AND table_name = ? ORDER BY ordinal_position", [t]).fetchall())
        con.execute(f"INSERT INTO main.{t} ({cols}) SELECT {cols} FROM src.{t}")
    # a row of a day that was never built (a half-written build the old views still showed)
    con.execute("INSERT INTO forward_built SELECT curve, scenario, DATE '2031-11-28', start_months, tenor_months, "
                "start_date, end_date, forward_rate, forward_rate_cc, method, code_version FROM forward_built LIMIT 1")
    con.close()
    return p


def _differences(con: duckdb.DuckDBPyConnection, view: str, other: str) -> tuple[int, int, int]:
    def one(q: str) -> int:
        return con.execute(q).fetchone()[0]  # type: ignore[index]

    return (one(f"SELECT count(*) FROM (SELECT * FROM {view} EXCEPT ALL SELECT * FROM {other}.{view})"),
            one(f"SELECT count(*) FROM (SELECT * FROM {other}.{view} EXCEPT ALL SELECT * FROM {view})"),
            one(f"SELECT count(*) FROM {view}"))


def test_an_old_store_migrates_and_its_views_answer_the_same(built, tmp_path):
    old = _old_layout_copy(built, tmp_path / "old")
    with duckdb.connect(str(old.cfg.store_path), read_only=True) as con:
        assert con.execute("SELECT max(version) FROM schema_migration").fetchone()[0] == 6  # type: ignore[index]
        assert con.execute("SELECT count(*) FROM forwards WHERE as_of = DATE '2031-11-28'").fetchone()[0] == 1  # type: ignore[index]
    with writer(old.cfg.store_path):  # a writer brings the schema up to date
        pass
    with duckdb.connect(str(old.cfg.store_path), read_only=True) as con:
        assert con.execute("SELECT max(version) FROM schema_migration").fetchone()[0] >= 7  # type: ignore[index]
        con.execute(f"ATTACH '{built.cfg.store_path}' AS ref (READ_ONLY)")
        for view in VIEWS:
            extra, missing, n = _differences(con, view, "ref")
            assert (extra, missing) == (0, 0), view
            assert n > 0, view
        # the orphan row belonged to no built day: it is gone
        assert con.execute("SELECT count(*) FROM forwards WHERE as_of = DATE '2031-11-28'").fetchone()[0] == 0  # type: ignore[index]
        same = con.execute(f"SELECT count(*) FROM (SELECT {OLD_BUILT_DAY} FROM built_day EXCEPT ALL "
                           f"SELECT {OLD_BUILT_DAY} FROM ref.built_day)").fetchone()[0]  # type: ignore[index]
        assert same == 0
        keys = con.execute("SELECT count(*), count(DISTINCT build_key), count(build_key) FROM built_day").fetchone()
        assert keys[0] == keys[1] == keys[2]  # type: ignore[index]
        names = {r[0]: r[1] for r in con.execute(
            "SELECT table_name, table_type FROM information_schema.tables WHERE table_catalog = current_database()"
        ).fetchall()}
        assert names["forward_built"] == "VIEW" and names["zero_rate_built"] == "VIEW"


def test_a_migrated_store_builds_on_like_a_fresh_one(built, tmp_path):
    later = _days("2032-02-02", "2032-02-06")
    later_rates = _rates(len(later), 4)
    migrated = _old_layout_copy(built, tmp_path / "migrated")
    fresh = make_project(tmp_path / "fresh", TOML)
    _write_month(fresh, "zc_all.csv", DAYS, RATES)
    run_checks(fresh.cfg)
    run_build(fresh.cfg)
    run_build(fresh.cfg, method="linear_zero")
    restated = RATES[5].copy()
    restated[2] += 0.1
    for p in (migrated, fresh):
        _write_month(p, "zc_feb.csv", later, later_rates)
        _write_month(p, "zc_restated.csv", DAYS[5:6], restated[None, :])
        s = run_build(p.cfg)
        assert s.curves["zc"]["days_built"] == len(later) + 1  # the new days and the restated one only
    with duckdb.connect(str(migrated.cfg.store_path), read_only=True) as con:
        con.execute(f"ATTACH '{fresh.cfg.store_path}' AS ref (READ_ONLY)")
        for view in ("forwards", "zero_rates", "pending_forwards"):
            extra, missing, _ = _differences(con, view, "ref")
            assert (extra, missing) == (0, 0), view
        # new keys never reuse a migrated one
        dup = con.execute("SELECT count(*) - count(DISTINCT build_key) FROM built_day").fetchone()[0]  # type: ignore[index]
        assert dup == 0
    before = migrated.sql("SELECT * FROM forwards ORDER BY as_of, start_months, tenor_months")
    s = run_build(migrated.cfg, rebuild=True)
    assert s.curves["zc"]["days_built"] == len(DAYS) + len(later)
    after = migrated.sql("SELECT * FROM forwards ORDER BY as_of, start_months, tenor_months")
    assert after.equals(before)
    assert migrated.value("SELECT count(*) FROM forward_point") == len(after) + migrated.value(
        "SELECT count(*) FROM forward_built WHERE scenario <> 'official'")


def test_a_day_released_from_a_hold_is_built_although_its_quotes_are_old(built, tmp_path):
    p = clone_project(built, tmp_path / "held")
    bad = _days("2032-02-02", "2032-02-03")
    rates = _rates(2, 9)
    rates[1, 3] = 250.0  # 250 % : out of range, a reject finding holds the day back
    _write_month(p, "zc_feb.csv", bad, rates)
    run_checks(p.cfg)
    assert p.value("SELECT count(*) FROM held_days WHERE as_of = DATE '2032-02-03'") == 1
    s = run_build(p.cfg)
    assert (s.curves["zc"]["days_built"], s.curves["zc"]["held"]) == (1, 1)
    _write_month(p, "zc_mar.csv", _days("2032-03-01", "2032-03-01"), _rates(1, 10))
    assert run_build(p.cfg).curves["zc"]["days_built"] == 1  # built since: the held day's quotes are older
    accept_day(p.cfg, "zc", "2032-02-03", "checked against the source")
    s = run_build(p.cfg)
    assert s.curves["zc"]["days_built"] == 1
    assert p.value("SELECT count(*) FROM forwards WHERE as_of = DATE '2032-02-03'") == 9
    assert run_build(p.cfg).curves["zc"]["days_built"] == 0


@pytest.mark.parametrize("method", ["linear_zero", "monotone_convex", "cubic_zero", "log_linear_discount"],
                         ids=["linear_zero", "monotone_convex", "cubic_zero", "log_linear_discount"])
def test_shape_findings_on_the_needed_days_are_those_of_the_full_grid(method):
    """Curves with falling zero rates (negative forwards) among normal ones: the findings of the build
    step, which evaluates the grid only where no guarantee holds, equal the checks on every day."""
    cal = BusinessCalendar.of(["Sat", "Sun"], [])
    cfg = CurveConfig(name="c", quote="zero", compounding="annual", calendar=cal)
    rng = np.random.default_rng(11)
    days = np.datetime64("2033-03-01") + np.arange(40).astype("timedelta64[D]")
    q = 0.03 + 0.004 * np.arange(len(TENORS))[None, :] / len(TENORS) + rng.normal(0, 0.0005, (40, len(TENORS)))
    q[::7, 4] -= 0.04    # 1Y -> 2Y falls steeply
    q[3::9, 1] += 0.03   # a hump at 3M
    q[5, 2] = np.nan     # another pattern of tenors
    cs = build_curves(days, TENORS, q, cfg, method=method)
    grid_times = np.r_[np.arange(1, 25), np.arange(27, 63, 3)] / 12.0
    grid = np.tile(grid_times, (len(days), 1))
    full = curve_shape_checks(days[cs.ok], grid[cs.ok], cs.discount(grid)[cs.ok], cfg)
    mine = _shape_findings(cs, grid_times, cfg)
    assert len(full) > 0
    key = ["as_of", "check_name"]
    assert mine is not None
    a = full.sort_values(key, ignore_index=True)
    b = mine.sort_values(key, ignore_index=True)
    assert list(a["as_of"]) == list(b["as_of"]) and list(a["check_name"]) == list(b["check_name"])
    assert list(a["detail"]) == list(b["detail"])
