"""The demo store end to end: what the invented market's feed leaves in the store after each step.

Independent reference throughout: the demo's manifest (pipeline.demo.write_demo_inbox), i.e.
the clean generated quotes and the list of defects planted in the files, and the files themselves
read back with pyarrow / plain text. Recomputations are plain pandas on what the store holds;
statistics are checked against statsmodels 0.15 (tests/REFERENCES.md #20).
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pyarrow.parquet as pq
import pytest
import statsmodels.api as sm
from statsmodels.tsa.stattools import diebold_mariano_test

from flows.build_step import run_build
from flows.check_step import accept_day
from pipeline.demo import GOVT_TENORS, SWAP_TENORS, expected_forward_error_bp
from tests.e2e.stores import clone_project

TENORS = {"govt": GOVT_TENORS, "swap": SWAP_TENORS}


def _day(d: dt.date | None) -> pd.Timestamp:
    assert d is not None
    return pd.Timestamp(d)


def _defect(demo, kind: str):
    found = demo.manifest.defects_of(kind)
    assert found, f"the demo planted no {kind}"
    return found[0]


def _expected_quotes(demo, curve: str) -> pd.DataFrame:
    """What the store's current quotes must be, built from the manifest alone.

    govt: the clean par yields as written (percent, 4 decimals) turned into decimals, with each
    planted defect applied as the feed delivered it and as the contract says it must end up
    (rejected cells absent, the stale day a copy, the units error kept for the checks to catch,
    the restated day at its corrected values). swap: the clean decimals rounded to 1e-8.
    """
    clean = demo.manifest.clean[curve]
    if curve == "swap":
        return pd.DataFrame(np.round(clean.to_numpy(), 8), index=clean.index, columns=clean.columns)
    exp = pd.DataFrame(np.round(clean.to_numpy() * 100.0, 4) / 100.0, index=clean.index, columns=clean.columns)
    stale = _day(_defect(demo, "stale_curve").date)
    exp.loc[stale] = exp.iloc[exp.index.get_loc(stale) - 1].to_numpy()
    units = _defect(demo, "wrong_units")
    exp.loc[_day(units.date), units.tenor] = units.written_value / 100.0
    for kind in ("out_of_range", "missing_tenor", "conflicting_duplicate"):
        d = _defect(demo, kind)
        exp.loc[_day(d.date), d.tenor] = np.nan
    return exp.drop(index=_day(_defect(demo, "missing_day").date))


# ------------------------------------------------------------------------------------ issue 2: load

@pytest.mark.parametrize("curve", ["govt", "swap"])
def test_quotes_hold_each_curves_full_history(demo_loaded, curve):
    """Every day and every value of both curves, against the manifest's clean frames."""
    q = demo_loaded.sql("SELECT as_of, tenor, rate FROM quotes WHERE curve = ?", [curve])
    got = q.pivot(index="as_of", columns="tenor", values="rate")
    got.index = pd.DatetimeIndex(got.index.astype("datetime64[ns]"))
    exp = _expected_quotes(demo_loaded, curve)
    exp.index = pd.DatetimeIndex(exp.index.astype("datetime64[ns]"))
    got = got.reindex(columns=list(TENORS[curve]))
    missing = 1 if curve == "govt" else 0
    assert len(got) == len(demo_loaded.manifest.clean[curve]) - missing
    assert got.index.equals(exp.index)
    assert (got.isna().to_numpy() == exp.isna().to_numpy()).all()
    diff = np.nanmax(np.abs(got.to_numpy() - exp.to_numpy()))
    assert diff < 1e-12, f"largest difference from the manifest: {diff}"


def test_garbled_line_is_in_rejected_rows_with_its_reason(demo_loaded):
    g = _defect(demo_loaded, "garbled_line")
    rows = demo_loaded.sql(
        "SELECT r.line, r.raw, r.reason, x.check_name FROM rejected_rows r "
        "JOIN rejected_row x USING (load_id, line) WHERE r.source_file LIKE ?", [f"%/{g.file}"])
    assert len(rows) == 1
    row = rows.iloc[0]
    assert (row["line"], row["raw"]) == (g.line, g.written_value)
    assert row["reason"].startswith("unparseable") and "2003-07-1?" in row["reason"]
    assert row["check_name"] == "unparseable"


