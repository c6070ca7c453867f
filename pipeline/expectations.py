"""Row-level expectations on parsed quote rows, run with Great Expectations 1.x.

One expectation suite per curve, built from its :class:`~pipeline.config.CurveConfig`:

========================================  ======================================  ===============
expectation                               rule                                    check name
========================================  ======================================  ===============
``expect_column_values_to_not_be_null``   ``as_of``, ``tenor`` and ``rate`` parsed  ``unparseable``
``expect_column_values_to_be_in_set``     ``tenor`` is one of the curve's tenors  ``out_of_range``
``expect_column_values_to_be_between``    ``rate`` within the plausible band      ``out_of_range``
========================================  ======================================  ===============

The band is for decimals (the reader has already applied ``units``): -5 % .. +40 % for zero, par and
simple rates (negative rates are legal), and (0, 1.5] for discount factors. A row failing any
null-check is ``unparseable``; a row that parsed but breaks a domain rule is ``out_of_range``.

A failing row's reason is for the person who wrote the file, not for a reader of this module: it
quotes the number as the file wrote it and in the file's units, and the band in those units
(``out of range: rate 334 (percent) outside the plausible band -5 % to 40 % (tenor 3M)``); it
never names a Great Expectations rule (those stay in the run's ``summary``).

Great Expectations takes about 2.6 s to import, so it is imported on first use, and the context,
suites and validation definitions are built once per process and cached per curve configuration.
Nothing here prints, opens the store or keeps state beyond that cache.
"""

from __future__ import annotations

import hashlib
import threading
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from pipeline.config import CurveConfig
from pipeline.readers.options import UNIT_DIVISORS
from pipeline.wording import band_text, number_text, units_name

__all__ = ["RATE_BANDS", "RowValidation", "rate_band", "suite_name", "to_dates", "validate_rows"]

ROW_COLUMNS = ("line", "as_of", "tenor", "rate", "value", "raw")   # value: optional

# (min, max, strict_min) as decimals; see the module docstring for why these bounds.
RATE_BANDS: dict[str, tuple[float, float, bool]] = {
    "zero": (-0.05, 0.40, False),
    "par": (-0.05, 0.40, False),
    "simple": (-0.05, 0.40, False),
    "discount": (0.0, 1.5, True),
}

# why a null means the cell could not be read, in words for the rejected row's reason
_NULL_WHAT = {
    "as_of": "the date is missing or not a date",
    "tenor": "the tenor is missing or not a tenor label",
    "rate": "the rate is missing or not a number",
}

# what each rule makes sure of, for a row held back because the rule itself could not be evaluated
_RULE_WHAT = {
    ("expect_column_values_to_not_be_null", "as_of"): "the date was read",
    ("expect_column_values_to_not_be_null", "tenor"): "the tenor was read",
    ("expect_column_values_to_not_be_null", "rate"): "the rate was read",
    ("expect_column_values_to_be_in_set", "tenor"): "the tenor is one of the curve's tenors",
    ("expect_column_values_to_be_between", "rate"): "the rate is within the plausible band",
}

_LOCK = threading.Lock()
_STATE: dict[str, Any] = {"context": None, "source": None}
_CACHE: dict[tuple[Any, ...], Any] = {}


@dataclass(frozen=True)
class RowValidation:
    """The outcome of :func:`validate_rows` for one file's rows of one curve.

    ``ok`` is a boolean array of ``len(rows)``; ``reasons`` and ``check_name`` are Series on the
    rows' index holding ``None`` for rows that passed. ``summary`` is plain JSON-ready data;
    ``result`` is Great Expectations' own ``ExpectationSuiteValidationResult`` (``None`` when there
    were no rows to validate).
    """

    ok: np.ndarray
    reasons: pd.Series
    check_name: pd.Series
    summary: dict[str, Any]
    result: Any

    @property
    def n_failed(self) -> int:
        return int((~self.ok).sum())


def rate_band(cfg: CurveConfig) -> tuple[float, float, bool]:
    """``(min, max, strict_min)`` of plausible decimal values for the curve's quote kind."""
    return RATE_BANDS[cfg.quote]


def _cache_key(cfg: CurveConfig) -> tuple[Any, ...]:
    return (cfg.name, cfg.quote, cfg.tenor_labels)


def suite_name(cfg: CurveConfig) -> str:
    """The expectation suite's name: the curve plus a digest of the settings the suite depends on."""
    digest = hashlib.sha1(repr(_cache_key(cfg)).encode()).hexdigest()[:8]
    return f"afterward-rows-{cfg.name}-{digest}"


