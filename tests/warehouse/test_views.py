"""Every view of the query surface has one home: ``sql/views.sql`` defines each once, with its grain, and a
new store holds exactly those views (the migrations' older definitions are history)."""

from __future__ import annotations

import re

from warehouse.connect import writer
from warehouse.schema import VIEWS_FILE, sql_dir

DEFINITION = re.compile(r"((?:--[^\n]*\n)*)CREATE OR REPLACE (VIEW|MACRO) (\w+)")


def test_views_sql_defines_each_view_once_with_its_grain_and_the_store_has_exactly_those(tmp_path):
    text = (sql_dir() / VIEWS_FILE).read_text(encoding="utf-8")
    found = DEFINITION.findall(text)
    names = [name for _, _, name in found]
    assert len(names) == len(set(names)), sorted(n for n in names if names.count(n) > 1)
    for comment, kind, name in found:
        if kind == "VIEW":
            assert "-- one row per" in comment, name
    with writer(tmp_path / "s.duckdb") as con:
        views = {r[0] for r in con.execute("SELECT view_name FROM duckdb_views() WHERE NOT internal").fetchall()}
        macros = {r[0] for r in con.execute("SELECT DISTINCT function_name FROM duckdb_functions() "
                                            "WHERE function_type IN ('macro', 'table_macro') AND NOT internal")
                  .fetchall()}
    assert views == {n for _, k, n in found if k == "VIEW"}
    assert {n for _, k, n in found if k == "MACRO"} <= macros


def test_a_changed_views_file_is_applied_again(tmp_path):
    path = tmp_path / "s.duckdb"
    with writer(path) as con:
        con.execute("CREATE OR REPLACE VIEW quotes AS SELECT 1 AS x")   # a store whose view drifted
        con.execute("UPDATE schema_views SET sha256 = 'older'")
    with writer(path) as con:
        assert "curve" in [d[0] for d in con.execute("SELECT * FROM quotes LIMIT 0").description]
