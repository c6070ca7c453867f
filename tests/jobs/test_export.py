"""``afterward export``: every stable view, read back by the readers users have.

The list of views is the contract's, written out here (the "SQL views" table of the project's
public contract, CONTRACT.md), not taken from the code: a view the export leaves out fails.
Each view is read back with four independent readers (pandas, pyarrow datasets, polars, DuckDB),
each with hive partitioning, and compared row for row with the store's view.
"""

from __future__ import annotations

import datetime as dt
import json
import math
from collections import Counter
from pathlib import Path

import duckdb
import pandas as pd
import polars as pl
import pyarrow as pa
import pyarrow.dataset as ds
import pyarrow.parquet as pq
import pytest

from flows.audit_step import run_audit
from flows.build_step import run_build
from flows.check_step import run_checks
from flows.compare_step import run_compare
from flows.export_step import MARKER, export_views
from flows.load_step import UserError, load_files
from flows.model_step import run_model
from flows.realize_step import run_realize
from tests.conftest import run_cli
from warehouse.connect import reader

pytestmark = pytest.mark.timeout(300)

# The contract's stable views (CONTRACT.md, "SQL views"; quotes_as_of is a table macro, not a view),
# each with the date column whose year partitions it, as the README's export section states; None:
# the view has no as-of date and is one file.
CONTRACT_VIEWS: dict[str, str | None] = {
    "quotes": "as_of",
    "quote_history": "as_of",
    "loads": None,
    "rejected_rows": None,
    "findings": "as_of",
    "inversion_episodes": "first_day",
    "zero_rates": "as_of",
    "forwards": "as_of",
    "outcomes": "as_of",
    "audit_summary": None,
    "term_premium": "as_of",
    "term_panel": "as_of",
    "excess_returns": "as_of",
    "eh_regressions": None,
    "model_term_premium": "as_of",
    "contender_outcomes": "as_of",
    "contender_scores": None,
    "contender_tests": None,
    "confidence_set": None,
}
PARTITIONED = [v for v, d in CONTRACT_VIEWS.items() if d]
READERS = ["pandas", "pyarrow", "polars", "duckdb"]


@pytest.fixture(scope="module")
def store(demo_files, tmp_path_factory):  # noqa: ANN001, ANN201
    """Three demo years through every step (no Prefect: export needs only the store). 2002-2003 hold the
    end of the demo's inversion episode and its garbled line; three years of month ends give the
    expectations-hypothesis regressions rows: every contract view has rows."""
    from pipeline.config import load_config
    from pipeline.demo import demo_config_toml

    root = tmp_path_factory.mktemp("export")
    (root / "afterward.toml").write_text(demo_config_toml(), encoding="utf-8")
    cfg = load_config(root / "afterward.toml")
    load_files(cfg, [p for p in demo_files.files if any(f"_{y}-" in p.name for y in (2002, 2003, 2004))])
    run_checks(cfg)
    run_build(cfg)
    run_realize(cfg)
    run_audit(cfg)
    run_model(cfg)
    run_compare(cfg)
    return cfg


@pytest.fixture(scope="module")
def exported(store):  # noqa: ANN001, ANN201
    """``afterward export`` run as a user runs it, in a subprocess, into a new folder."""
    out = Path(store.path).parent / "exported"
    proc = run_cli("export", "--to", str(out), cwd=Path(store.path).parent)
    assert proc.returncode == 0, proc.stderr
    assert "Traceback" not in proc.stdout + proc.stderr
    return out, proc


def _canon(value):  # noqa: ANN001, ANN202
    """One spelling per value across readers: NaN and null are both None (pandas cannot tell them apart);
    pandas' Timestamp becomes datetime."""
    if isinstance(value, float) and math.isnan(value):
        return None
    if isinstance(value, pd.Timestamp):
        return value.to_pydatetime()
    return value


def _rows(table: pa.Table, columns: list[str]) -> Counter:
    """The table's rows as a multiset of tuples in ``columns`` order (exported order is not a promise)."""
    table = table.select(columns)
    return Counter(tuple(_canon(r[c]) for c in columns) for r in table.to_pylist())


def _as_plain(table: pa.Table, schema: pa.Schema) -> pa.Table:
    """Cast a reader's table to the store's types: hive partition columns come back as dictionary strings
    (pandas), int32 (pyarrow) or int64 (polars, DuckDB); polars strings are large strings."""
    cols = []
    for f in schema:
        col = table[f.name]
        if pa.types.is_dictionary(col.type):
            col = col.cast(col.type.value_type)
        cols.append(col.cast(f.type))
    return pa.table(cols, schema=schema)


def _store_view(cfg, view: str) -> tuple[pa.Table, pa.Schema]:  # noqa: ANN001
    """The store's view, plus ``year`` from its date column (computed here in Python) when partitioned."""
    with reader(cfg.store_path) as con:
        table = con.sql(f"SELECT * FROM {view}").to_arrow_table()
    date_col = CONTRACT_VIEWS[view]
    if date_col:
        years = [d.year if isinstance(d, dt.date) else None for d in table[date_col].to_pylist()]
        table = table.append_column("year", pa.array(years, pa.int64()))
    return table, table.schema