def test_verbatim_duplicate_line_is_rejected_cell_by_cell(demo_loaded):
    d = _defect(demo_loaded, "duplicate_row")
    rows = demo_loaded.sql("SELECT line, raw, reason FROM rejected_rows WHERE source_file LIKE ?", [f"%/{d.file}"])
    assert len(rows) == len(GOVT_TENORS)  # one rejected row per quote on the repeated line
    assert (rows["line"] == d.line).all() and (rows["raw"] == d.written_value).all()
    assert rows["reason"].str.startswith("duplicate: repeats line").all()


def test_restated_day_keeps_both_versions(demo_loaded):
    restated = {d.tenor: d for d in demo_loaded.manifest.defects_of("restated_value")}
    day = _defect(demo_loaded, "restated_value").date
    hist = demo_loaded.sql(
        "SELECT tenor, rate, source_file, superseded_at, recorded_at FROM quote_history "
        "WHERE curve = 'govt' AND as_of = ? ORDER BY tenor, recorded_at", [day])
    for tenor, d in restated.items():
        versions = hist[hist["tenor"] == tenor]
        assert len(versions) == 2, tenor
        first, second = versions.iloc[0], versions.iloc[1]
        assert first["rate"] == pytest.approx(d.written_value / 100.0, abs=1e-12)
        assert second["rate"] == pytest.approx(d.true_value / 100.0, abs=1e-12)
        assert first["source_file"].endswith(d.file)
        assert second["source_file"] == str(demo_loaded.manifest.restatement_file.resolve())
        assert pd.notna(first["superseded_at"]) and pd.isna(second["superseded_at"])
        assert first["superseded_at"] == second["recorded_at"]
    # the tenors re-sent unchanged add no version
    others = hist[~hist["tenor"].isin(list(restated))]
    assert others.groupby("tenor").size().eq(1).all() and len(others) == len(GOVT_TENORS) - len(restated)


def _expected_rows_read(path) -> int:
    """Rows a file holds, counted without the project's readers: a parquet file's rows; a wide
    CSV's non-empty cells, a line whose date is not a date counting as one row."""
    if path.suffix == ".parquet":
        return pq.ParquetFile(path).metadata.num_rows
    n = 0
    for line in path.read_text().splitlines()[1:]:
        date, *cells = line.split(",")
        try:
            dt.date.fromisoformat(date)
        except ValueError:
            n += 1
            continue
        n += sum(1 for c in cells if c.strip())
    return n


def test_every_load_balances_and_counts_every_row(demo_loaded):
    loads = demo_loaded.sql("SELECT l.*, g.file_name, g.rows_unchanged FROM loads l JOIN load_log g USING (load_id)")
    assert len(loads) == len(demo_loaded.manifest.files) == 721
    assert (loads["status"] == "loaded").all()
    # the contract's identity, as a data test: rows that break it
    broken = demo_loaded.sql("SELECT * FROM loads WHERE rows_read <> rows_accepted + rows_rejected")
    assert broken.empty
    by_name = loads.set_index("file_name")
    for path in demo_loaded.manifest.files:
        assert by_name.loc[path.name, "rows_read"] == _expected_rows_read(path), path.name
    # accepted rows that were new or revised are the versions each load wrote
    written = demo_loaded.sql("SELECT load_id, count(*) AS n FROM quote_history h "
                              "JOIN load_log l ON h.source_file = l.source_file GROUP BY load_id")
    merged = loads.merge(written, on="load_id", how="left").fillna({"n": 0})
    assert (merged["rows_accepted"] - merged["rows_unchanged"] == merged["n"]).all()


# ---------------------------------------------------------------------------------- issue 3: checks

# defect kind -> (check_name, severity or None for "any") in `findings`
FINDING_OF_DEFECT = {
    "missing_day": ("missing_day", "warn"),
    "missing_tenor": ("missing_tenor", "warn"),
    "conflicting_duplicate": ("duplicate", "warn"),
    "stale_curve": ("stale_curve", "warn"),
    "wrong_units": ("jump", "reject"),
    "out_of_range": ("out_of_range", "reject"),
}