def _context() -> Any:
    if _STATE["context"] is None:
        import great_expectations as gx

        ctx = gx.get_context(mode="ephemeral")
        # progress bars would write to stderr from inside a pure function
        ctx.variables.progress_bars = {"globally": False, "metric_calculations": False}
        _STATE["context"] = ctx
        _STATE["source"] = ctx.data_sources.add_pandas("afterward-quote-rows")
    return _STATE["context"]


def _validation_definition(cfg: CurveConfig) -> Any:
    key = _cache_key(cfg)
    found = _CACHE.get(key)
    if found is not None:
        return found
    import great_expectations as gx

    ctx = _context()
    name = suite_name(cfg)
    lo, hi, strict_min = rate_band(cfg)
    suite = gx.ExpectationSuite(name=name)
    for column in ("as_of", "tenor", "rate"):
        suite.add_expectation(gx.expectations.ExpectColumnValuesToNotBeNull(column=column))
    suite.add_expectation(
        gx.expectations.ExpectColumnValuesToBeInSet(column="tenor", value_set=list(cfg.tenor_labels))
    )
    suite.add_expectation(
        gx.expectations.ExpectColumnValuesToBeBetween(
            column="rate", min_value=lo, max_value=hi, strict_min=strict_min
        )
    )
    suite = ctx.suites.add(suite)
    asset = _STATE["source"].add_dataframe_asset(name=name)
    batch = asset.add_batch_definition_whole_dataframe(name=f"{name}-whole")
    vd = ctx.validation_definitions.add(gx.ValidationDefinition(name=f"{name}-run", data=batch, suite=suite))
    _CACHE[key] = vd
    return vd


def _frame_for_gx(rows: pd.DataFrame) -> pd.DataFrame:
    """A positional-index copy with the columns GX checks, coerced to the expected dtypes.

    A column the caller did not supply is added as all-null so that every row fails its null
    expectation instead of the validation raising.
    """
    n = len(rows)
    out = {}
    as_of = rows["as_of"] if "as_of" in rows else pd.Series([pd.NaT] * n)
    out["as_of"] = to_dates(pd.Series(as_of).reset_index(drop=True))
    tenor = rows["tenor"] if "tenor" in rows else pd.Series([None] * n, dtype=object)
    tenor = pd.Series(tenor).reset_index(drop=True).astype(object)
    out["tenor"] = tenor.where(tenor.notna(), None)
    rate = rows["rate"] if "rate" in rows else pd.Series(np.full(n, np.nan))
    out["rate"] = pd.to_numeric(pd.Series(rate).reset_index(drop=True), errors="coerce").astype(float)
    return pd.DataFrame(out)


def to_dates(values: pd.Series) -> pd.Series:
    """``values`` as a datetime64 Series; anything that is not an ISO date becomes ``NaT``."""
    if values.dtype.kind == "M":
        return values
    # an explicit format: inference would warn and guess per element
    return pd.to_datetime(values, errors="coerce", format="ISO8601")


def _expectation_column(res: Any) -> str | None:
    return res.expectation_config.kwargs.get("column")


