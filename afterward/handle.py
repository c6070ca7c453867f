"""The read-only handle on an afterward store that :func:`afterward.open` returns.

It composes the two other layers and adds nothing of its own: reads go through ``warehouse``
(``warehouse.archive`` for the views, ``warehouse.model.stored_curves`` for a day's built curve, the
one connection factory ``warehouse.connect.reader``), curves are ``pipeline.curves.CurveSet`` objects
rebuilt by ``pipeline.curves.build.curves_from_stored``. No connection outlives a call: each method
opens a read-only connection, reads, and closes it, so a handle kept in a notebook for days never
stands in the way of ``afterward run`` or any other writer.
"""

from __future__ import annotations

import datetime as dt
import os
import shutil
import tempfile
import weakref
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd
import pyarrow as pa

from pipeline.config import Config
from pipeline.curves.base import CurveSet
from pipeline.curves.build import curves_from_stored
from pipeline.errors import ArgumentError, KnownAtError, TenorError, UserError
from pipeline.tenors import parse_tenor
from warehouse import archive
from warehouse.connect import reader
from warehouse.model import built_days, stored_curves
from warehouse.query import refuse_writes

__all__ = ["Archive"]



def _day(value: object, name: str) -> str | None:
    """An as-of day argument (ISO string, ``datetime.date``, pandas timestamp, ``datetime64``) as
    ``YYYY-MM-DD``; None stays None."""
    if value is None:
        return None
    try:
        if isinstance(value, str):
            return str(np.datetime64(dt.date.fromisoformat(value.strip()), "D"))
        if isinstance(value, dt.datetime | pd.Timestamp | np.datetime64 | dt.date):
            day = np.datetime64(pd.Timestamp(value).date(), "D")
            if not np.isnat(day):
                return str(day)
    except (TypeError, ValueError):
        pass
    raise ArgumentError(f"{name} {value!r} is not a date (YYYY-MM-DD)")


def _timestamp(value: object, name: str = "as_known_at") -> dt.datetime | None:
    """An ISO 8601 timestamp (or a ``datetime``) as naive UTC, the store's clock; a timestamp
    without a zone is UTC."""
    if value is None:
        return None
    when: dt.datetime | None = None
    if isinstance(value, dt.datetime):  # pandas timestamps included
        when = value
    elif isinstance(value, str):
        try:
            when = dt.datetime.fromisoformat(value.strip())
        except ValueError:
            when = None
    if when is None:
        raise KnownAtError(f"{name} {value!r} is not an ISO 8601 timestamp (e.g. 2031-03-31T18:00:00Z)")
    if when.tzinfo is not None:
        when = when.astimezone(dt.UTC).replace(tzinfo=None)
    return pd.Timestamp(when).to_pydatetime()


def _months(value: object, name: str, *, allow_zero: bool) -> int | None:
    """A start or tenor given as a tenor label (``"1Y"``, ``"6M"``) or whole months (``12``)."""
    if value is None:
        return None
    if isinstance(value, bool):
        raise ArgumentError(f"{name} {value!r} is not a tenor (e.g. '1Y', '6M' or months as an int)")
    if isinstance(value, int | np.integer):
        months = int(value)
    else:
        try:
            months = parse_tenor(str(value), allow_zero=allow_zero).months
        except TenorError as exc:
            raise ArgumentError(f"{name}: {exc}") from None
        if months is None:
            raise ArgumentError(f"{name} {value!r} must be whole months (e.g. 3M, 1Y)")
    if months < 0 or (months == 0 and not allow_zero):
        raise ArgumentError(f"{name} {value!r} must be {'0 or more' if allow_zero else 'at least 1'} month(s)")
    return months


def _frame(table: pa.Table) -> pd.DataFrame:
    # datetime64 columns, not date objects: what pandas arithmetic and matplotlib want
    return table.to_pandas(date_as_object=False)