@pytest.mark.parametrize("kind", list(FINDING_OF_DEFECT), ids=list(FINDING_OF_DEFECT))
def test_each_defect_raises_its_finding(demo_checked, kind):
    d = _defect(demo_checked, kind)
    check, severity = FINDING_OF_DEFECT[kind]
    f = demo_checked.sql("SELECT * FROM findings WHERE curve = 'govt' AND as_of = ? AND check_name = ?",
                         [d.date, check])
    assert len(f) >= 1, f"{check} did not fire on {d.date}"
    if d.tenor is not None and kind != "missing_day":
        assert d.tenor in set(f["tenor"]), f
    assert set(f["severity"]) == {severity}


@pytest.mark.parametrize(("kind", "check"), [("garbled_line", "unparseable"), ("duplicate_row", "duplicate")],
                         ids=["unparseable", "verbatim-duplicate"])
def test_row_level_defects_are_named_in_rejected_rows(demo_checked, kind, check):
    """A line without a readable date has no day to hang a finding on: its rule is named in rejected_rows."""
    d = _defect(demo_checked, kind)
    rows = demo_checked.sql("SELECT check_name FROM rejected_row WHERE source_file LIKE ? AND line = ?",
                            [f"%/{d.file}", d.line])
    assert len(rows) >= 1 and set(rows["check_name"]) == {check}


def test_tightening_inverts_the_curve_for_about_a_year(demo_checked):
    ep = demo_checked.sql("SELECT * FROM inversion_episodes WHERE curve = 'govt' AND short_tenor = '3M' "
                          "AND long_tenor = '10Y' ORDER BY days DESC LIMIT 1").iloc[0]
    episode = demo_checked.manifest.market.episode
    assert pd.Timestamp(ep["first_day"]) > pd.Timestamp(episode.tightening_start)
    assert pd.Timestamp(ep["first_day"]).year == 2001 and ep["days"] >= 200
    n = demo_checked.value("SELECT count(*) FROM findings WHERE curve = 'govt' AND check_name = 'inversion' "
                           "AND as_of BETWEEN ? AND ?", [ep["first_day"], ep["last_day"]])
    assert n >= ep["days"]


def test_no_finding_without_a_defect(demo_checked):
    """Apart from inversions (a market fact, severity info) every finding sits on a planted defect
    (or the day after the units error, when the rate moves back)."""
    planted = {d.date for d in demo_checked.manifest.defects if d.kind not in ("restatement",)}
    units = _defect(demo_checked, "wrong_units").date
    f = demo_checked.sql("SELECT curve, as_of, check_name, severity FROM findings WHERE check_name <> 'inversion'")
    stray = f[~f["as_of"].isin(planted)]
    assert set(stray["curve"]) <= {"govt"}
    assert [(r.as_of, r.check_name, r.severity) for r in stray.itertuples()] == [
        (units + dt.timedelta(days=1), "jump", "info")
    ]
    held = demo_checked.sql("SELECT curve, as_of FROM held_days ORDER BY as_of")
    assert [tuple(r) for r in held.itertuples(index=False)] == [
        ("govt", units), ("govt", _defect(demo_checked, "out_of_range").date)]


