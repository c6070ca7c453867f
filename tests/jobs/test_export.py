"""``afterward export``: hive-partitioned Parquet by (curve, year) that DuckDB reads back row for row."""

from __future__ import annotations

import json

import duckdb
import pytest

from flows.audit_step import run_audit
from flows.build_step import run_build
from flows.check_step import run_checks
from flows.export_step import EXPORT_VIEWS, MARKER, export_views
from flows.realize_step import run_realize
from flows.steps import UserError, load_files
from warehouse.connect import reader

pytestmark = pytest.mark.timeout(120)


@pytest.fixture(scope="module")
def store(demo_files, tmp_path_factory):  # noqa: ANN001, ANN201
    """Two demo years through every step (no Prefect: export needs only the store)."""
    from pipeline.config import load_config
    from pipeline.demo_market import demo_config_toml

    root = tmp_path_factory.mktemp("export")
    (root / "afterward.toml").write_text(demo_config_toml(), encoding="utf-8")
    cfg = load_config(root / "afterward.toml")
    load_files(cfg, [p for p in demo_files.files if any(f"_{y}-" in p.name for y in (2012, 2013))])
    run_checks(cfg)
    run_build(cfg)
    run_realize(cfg)
    run_audit(cfg)
    return cfg


def view_rows(cfg, view: str) -> list[tuple]:  # noqa: ANN001
    with reader(cfg.store_path) as con:
        return con.sql(f"SELECT * FROM {view} ORDER BY ALL").fetchall()


def parquet_rows(path, columns: list[str]) -> list[tuple]:  # noqa: ANN001
    cols = ", ".join(columns)
    return duckdb.sql(f"SELECT {cols} FROM read_parquet('{path}', hive_partitioning = true) ORDER BY ALL").fetchall()


def view_columns(cfg, view: str) -> list[str]:  # noqa: ANN001
    with reader(cfg.store_path) as con:
        return [r[0] for r in con.execute(f"DESCRIBE {view}").fetchall()]


def test_every_view_reads_back_row_for_row(store, tmp_path):
    written = export_views(store, tmp_path / "out")
    assert len(written) == len(EXPORT_VIEWS)
    for view, (parts, _date) in EXPORT_VIEWS.items():
        cols = view_columns(store, view)
        pattern = tmp_path / "out" / view / ("**/*.parquet" if parts else "data.parquet")
        expected = view_rows(store, view)
        if view in ("quotes", "forwards", "outcomes", "audit_summary", "loads"):
            assert len(expected) > 0, view
        assert parquet_rows(pattern, cols) == expected, view


@pytest.mark.parametrize("view", ["forwards", "zero_rates", "outcomes", "quotes"], ids=str)
def test_partitions_are_by_curve_and_year_with_the_columns_inside_the_files(store, tmp_path, view):
    export_views(store, tmp_path / "out")
    folder = tmp_path / "out" / view
    with reader(store.store_path) as con:
        expected = con.sql(f"SELECT curve, year(as_of) AS y, count(*) FROM {view} GROUP BY ALL ORDER BY ALL").fetchall()
    found = []
    for curve_dir in sorted(folder.iterdir()):
        for year_dir in sorted(curve_dir.iterdir()):
            curve, year = curve_dir.name.split("=")[1], int(year_dir.name.split("=")[1])
            assert curve_dir.name.startswith("curve=") and year_dir.name.startswith("year=")
            # without hive_partitioning: the partition columns are in the files themselves
            inside = duckdb.sql(f"SELECT DISTINCT curve, year FROM read_parquet('{year_dir}/*.parquet', "
                                "hive_partitioning = false)").fetchall()
            assert inside == [(curve, year)]
            n = duckdb.sql(f"SELECT count(*) FROM read_parquet('{year_dir}/*.parquet')").fetchall()[0][0]
            found.append((curve, year, n))
    assert found == expected


def test_a_second_export_replaces_the_first_without_duplicates(store, tmp_path):
    out = tmp_path / "out"
    export_views(store, out)
    (out / "forwards" / "curve=govt" / "year=1999").mkdir()  # a partition the new export does not write
    export_views(store, out)
    assert not (out / "forwards" / "curve=govt" / "year=1999").exists()
    cols = view_columns(store, "forwards")
    assert parquet_rows(out / "forwards" / "**/*.parquet", cols) == view_rows(store, "forwards")
    manifest = json.loads((out / MARKER).read_text())
    assert manifest["views"]["forwards"]["rows"] == len(view_rows(store, "forwards"))
    # nothing is left behind beside the target
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


def test_a_folder_that_is_not_an_export_is_refused_and_left_alone(store, tmp_path):
    out = tmp_path / "precious"
    out.mkdir()
    (out / "notes.txt").write_text("keep me")
    with pytest.raises(UserError, match="not empty"):
        export_views(store, out)
    assert (out / "notes.txt").read_text() == "keep me"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["precious"]