def validate_rows(rows: pd.DataFrame, cfg: CurveConfig) -> RowValidation:
    """Validate one file's parsed quote rows for curve ``cfg`` against the curve's expectation suite.

    ``rows`` has columns ``line`` (source line number), ``as_of`` (datetime64, ``NaT`` where the date
    did not parse), ``tenor`` (canonical label, ``None`` where unparseable), ``rate`` (decimal,
    ``units`` already applied, ``NaN`` where the cell held text) and ``raw`` (the source line). Empty
    cells are missing quotes, not rows: the reader should not pass them here.

    An optional column ``value`` holds each number as the file wrote it, in the curve's ``units``;
    without it the value is recovered from ``rate``.

    Returns a :class:`RowValidation`: per row ``ok``; for failing rows a plain ``reason`` (several
    joined by ``"; "``) in the file's language, e.g. ``"out of range: rate 45 (percent) outside the
    plausible band -5 % to 40 % (tenor 1Y)"``, and a ``check_name`` (``"unparseable"`` if a
    null-check failed, else ``"out_of_range"``). The input is not modified.
    """
    n = len(rows)
    name = suite_name(cfg)
    lo, hi, strict_min = rate_band(cfg)
    index = rows.index
    if n == 0:
        empty = pd.Series([], index=index, dtype=object)
        summary = {"suite": name, "success": True, "rows": 0, "evaluated_expectations": 0,
                   "successful_expectations": 0, "unsuccessful_expectations": 0, "expectations": []}
        return RowValidation(np.zeros(0, dtype=bool), empty, empty.copy(), summary, None)

    frame = _frame_for_gx(rows)
    with _LOCK:
        vd = _validation_definition(cfg)
        result = vd.run(
            batch_parameters={"dataframe": frame},
            result_format={"result_format": "COMPLETE", "return_unexpected_index_query": False},
        )

    parts: list[np.ndarray] = []  # one object array of reason-or-None per expectation
    # the number as the file wrote it: the reader's own value where given, else the decimal scaled back
    if "value" in rows:
        values = pd.to_numeric(rows["value"], errors="coerce").to_numpy(dtype=float)
    else:
        values = frame["rate"].to_numpy() * UNIT_DIVISORS[cfg.units]
        # 0.45 * 100 is 45.00000000000001: undo the scaling's float noise as the reader's rounding does
        with np.errstate(over="ignore", invalid="ignore"):
            rounded = np.round(values, 10)
        values = np.where(np.isfinite(rounded), rounded, values)
    tenors = frame["tenor"].to_numpy(dtype=object)
    tenor_note = np.where(pd.isna(tenors), "", " (tenor " + tenors.astype(str).astype(object) + ")").astype(object)
    unparseable = np.zeros(n, dtype=bool)
    per_expectation = []
    band = band_text(lo, hi, strict_min, cfg.units)
    what = "discount factor" if cfg.quote == "discount" else "rate"
    unit = units_name(cfg.units)
    for res in result.results:
        kind = res.expectation_config.type
        column = _expectation_column(res)
        r = res.result or {}
        idx = np.asarray(r.get("unexpected_index_list") or [], dtype=np.int64)
        failed_to_run = bool(res.exception_info and res.exception_info.get("raised_exception"))
        per_expectation.append({
            "expectation": kind,
            "column": column,
            "success": bool(res.success),
            "unexpected_count": int(r.get("unexpected_count") or 0),
            "raised_exception": failed_to_run,
        })
        text = np.full(n, None, dtype=object)
        if failed_to_run:
            # the rule could not be evaluated: hold back every row rather than let one through unchecked
            rule = _RULE_WHAT.get((kind, column), f"the {column} is valid")
            text[:] = f"not checked: the check that {rule} could not run, so the row is held back"
            if kind == "expect_column_values_to_not_be_null":
                unparseable[:] = True
            parts.append(text)
            continue
        if idx.size == 0:
            continue
        if kind == "expect_column_values_to_not_be_null":
            text[idx] = f"unparseable: {_NULL_WHAT.get(column, f'the {column} is missing')}"
            unparseable[idx] = True
        elif kind == "expect_column_values_to_be_in_set":
            vals = tenors[idx].astype(str).astype(object)
            text[idx] = "out of range: tenor " + vals + f" is not one of curves.{cfg.name}.tenors"
        elif kind == "expect_column_values_to_be_between":
            written = number_text(values[idx])
            text[idx] = (f"out of range: {what} " + written + f" ({unit}) outside the plausible band {band}"
                         + tenor_note[idx])
        else:  # pragma: no cover - the suite holds only the kinds above
            text[idx] = f"out of range: the {column} failed a check"
        parts.append(text)

    reasons = np.full(n, None, dtype=object)
    for text in parts:
        has = pd.notna(text)
        both = has & pd.notna(reasons)
        reasons[both] = reasons[both] + "; " + text[both]
        only = has & ~both
        reasons[only] = text[only]
    ok = pd.isna(reasons)
    check = np.where(ok, None, np.where(unparseable, "unparseable", "out_of_range")).astype(object)
    check[ok] = None

    stats = result.statistics
    summary = {
        "suite": name,
        "success": bool(result.success),
        "rows": int(n),
        "rows_failed": int((~ok).sum()),
        "evaluated_expectations": int(stats.get("evaluated_expectations", 0)),
        "successful_expectations": int(stats.get("successful_expectations", 0)),
        "unsuccessful_expectations": int(stats.get("unsuccessful_expectations", 0)),
        "expectations": per_expectation,
    }
    return RowValidation(
        ok=np.asarray(ok, dtype=bool),
        reasons=pd.Series(reasons, index=index, dtype=object),
        check_name=pd.Series(check, index=index, dtype=object),
        summary=summary,
        result=result,
    )