class Archive:
    """A read-only view of one afterward store, for notebooks and scripts.

    Rates are decimals (0.0525 = 5.25 %), errors in basis points, as in the SQL views; each frame's
    columns are the view's (see the README's "SQL views"), dates as ``datetime64``. Filters:
    ``curve`` a configured curve's name; ``from_`` / ``to`` inclusive as-of days (ISO strings or
    date-like); ``start`` / ``tenor`` a tenor label (``"1Y"``) or whole months (``12``).

    ``as_known_at`` (naive UTC, or None): the archive as it stood then. :meth:`quotes` reads the
    quote versions known by then straight from the store; the first call of any other method
    rebuilds, realises and audits the archive as known then in a scratch store of the handle's own
    (``--as-known-at``'s rule, :func:`flows.known_at_step.known_at_store`; seconds on a long
    record), which the later calls reuse and which is deleted with the handle. The model and the
    contender comparison are not recomputed there (``afterward compare --as-known-at`` does that).
    """

    def __init__(self, cfg: Config, as_known_at: dt.datetime | None = None) -> None:
        self.config = cfg
        self.as_known_at = as_known_at
        self._known: Config | None = None  # the scratch store of the archive as known then, once made

    def __repr__(self) -> str:
        known = "" if self.as_known_at is None else f", as known at {self.as_known_at.isoformat()} UTC"
        return f"<afterward archive {self.store_path}{known}: curves {', '.join(self.config.curves)}>"

    @property
    def store_path(self) -> Path:
        return self.config.store_path

    @property
    def curves(self) -> list[str]:
        """The configured curves' names."""
        return list(self.config.curves)

    # --- the one way in ----------------------------------------------------------------------------
    @contextmanager
    def _connection(self, known: bool = True) -> Iterator[duckdb.DuckDBPyConnection]:
        """A read-only connection for one call, closed on the way out: to the official store, or (with
        ``as_known_at`` and ``known``) to the handle's scratch store of the archive as known then. SQL
        may read files only under the store's folder and the inbox folders, as ``afterward sql``
        without ``--allow-files``."""
        cfg = self.config
        home = Path.home().resolve()
        folders = sorted({str(p) for f in (cfg.store_path.parent, cfg.inbox, cfg.loaded, cfg.refused)
                          for p in (Path(os.path.abspath(f)), Path(f).resolve())
                          if p != home and p.parent != p})  # never a whole home folder or a root
        path = cfg.store_path
        if known and self.as_known_at is not None:
            path = self._known_store().store_path
            folders.append(str(path.parent))
        with reader(path, external_access=False, allowed_directories=folders) as con:
            yield con

    def _known_store(self) -> Config:
        if self._known is None:
            from flows.known_at_step import known_at_store

            folder = tempfile.mkdtemp(prefix="afterward-notebook-known-at-")
            weakref.finalize(self, shutil.rmtree, folder, ignore_errors=True)  # deleted with the handle
            self._known = known_at_store(self.config, self.as_known_at, Path(folder)).cfg
        return self._known

    def _curve(self, curve: str | None) -> str | None:
        if curve is not None:
            self.config.curve(curve)  # an unknown name: one line naming the configured curves
        return curve

    def _in_grid(self, curve: str | None, months: int | None, given: object, name: str, attr: str) -> None:
        # a start or tenor off every forward grid asked about would give an empty frame: refuse it
        if months is None:
            return
        names = [curve] if curve else self.curves
        grids = sorted({t.months for n in names for t in getattr(self.config.curve(n), attr)})
        if months not in grids:
            allowed = ", ".join(f"{m // 12}Y" if m and m % 12 == 0 else f"{m}M" for m in grids)
            raise ArgumentError(f"{name} {given!r} is not on the forward grid of {curve or 'any curve'}; "
                                f"allowed: {allowed}")

    # --- SQL ---------------------------------------------------------------------------------------
    def arrow(self, query: str) -> pa.Table:
        """The result of one read-only query (SELECT, or EXPLAIN of a SELECT) over the views, as a
        :class:`pyarrow.Table`; a write or a second statement is refused before the store is opened."""
        refuse_writes(query, who="the notebook handle")
        with self._connection() as con:
            try:
                return archive.read_query(con, query)
            except duckdb.Error as exc:
                raise ArgumentError(f"SQL error: {str(exc).splitlines()[0]}") from None

    def sql(self, query: str) -> pd.DataFrame:
        """:meth:`arrow` as a pandas DataFrame."""
        return _frame(self.arrow(query))

    # --- the views ---------------------------------------------------------------------------------
    def quotes(self, curve: str | None = None, from_: object = None, to: object = None) -> pd.DataFrame:
        """The ``quotes`` view: the current version of each quote, one row per (curve, as_of, tenor).
        ``rate`` is the file's number as a decimal and otherwise as quoted (the curve's ``quote``
        kind, compounding and day count). With the handle's ``as_known_at``: the quotes as known
        then (the loads whose data was available by then, ``load --known-since`` included; of each
        key the latest such load's version), as ``afterward sql --as-known-at`` sees them."""
        curve, first, last = self._curve(curve), _day(from_, "from_"), _day(to, "to")
        with self._connection(known=False) as con:  # read from the store itself: no scratch needed
            return _frame(archive.read_quotes(con, curve, first, last, self.as_known_at))

    def forwards(self, curve: str, start: object = None, tenor: object = None, from_: object = None,
                 to: object = None) -> pd.DataFrame:
        """The ``forwards`` view of ``curve``: the official implied forward surface, one row per
        (as_of, start_months, tenor_months); ``forward_rate`` in the curve's compounding and day
        count over ``year_fraction(start_date, end_date)``, ``forward_rate_cc`` continuous."""
        return self._surface(archive.read_forwards, curve, start, tenor, from_, to)

    def outcomes(self, curve: str | None = None, start: object = None, tenor: object = None,
                 from_: object = None, to: object = None) -> pd.DataFrame:
        """The ``outcomes`` view: each realised forward beside its realised and no-change rates,
        ``error_bp = (forward_rate - realized_rate) * 1e4`` and ``rw_error_bp``; filters as
        :meth:`forwards` (``curve`` optional)."""
        return self._surface(archive.read_outcomes, curve, start, tenor, from_, to)

    def _surface(self, read, curve, start, tenor, from_, to) -> pd.DataFrame:  # noqa: ANN001
        curve = self._curve(curve)
        s, m = _months(start, "start", allow_zero=True), _months(tenor, "tenor", allow_zero=False)
        self._in_grid(curve, s, start, "start", "forward_starts")
        self._in_grid(curve, m, tenor, "tenor", "forward_tenors")
        first, last = _day(from_, "from_"), _day(to, "to")
        with self._connection() as con:
            return _frame(read(con, curve, s, m, first, last))

    def audit(self, curve: str | None = None) -> pd.DataFrame:
        """The ``audit_summary`` view: forecast-error statistics per (curve, start, tenor, regime)."""
        curve = self._curve(curve)
        with self._connection() as con:
            return _frame(archive.read_audit(con, curve))

    # --- a day's curve -----------------------------------------------------------------------------
    def curve(self, curve: str, as_of: object) -> CurveSet:
        """The official curve of ``curve`` built on ``as_of``, rebuilt from the nodes and the method
        the build stored, as a one-day :class:`pipeline.curves.CurveSet`.

        It answers ``discount(t)``, ``zero_rate(t, compounding)``, ``forward_rate(t1, t2,
        compounding)`` and ``instantaneous_forward(t)`` for ``t`` year fractions from ``as_of`` on
        the curve's day count (``.day_count``) or dates (ISO strings, ``datetime64``, dates,
        pandas timestamps), scalars or arrays of ``K``; results are ``(1, K)`` arrays of decimals.
        ``compounding`` is explicit: ``continuous`` (default), ``annual``, ``semiannual``,
        ``quarterly``, ``monthly`` or ``simple``. Between two dates the forward accrues over
        ``year_fraction(start, end)``, as the stored forwards do, so ``forward_rate(start_date,
        end_date, <curve's compounding>)`` is the ``forwards`` view's ``forward_rate`` and
        ``zero_rate(maturity_date, ...)`` the ``zero_rates`` view's, to rounding. A day built
        without one of its quotes is rebuilt through the stored value there, which lies on its
        curve: the same curve at every node, between nodes too for ``linear_zero``.
        """
        cfg = self.config.curve(curve)
        day = _day(as_of, "as_of")
        with self._connection() as con:
            stored = stored_curves(con, curve, on=day)
            if stored.as_of.size == 0:
                days, _ = built_days(con, curve)
                raise UserError(self._no_build(curve, day, days))
        keep = np.isfinite(stored.times[0]) & np.isfinite(stored.zero_cc[0])
        cs = curves_from_stored(stored.as_of, stored.methods, stored.times[:, keep], stored.zero_cc[:, keep],
                                stored.params, day_count=cfg.day_count)
        if not cs.ok[0]:
            raise UserError(f"{curve} {day}: the stored curve cannot be rebuilt ({cs.reason[0]})")
        return cs

    @staticmethod
    def _no_build(curve: str, day: str, days: np.ndarray) -> str:
        if days.size == 0:
            return f"{curve} has no official build yet (run 'afterward build')"
        target = np.datetime64(day, "D")
        i = int(np.searchsorted(days, target))
        near = [str(d) for d in (days[i - 1] if i else None, days[i] if i < days.size else None) if d is not None]
        return (f"{curve} has no official build on {day} (not a business day, no quotes, or held back by a "
                f"reject finding); nearest built day(s): {', '.join(near)}")