@pytest.mark.parametrize("pair", [("3M", "10Y"), ("2Y", "10Y")], ids=["3M-10Y", "2Y-10Y"])
@pytest.mark.parametrize("curve", ["govt", "swap"])
def test_inversion_episodes_match_a_plain_pandas_computation(demo_checked, curve, pair):
    """Independent computation: plain pandas runs of (long < short) over the days both are quoted."""
    short, long = pair
    q = demo_checked.sql("SELECT as_of, tenor, rate FROM quotes WHERE curve = ? AND tenor IN (?, ?)",
                         [curve, short, long])
    wide = q.pivot(index="as_of", columns="tenor", values="rate").sort_index().dropna()
    spread = wide[long] - wide[short]
    inverted = spread < 0
    run = (inverted != inverted.shift()).cumsum()
    mine = (pd.DataFrame({"spread": spread, "run": run, "day": wide.index})[inverted]
            .groupby("run").agg(first_day=("day", "min"), last_day=("day", "max"), days=("day", "size"),
                                deepest_bp=("spread", "min")))
    mine["deepest_bp"] *= 1e4
    got = demo_checked.sql("SELECT first_day, last_day, days, deepest_bp FROM inversion_episodes "
                           "WHERE curve = ? AND short_tenor = ? AND long_tenor = ? ORDER BY first_day",
                           [curve, short, long])
    assert len(got) == len(mine) > 0
    assert list(got["first_day"]) == list(mine["first_day"])
    assert list(got["last_day"]) == list(mine["last_day"])
    assert list(got["days"]) == list(mine["days"])
    # the store keeps depths rounded to 1e-6 bp
    np.testing.assert_allclose(got["deepest_bp"], mine["deepest_bp"], rtol=0, atol=1e-6)


# --------------------------------------------------------------------------- issue 3/4: held, accept

def test_units_defect_day_is_held_out_of_build(demo_done):
    units = _defect(demo_done, "wrong_units").date
    assert demo_done.value("SELECT count(*) FROM held_days WHERE curve = 'govt' AND as_of = ?", [units]) == 1
    for view in ("zero_rates", "forwards"):
        assert demo_done.value(f"SELECT count(*) FROM {view} WHERE curve = 'govt' AND as_of = ?", [units]) == 0
    # every other observed day is built
    observed = demo_done.value("SELECT count(DISTINCT as_of) FROM quotes WHERE curve = 'govt'")
    built = demo_done.value("SELECT count(*) FROM built_day WHERE curve = 'govt' AND scenario = 'official'")
    assert built == observed - 2


def test_accepting_the_units_day_lets_build_take_it(demo_done, tmp_path):
    units = _defect(demo_done, "wrong_units").date
    copy = clone_project(demo_done, tmp_path / "accepted")
    n = accept_day(copy.cfg, "govt", str(units), "checked against the issuer's release")
    assert n == 1
    acc = copy.sql("SELECT * FROM acceptance")
    assert len(acc) == 1 and acc.iloc[0]["accepted_by"] and pd.notna(acc.iloc[0]["accepted_at"])
    assert copy.value("SELECT count(*) FROM held_days WHERE curve = 'govt' AND as_of = ?", [units]) == 0
    summary = run_build(copy.cfg, "govt")
    assert summary.curves["govt"]["days_built"] == 1  # incremental: only the accepted day
    assert copy.value("SELECT count(*) FROM zero_rates WHERE curve = 'govt' AND as_of = ?", [units]) == len(
        GOVT_TENORS)
    assert copy.value("SELECT count(*) FROM forwards WHERE curve = 'govt' AND as_of = ?", [units]) == 7 * 4


# ------------------------------------------------------------------------------- issue 5: the audit

@pytest.mark.parametrize(("curve", "compounding"), [("govt", "semiannual"), ("swap", "annual")], ids=["govt", "swap"])
def test_demo_audit_recovers_the_known_term_premium(demo_done, curve, compounding):
    """The demo model's premium (expected_forward_error_bp: continuous on the curve's day count,
    scaled to first order to the curve's own compounding, in which the audit measures errors) lies
    inside each horizon's 95 % HAC band.

    The Bartlett band with h-1 lags under-covers for strongly overlapping forecasts (the helper who
    wrote the audit measured about 89 % coverage on the model), so we require >= 80 % of the
    horizons inside +/-1.96 se and every horizon inside +/-3 se; on the default seed all are inside.
    """
    a = demo_done.sql("SELECT start_months, tenor_months, n, mean_error_bp, hac_se_bp FROM audit_result "
                      "WHERE curve = ? AND regime = 'all' AND start_months > 0", [curve])
    assert len(a) == 6 * 4
    expected = np.array([expected_forward_error_bp(s, m, curve=curve, compounding=compounding)
                         for s, m in zip(a["start_months"], a["tenor_months"], strict=True)])
    z = (a["mean_error_bp"].to_numpy() - expected) / a["hac_se_bp"].to_numpy()
    assert np.isfinite(z).all()
    assert np.mean(np.abs(z) <= 1.96) >= 0.8, z
    assert np.all(np.abs(z) <= 3.0), z
    # and the premium is a premium: forwards above the realised rate on average for every start > 0
    assert (a["mean_error_bp"] > 0).all()