def _read(how: str, folder: Path) -> pa.Table:
    if how == "pandas":  # pandas.read_parquet on the view's folder, as a user would
        return pa.Table.from_pandas(pd.read_parquet(folder), preserve_index=False)
    if how == "pyarrow":
        return ds.dataset(folder, format="parquet", partitioning="hive").to_table()
    if how == "polars":
        return pl.read_parquet(folder, hive_partitioning=True).to_arrow()
    path = str(folder / "**" / "*.parquet").replace("'", "''")
    return duckdb.sql(f"SELECT * FROM read_parquet('{path}', hive_partitioning = true)").to_arrow_table()


def test_every_contract_view_has_rows_in_the_store(store):
    # the readers' comparisons below are only meaningful on views with rows
    with reader(store.store_path) as con:
        counts = {v: con.execute(f"SELECT count(*) FROM {v}").fetchone()[0] for v in CONTRACT_VIEWS}
    assert all(counts.values()), counts


@pytest.mark.parametrize("how", READERS, ids=str)
@pytest.mark.parametrize("view", list(CONTRACT_VIEWS), ids=str)
def test_each_reader_reads_each_view_back_row_for_row(store, exported, view, how):
    out, _ = exported
    folder = out / view
    assert folder.is_dir(), f"{view} was not exported"
    expected, schema = _store_view(store, view)
    got = _as_plain(_read(how, folder), schema)
    assert got.num_rows == expected.num_rows
    assert _rows(got, schema.names) == _rows(expected, schema.names)


@pytest.mark.parametrize("view", PARTITIONED, ids=str)
def test_partition_columns_are_in_the_paths_only(store, exported, view):
    out, _ = exported
    folder = out / view
    files = sorted(folder.rglob("*.parquet"))
    assert files
    found = set()
    for f in files:
        rel = f.relative_to(folder).parts
        assert rel[0].startswith("curve=") and rel[1].startswith("year="), rel
        found.add((rel[0].removeprefix("curve="), int(rel[1].removeprefix("year="))))
        # the hive convention: a partition column is not repeated inside the file
        assert {"curve", "year"}.isdisjoint(pq.read_schema(f).names), f
    expected, _ = _store_view(store, view)
    assert found == {(r["curve"], r["year"]) for r in expected.select(["curve", "year"]).to_pylist()}


@pytest.mark.parametrize("view", [v for v, d in CONTRACT_VIEWS.items() if d is None], ids=str)
def test_views_without_a_date_are_one_file(exported, view):
    out, _ = exported
    assert [p.name for p in (out / view).iterdir()] == ["data.parquet"]


def test_the_command_says_what_it_wrote(store, exported):
    out, proc = exported
    for view, date_col in CONTRACT_VIEWS.items():
        layout = f"by curve and year of {date_col}" if date_col else "one file"
        assert f"{view}: " in proc.stdout and layout in proc.stdout.split(f"{view}: ", 1)[1].splitlines()[0]
    manifest = json.loads((out / MARKER).read_text())
    assert set(manifest["views"]) == set(CONTRACT_VIEWS)


def test_an_empty_view_reads_back_empty_with_its_columns(tmp_path):
    from pipeline.config import load_config
    from tests.conftest import SMALL_CONFIG

    (tmp_path / "afterward.toml").write_text(SMALL_CONFIG, encoding="utf-8")
    (tmp_path / "govt_2031-01.csv").write_text("date,3M,1Y,2Y,5Y,10Y\n2031-01-02,4.1,4.2,4.3,4.5,4.8\n")
    assert run_cli("load", "govt_2031-01.csv", cwd=tmp_path).returncode == 0
    proc = run_cli("export", "--to", "out", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    cfg = load_config(tmp_path / "afterward.toml")
    expected, schema = _store_view(cfg, "forwards")  # nothing built: no forwards
    assert expected.num_rows == 0
    for how in READERS[:3]:  # DuckDB's glob would need a partition folder to name; the others read the folder
        got = _read(how, tmp_path / "out" / "forwards")
        assert got.num_rows == 0 and set(got.column_names) == set(schema.names), how


def test_a_second_export_replaces_the_first_without_duplicates(store, tmp_path):
    out = tmp_path / "out"
    first = run_cli("export", "--to", str(out), cwd=Path(store.path).parent)
    assert first.returncode == 0, first.stderr
    (out / "forwards" / "curve=govt" / "year=1999").mkdir()  # a partition the new export does not write
    again = run_cli("export", "--to", str(out), cwd=Path(store.path).parent)
    assert again.returncode == 0, again.stderr
    assert "replacing the earlier export" in again.stdout
    assert not (out / "forwards" / "curve=govt" / "year=1999").exists()
    expected, schema = _store_view(store, "forwards")
    got = _as_plain(_read("pyarrow", out / "forwards"), schema)
    assert _rows(got, schema.names) == _rows(expected, schema.names)
    manifest = json.loads((out / MARKER).read_text())
    assert manifest["views"]["forwards"]["rows"] == expected.num_rows
    # nothing is left behind beside the target
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


def test_a_folder_that_is_not_an_export_is_refused_and_left_alone(store, tmp_path):
    out = tmp_path / "precious"
    out.mkdir()
    (out / "notes.txt").write_text("keep me")
    with pytest.raises(UserError, match="not empty"):
        export_views(store, out)
    proc = run_cli("export", "--to", str(out), cwd=Path(store.path).parent)
    assert proc.returncode == 1 and "not empty" in proc.stderr and "Traceback" not in proc.stderr
    assert (out / "notes.txt").read_text() == "keep me"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["precious"]
