"""sql/014: the overlap-honest columns of the stored audit and of ``audit_summary``, on real DuckDB files."""

from __future__ import annotations

import duckdb
import numpy as np
import pandas as pd

from pipeline.audit import OVERLAP_COLUMNS, summarize
from pipeline.audit.refresh import PREMIUM_COLUMNS, finish_summary
from tests.pipeline.test_audit import make_outcomes
from warehouse.audit import write_results
from warehouse.connect import reader, writer
from warehouse.schema import SCHEMA_FILES

# the contract's columns of audit_summary, in its order (/work/shared/CONTRACT.md, "SQL views")
CONTRACT = ["curve", "start_months", "tenor_months", "regime", "n", "first_as_of", "last_as_of", "mean_error_bp",
            "rmse_bp", "mae_bp", "hac_t", "rw_rmse_bp", "rmse_ratio", "dm_stat", "dm_pvalue", "mz_alpha", "mz_beta",
            "mz_pvalue", "fb_beta", "fb_beta_se", "fb_r2", "hit_rate"]


def test_the_view_keeps_the_contract_first_and_appends_the_new_columns(tmp_path):
    with writer(tmp_path / "s.duckdb") as con:
        cols = [d[0] for d in con.execute("SELECT * FROM audit_summary LIMIT 0").description]
    assert cols == CONTRACT + list(OVERLAP_COLUMNS)


def test_an_older_store_gains_the_columns_and_recomputes_its_audit(tmp_path):
    """A store at schema 13 with a stored audit row and running state: after the migration the row has
    n_effective = n / (lags + 1) and the flag, its p-values are NULL (not guessed) and the derived
    running state is gone, so that the next refresh recomputes the curve whole."""
    path = tmp_path / "old.duckdb"
    con = duckdb.connect(str(path))
    con.execute("CREATE TABLE schema_migration (version INTEGER PRIMARY KEY, name VARCHAR NOT NULL, "
                "applied_at TIMESTAMP NOT NULL DEFAULT current_timestamp)")
    for version, p in SCHEMA_FILES():
        if version < 14:
            con.execute(p.read_text(encoding="utf-8"))
            con.execute("INSERT INTO schema_migration (version, name) VALUES (?, ?)", [version, p.name])
    con.execute("INSERT INTO audit_result (curve, start_months, tenor_months, regime, n, lags, computed_at) VALUES "
                "('zc', 12, 60, 'all', 489, 249, TIMESTAMP '2031-01-01'), "
                "('zc', 3, 12, 'all', 3000, 62, TIMESTAMP '2031-01-01')")
    con.execute("INSERT INTO audit_state_curve VALUES ('zc', 2, 30, '', NULL, NULL, 0, NULL, TIMESTAMP '2031-01-01')")
    con.close()
    with writer(path):  # a writer brings the schema up to date
        pass
    with reader(path) as con:
        got = con.execute("SELECT start_months, n_effective, indicative, hac_pvalue, dm_pvalue_fixed_b "
                          "FROM audit_summary ORDER BY start_months").fetchall()
        assert got == [(3, 3000 / 63, False, None, None), (12, 489 / 250, True, None, None)]
        assert con.execute("SELECT count(*) FROM audit_state_curve").fetchone()[0] == 0  # type: ignore[index]


def test_stored_overlap_columns_read_back_through_the_view(tmp_path):
    o = make_outcomes(2000, 250, 10.0, seed=3)
    summary = finish_summary(summarize(o), pd.Timestamp("2031-01-01"), pd.Timestamp("2031-01-02"))
    with writer(tmp_path / "s.duckdb") as con:
        write_results(con, "govt", summary, pd.DataFrame({c: [] for c in PREMIUM_COLUMNS}), None)
        view = con.execute("SELECT regime, n_effective, hac_pvalue, dm_pvalue_fixed_b, indicative "
                           "FROM audit_summary ORDER BY regime").df()
    want = summary.sort_values("regime").reset_index(drop=True)
    assert list(view["regime"]) == list(want["regime"])
    for c in ("n_effective", "hac_pvalue", "dm_pvalue_fixed_b"):
        np.testing.assert_array_equal(view[c].to_numpy(dtype=float), want[c].to_numpy(dtype=float), err_msg=c)
    assert list(view["indicative"]) == list(want["indicative"]) == [True] * len(want)  # 8 periods or fewer