def test_demo_forwards_starting_today_have_no_error(demo_done):
    a = demo_done.sql("SELECT max(abs(mean_error_bp)) FROM audit_result WHERE start_months = 0")
    assert a.iloc[0, 0] < 1e-9


def test_audit_figures_equal_statsmodels_on_the_stored_outcomes(demo_done):
    """hac_t, DM (Harvey-Leybourne-Newbold form) and the Mincer-Zarnowitz Wald test of one horizon,
    recomputed by statsmodels 0.15 from the outcomes the store holds (tests/REFERENCES.md #19, #20)."""
    s, m = 12, 12
    row = demo_done.sql("SELECT * FROM audit_result WHERE curve = 'govt' AND start_months = ? AND tenor_months = ? "
                        "AND regime = 'all'", [s, m]).iloc[0]
    o = demo_done.sql("SELECT * FROM outcomes WHERE curve = 'govt' AND start_months = ? AND tenor_months = ? "
                      "ORDER BY as_of", [s, m])
    n = len(o)
    assert row["n"] == n
    lags = int(row["lags"])
    # the overlap: about one year of business days between a forecast and its target
    assert 240 <= lags <= 265
    h = lags + 1
    e, rw = o["error_bp"].to_numpy(), o["rw_error_bp"].to_numpy()
    real, fwd, spot = (o[c].to_numpy() for c in ("realized_rate", "forward_rate", "spot_rate"))
    hac = {"cov_type": "HAC", "cov_kwds": {"maxlags": lags}}
    t = sm.OLS(e, np.ones(n)).fit(**hac)
    assert row["mean_error_bp"] == pytest.approx(t.params[0], rel=1e-12)
    assert row["hac_t"] == pytest.approx(t.tvalues[0], rel=1e-8)
    dm = diebold_mariano_test(real, fwd, spot, lags=lags, harvey_adj=True, horizon=h)
    assert row["dm_stat"] == pytest.approx(dm.statistic, rel=1e-8)
    assert row["dm_pvalue"] == pytest.approx(dm.pvalue, rel=1e-6, abs=1e-12)
    # ... and from Diebold & Mariano's definition with the HLN (1997) factor: HAC t of e^2 - rw^2
    d = sm.OLS(e**2 - rw**2, np.ones(n)).fit(**hac)
    assert row["dm_stat"] == pytest.approx(np.sqrt((n + 1 - 2 * h + h * (h - 1) / n) / n) * d.tvalues[0], rel=1e-8)
    mz = sm.OLS(real, sm.add_constant(fwd)).fit(**hac)
    assert row["mz_alpha"] == pytest.approx(mz.params[0], rel=1e-8, abs=1e-14)
    assert row["mz_beta"] == pytest.approx(mz.params[1], rel=1e-8)
    wald = mz.wald_test((np.eye(2), np.array([0.0, 1.0])), use_f=False, scalar=True)
    assert row["mz_pvalue"] == pytest.approx(float(wald.pvalue), rel=1e-6, abs=1e-300)


def test_a_held_day_counts_as_not_observed(demo_done):
    """Forwards targeting the units-error day are realised on the next observed day (tolerance rule),
    never on the held day's quotes."""
    units = _defect(demo_done, "wrong_units").date
    o = demo_done.sql("SELECT DISTINCT observed_on FROM outcomes WHERE curve = 'govt' AND target_date = ?", [units])
    assert len(o) == 1 and o.iloc[0, 0] == units + dt.timedelta(days=1)
    assert demo_done.value("SELECT count(*) FROM outcomes WHERE curve = 'govt' AND observed_on = ?", [units]) == 0
