"""The ``afterward.toml`` settings: read once at the entry point, validated, typed.

Every problem is reported as :class:`ConfigError` with a one-line message naming the key and the
allowed values; nothing downstream sees an unchecked setting.
"""

from __future__ import annotations

import os
import re
import tomllib
from dataclasses import dataclass, field
from datetime import date, datetime
from pathlib import Path
from typing import Any

import numpy as np

from pipeline.checks import CHECKS, DEFAULT_SEVERITY
from pipeline.compounding import COMPOUNDINGS, compounding_frequency
from pipeline.curves.build import QUOTE_KINDS
from pipeline.curves.methods import METHOD_NAMES
from pipeline.dates import DAY_COUNTS, WEEKDAYS, BusinessCalendar
from pipeline.errors import ConfigError
from pipeline.readers.options import DEFAULT_MISSING, ReadOptions
from pipeline.tenors import Tenor, TenorError, parse_tenor
from pipeline.term_structure.acm import DEFAULT_FACTORS
from pipeline.term_structure.panel import DEFAULT_MAX_MONTHS

__all__ = [
    "CHECK_NAMES",
    "COMPOUNDINGS",
    "COUPON_FREQUENCIES",
    "INTERPOLATIONS",
    "QUOTE_KINDS",
    "SEVERITIES",
    "Config",
    "ConfigError",
    "CurveConfig",
    "compounding_frequency",
    "find_config",
    "load_config",
    "parse_config",
]

COUPON_FREQUENCIES = ("annual", "semiannual", "quarterly", "monthly")
# other spellings of a day count that name the same convention
_DAY_COUNT_ALIASES = {"act/act isda": "ACT/ACT", "act/act (isda)": "ACT/ACT", "actual/actual (isda)": "ACT/ACT",
                      "act/365 fixed": "ACT/365F", "act/365f": "ACT/365F"}
UNITS = ("percent", "decimal", "bp")
INTERPOLATIONS = METHOD_NAMES                       # derived from the registered methods
FREQUENCIES = ("daily", "monthly")
DATE_FORMATS = ("iso", "day_first", "month_first")
SEVERITIES = ("reject", "warn", "info")
CHECK_NAMES = tuple(c.name for c in CHECKS)      # declared once, beside the checks
@dataclass(frozen=True)
class CurveConfig:
    """One curve's conventions, as written under ``[curves.NAME]``."""

    name: str
    files: str = "*.csv"
    quote: str = "zero"
    compounding: str = "continuous"
    day_count: str = "ACT/365F"
    units: str = "percent"
    interpolation: str = "monotone_convex"
    tenors: tuple[Tenor, ...] = ()
    frequency: str = "daily"
    calendar: BusinessCalendar = field(default_factory=BusinessCalendar)
    date_format: str = "iso"
    forward_starts: tuple[Tenor, ...] = ()
    forward_tenors: tuple[Tenor, ...] = ()
    tolerance_days: int = 3
    jump_bp: float = 75.0
    outlier_mads: float = 8.0
    stale_days: int = 5
    inversion_pairs: tuple[tuple[Tenor, Tenor], ...] = ()
    severity: dict[str, str] = field(default_factory=lambda: dict(DEFAULT_SEVERITY))
    premium_window_days: int = 250
    late_after: str = "18:00"          # HH:MM in the schedule's time zone: a day's curve is due by then
    coupon_frequency: str | None = None
    read: ReadOptions = field(default_factory=ReadOptions)
    model_max_months: int = DEFAULT_MAX_MONTHS   # model.max_months: the panel's longest maturity (months)
    model_factors: int = DEFAULT_FACTORS         # model.factors: principal components in the ACM state
    compare_min_history: int = 60                # compare.min_history: outcomes known before premium_adjusted

    @property
    def frequency_per_year(self) -> int | None:
        """Compounding periods a year of the curve's zero and forward rates (see
        :func:`compounding_frequency`)."""
        return compounding_frequency(self.compounding)

    @property
    def coupons_per_year(self) -> int | None:
        """Coupons a year of the curve's par bonds: ``coupon_frequency`` when set, else the
        compounding's frequency when that is annual, semiannual, quarterly or monthly; ``None``
        when neither gives one (continuous or simple compounding without ``coupon_frequency``)."""
        if self.coupon_frequency is not None:
            return compounding_frequency(self.coupon_frequency)
        return compounding_frequency(self.compounding) or None

    @property
    def spot_days(self) -> int:
        """The spot lag in business days (kept on :attr:`calendar`, which every maturity uses)."""
        return self.calendar.spot_days

    @property
    def tenor_labels(self) -> tuple[str, ...]:
        return tuple(t.label for t in self.tenors)


@dataclass(frozen=True)
class Config:
    """The whole configuration; paths are absolute (relative ones resolved against the file)."""

    path: Path | None
    store_path: Path
    inbox: Path
    loaded: Path
    refused: Path
    curves: dict[str, CurveConfig]
    schedule_cron: str = "30 18 * * 1-5"
    schedule_timezone: str = "UTC"

    def curve(self, name: str) -> CurveConfig:
        try:
            return self.curves[name]
        except KeyError:
            known = ", ".join(sorted(self.curves)) or "(none configured)"
            raise ConfigError(f"unknown curve {name!r}; configured curves: {known}") from None


def local_timezone() -> str:
    """The machine's IANA time zone (``$TZ``, else the target of /etc/localtime), or ``UTC``."""
    env = os.environ.get("TZ", "").lstrip(":")
    if env and ("/" in env or env == "UTC"):
        return env
    try:
        target = os.path.realpath("/etc/localtime")
    except OSError:
        return "UTC"
    marker = "zoneinfo/"
    return target.split(marker, 1)[1] if marker in target else "UTC"


def find_config(explicit: str | os.PathLike[str] | None = None) -> Path:
    """``--config PATH``, else ``$AFTERWARD_CONFIG``, else ``./afterward.toml``."""
    if explicit:
        return Path(explicit)
    env = os.environ.get("AFTERWARD_CONFIG")
    if env:
        return Path(env)
    return Path.cwd() / "afterward.toml"


def load_config(path: str | os.PathLike[str]) -> Config:
    p = Path(path)
    if not p.is_file():
        raise ConfigError(f"config file not found: {p} (run 'afterward init' to write one)")
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8-sig"))
    except UnicodeDecodeError:
        raise ConfigError(f"{p}: not a UTF-8 text file") from None
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{p}: not valid TOML: {exc}") from None
    return parse_config(data, base=p.resolve().parent, path=p.resolve())


# --- validation helpers -------------------------------------------------------------------------

def _check_keys(table: dict[str, Any], allowed: set[str], where: str) -> None:
    for key in table:
        if key not in allowed:
            raise ConfigError(f"unknown key {where}{key!r}; allowed: {', '.join(sorted(allowed))}")


def _choice(table: dict[str, Any], key: str, allowed: tuple[str, ...], default: str, where: str) -> str:
    value = table.get(key, default)
    if not isinstance(value, str):
        raise ConfigError(f"{where}{key} must be a string; allowed: {', '.join(allowed)}")
    for option in allowed:
        if value.lower() == option.lower():
            return option
    raise ConfigError(f"{where}{key} = {value!r} is not allowed; allowed: {', '.join(allowed)}")


def _number(table: dict[str, Any], key: str, default: float, where: str, *, integer: bool = False,
            minimum: float = 0) -> Any:
    value = table.get(key, default)
    ok = isinstance(value, int) if integer else isinstance(value, int | float)
    if isinstance(value, bool) or not ok or value < minimum:
        kind = "an integer" if integer else "a number"
        raise ConfigError(f"{where}{key} = {value!r} must be {kind} >= {minimum}")
    return value


def _tenor_list(value: Any, key: str, *, allow_zero: bool = False) -> tuple[Tenor, ...]:
    if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
        raise ConfigError(f"{key} must be a list of tenor labels such as [\"3M\", \"1Y\"]")
    try:
        tenors = [parse_tenor(v, allow_zero=allow_zero) for v in value]
    except TenorError as exc:
        raise ConfigError(f"{key}: {exc}") from None
    if len({t.label for t in tenors}) != len(tenors):
        raise ConfigError(f"{key} lists the same tenor twice")
    return tuple(sorted(tenors))


def _month_tenors(value: Any, key: str, *, allow_zero: bool) -> tuple[Tenor, ...]:
    tenors = _tenor_list(value, key, allow_zero=allow_zero)
    for t in tenors:
        if t.months is None:
            raise ConfigError(f"{key}: {t.label} is not a whole number of months (use nM or nY)")
    return tenors


_ISO_DAY = re.compile(r"[0-9]{4}-[0-9]{2}-[0-9]{2}")


def _iso_day(text: str) -> np.datetime64 | None:
    """``YYYY-MM-DD`` exactly, as a day; None otherwise (numpy alone would read ``2031`` as 1 January
    and ``NaT`` as no date)."""
    if not _ISO_DAY.fullmatch(text):
        return None
    try:
        return np.datetime64(text, "D")
    except ValueError:  # 2031-02-30
        return None


def _holidays(cal: dict[str, Any], base: Path, where: str) -> list[np.datetime64]:
    out: list[np.datetime64] = []
    listed = cal.get("holidays", [])
    if not isinstance(listed, list):
        raise ConfigError(f"{where}calendar.holidays must be a list of ISO dates")
    for v in listed:
        # a quoted "2031-12-25" or a bare TOML date 2031-12-25 (str() gives the same text)
        day = _iso_day(str(v)) if isinstance(v, str | date) and not isinstance(v, datetime) else None
        if day is None:
            raise ConfigError(f"{where}calendar.holidays: {v!r} is not an ISO date (YYYY-MM-DD)")
        out.append(day)
    if "holidays_file" in cal:
        hp = Path(str(cal["holidays_file"]))
        hp = hp if hp.is_absolute() else base / hp
        if not hp.is_file():
            raise ConfigError(f"{where}calendar.holidays_file: file not found: {hp}")
        for n, line in enumerate(hp.read_text(encoding="utf-8-sig").splitlines(), start=1):
            text = line.split(",")[0].strip()
            if not text or text.startswith("#") or text.lower() in ("date", "holiday"):
                continue
            day = _iso_day(text)
            if day is None:
                raise ConfigError(f"{hp}:{n}: {text!r} is not an ISO date (YYYY-MM-DD)")
            out.append(day)
    return out


def _parse_curve(name: str, t: dict[str, Any], base: Path) -> CurveConfig:
    w = f"curves.{name}."
    allowed = {
        "files", "quote", "compounding", "day_count", "units", "interpolation", "tenors", "frequency",
        "calendar", "forward", "realize", "checks", "date_format", "audit", "spot_days", "coupon_frequency",
        "read", "model", "compare",
    }
    _check_keys(t, allowed, w)
    if "tenors" not in t:
        raise ConfigError(f"{w}tenors is required: the expected tenors, e.g. [\"3M\", \"1Y\", \"10Y\"]")
    tenors = _tenor_list(t["tenors"], f"{w}tenors")
    if not tenors:
        raise ConfigError(f"{w}tenors must list at least one tenor")

    cal = t.get("calendar", {})
    if not isinstance(cal, dict):
        raise ConfigError(f"{w}calendar must be a table with weekend / holidays / holidays_file")
    _check_keys(cal, {"weekend", "holidays", "holidays_file"}, f"{w}calendar.")
    weekend = cal.get("weekend", ["Sat", "Sun"])
    if not isinstance(weekend, list):
        raise ConfigError(f"{w}calendar.weekend must be a list; allowed days: {', '.join(WEEKDAYS)}")
    norm_weekend = []
    for d in weekend:
        match = [x for x in WEEKDAYS if isinstance(d, str) and x.lower() == d.strip().lower()[:3]]
        if not match:
            raise ConfigError(f"{w}calendar.weekend: {d!r} is not a weekday; allowed: {', '.join(WEEKDAYS)}")
        norm_weekend.append(match[0])
    if len(set(norm_weekend)) == 7:
        raise ConfigError(f"{w}calendar.weekend cannot hold all seven days")
    spot_days = _number(t, "spot_days", 0, w, integer=True)
    if spot_days > 10:
        raise ConfigError(f"{w}spot_days = {spot_days} must be an integer from 0 to 10 (business days)")
    calendar = BusinessCalendar.of(norm_weekend, _holidays(cal, base, w), spot_days)
    _check_day_tenors(tenors, spot_days, f"{w}tenors")

    fwd = t.get("forward", {})
    if not isinstance(fwd, dict):
        raise ConfigError(f"{w}forward must be a table with starts / tenors")
    _check_keys(fwd, {"starts", "tenors"}, f"{w}forward.")
    starts = _month_tenors(fwd.get("starts", ["0M", "3M", "6M", "1Y", "2Y"]), f"{w}forward.starts",
                           allow_zero=True)
    fwd_tenors = _month_tenors(fwd.get("tenors", ["3M", "1Y"]), f"{w}forward.tenors", allow_zero=False)

    rel = t.get("realize", {})
    if not isinstance(rel, dict):
        raise ConfigError(f"{w}realize must be a table with tolerance_days")
    _check_keys(rel, {"tolerance_days"}, f"{w}realize.")
    tolerance = _number(rel, "tolerance_days", 3, f"{w}realize.", integer=True)

    chk = t.get("checks", {})
    if not isinstance(chk, dict):
        raise ConfigError(f"{w}checks must be a table")
    _check_keys(chk, {"jump_bp", "inversion_pairs", "severity", "stale_days", "outlier_mads", "late_after"},
                f"{w}checks.")
    late_after = chk.get("late_after", "18:00")
    if not (isinstance(late_after, str) and re.fullmatch(r"([01]\d|2[0-3]):[0-5]\d", late_after)):
        raise ConfigError(f"{w}checks.late_after = {late_after!r} is not a time of day HH:MM (e.g. \"18:00\")")
    jump_bp = float(_number(chk, "jump_bp", 75, f"{w}checks.", minimum=0))
    stale_days = _number(chk, "stale_days", 5, f"{w}checks.", integer=True, minimum=2)
    outlier_mads = float(_number(chk, "outlier_mads", 8, f"{w}checks.", minimum=1))
    pairs_raw = chk.get("inversion_pairs", [])
    pairs: list[tuple[Tenor, Tenor]] = []
    if not isinstance(pairs_raw, list):
        raise ConfigError(f"{w}checks.inversion_pairs must be a list of [short, long] tenor pairs")
    for pair in pairs_raw:
        if not (isinstance(pair, list) and len(pair) == 2):
            raise ConfigError(f"{w}checks.inversion_pairs: {pair!r} is not a [short, long] pair")
        short, long = _tenor_list(pair, f"{w}checks.inversion_pairs")
        for x in (short, long):
            if x not in tenors:
                raise ConfigError(f"{w}checks.inversion_pairs: {x.label} is not one of {w}tenors")
        pairs.append((short, long))
    severity = dict(DEFAULT_SEVERITY)
    sev_raw = chk.get("severity", {})
    if not isinstance(sev_raw, dict):
        raise ConfigError(f"{w}checks.severity must be a table of check = severity")
    _check_keys(sev_raw, set(CHECK_NAMES), f"{w}checks.severity.")
    for check in sev_raw:
        severity[check] = _choice(sev_raw, check, SEVERITIES, "warn", f"{w}checks.severity.")

    aud = t.get("audit", {})
    if not isinstance(aud, dict):
        raise ConfigError(f"{w}audit must be a table with premium_window_days")
    _check_keys(aud, {"premium_window_days"}, f"{w}audit.")
    window = _number(aud, "premium_window_days", 250, f"{w}audit.", integer=True, minimum=2)

    cmp_ = t.get("compare", {})
    if not isinstance(cmp_, dict):
        raise ConfigError(f"{w}compare must be a table with min_history")
    _check_keys(cmp_, {"min_history"}, f"{w}compare.")
    min_history = _number(cmp_, "min_history", 60, f"{w}compare.", integer=True, minimum=1)

    read = _read_options(t.get("read", {}), f"{w}read")
    max_months, factors = _model(t.get("model", {}), f"{w}model.")
    quote = _choice(t, "quote", QUOTE_KINDS, "zero", w)
    compounding = _choice(t, "compounding", COMPOUNDINGS, "continuous", w)
    coupon_frequency = None
    if "coupon_frequency" in t:
        coupon_frequency = _choice(t, "coupon_frequency", COUPON_FREQUENCIES, "annual", w)
    elif quote == "par" and compounding not in COUPON_FREQUENCIES:
        raise ConfigError(f"{w}coupon_frequency is required for par quotes when compounding = {compounding!r}; "
                          f"allowed: {', '.join(COUPON_FREQUENCIES)}")

    files = t.get("files", f"{name}_*.csv")
    if not isinstance(files, str) or not files:
        raise ConfigError(f"{w}files must be a file-name glob such as \"{name}_*.csv\"")

    return CurveConfig(
        name=name,
        files=files,
        quote=quote,
        compounding=compounding,
        day_count=_day_count(t, w),
        units=_choice(t, "units", UNITS, "percent", w),
        interpolation=_choice(t, "interpolation", INTERPOLATIONS, "monotone_convex", w),
        tenors=tenors,
        frequency=_choice(t, "frequency", FREQUENCIES, "daily", w),
        calendar=calendar,
        date_format=_choice(t, "date_format", DATE_FORMATS, "iso", w),
        forward_starts=starts,
        forward_tenors=fwd_tenors,
        tolerance_days=tolerance,
        jump_bp=jump_bp,
        late_after=late_after,
        outlier_mads=outlier_mads,
        stale_days=stale_days,
        inversion_pairs=tuple(pairs),
        severity=severity,
        premium_window_days=window,
        coupon_frequency=coupon_frequency,
        read=read,
        model_max_months=max_months,
        model_factors=factors,
        compare_min_history=min_history,
    )


# the model's limits: a panel reaches at most 50 years; the state holds at most 10 components
# (the published model uses 5; more than a handful fit interpolation noise)
MODEL_MAX_MONTHS = (24, 600)
MODEL_FACTORS = (1, 10)


def _model(m: Any, w: str) -> tuple[int, int]:
    """``model.max_months`` and ``model.factors``, whole numbers in their ranges."""
    if not isinstance(m, dict):
        raise ConfigError(f"{w[:-1]} must be a table with max_months / factors")
    _check_keys(m, {"max_months", "factors"}, w)
    out = []
    for key, default, (lo, hi) in (("max_months", DEFAULT_MAX_MONTHS, MODEL_MAX_MONTHS),
                                   ("factors", DEFAULT_FACTORS, MODEL_FACTORS)):
        value = m.get(key, default)
        if isinstance(value, bool) or not isinstance(value, int) or not lo <= value <= hi:
            raise ConfigError(f"{w}{key} = {value!r} is not allowed; allowed: a whole number from {lo} to {hi}")
        out.append(value)
    return out[0], out[1]


def _day_count(t: dict[str, Any], w: str) -> str:
    value = t.get("day_count", "ACT/365F")
    if isinstance(value, str):
        alias = _DAY_COUNT_ALIASES.get(" ".join(value.lower().split()))
        if alias is not None:
            return alias
    shown = tuple("ACT/ACT (ISDA)" if d == "ACT/ACT" else d for d in DAY_COUNTS)
    try:
        return _choice(t, "day_count", DAY_COUNTS, "ACT/365F", w)
    except ConfigError:
        raise ConfigError(f"{w}day_count = {value!r} is not allowed; allowed: {', '.join(shown)}") from None


def _check_day_tenors(tenors: tuple[Tenor, ...], spot_days: int, key: str) -> None:
    """Refuse two business-day tenors that always mature on the same day (ON = 1D, TN = 2D, SN =
    spot + 1): a curve cannot have two nodes on one date."""
    seen: dict[int, str] = {}
    for t in tenors:
        days = spot_days + 1 if t.unit == "SN" else t.business_days
        if days is None:
            continue
        if days in seen:
            raise ConfigError(f"{key}: {seen[days]} and {t.label} both mature {days} business day(s) after the "
                              f"as-of date (spot_days = {spot_days}); list one of them")
        seen[days] = t.label


def _read_options(r: Any, w: str) -> ReadOptions:
    if not isinstance(r, dict):
        raise ConfigError(f"{w} must be a table with skip_rows / sheet / missing")
    _check_keys(r, {"skip_rows", "sheet", "missing"}, f"{w}.")
    skip = _number(r, "skip_rows", 0, f"{w}.", integer=True)
    sheet = r.get("sheet", 0)
    if isinstance(sheet, bool) or not (isinstance(sheet, str) and sheet.strip()
                                       or isinstance(sheet, int) and sheet >= 0):
        raise ConfigError(f"{w}.sheet = {sheet!r} must be a sheet name or a 0-based sheet number")
    missing = r.get("missing", list(DEFAULT_MISSING))
    if not isinstance(missing, list) or not all(isinstance(m, str) for m in missing):
        raise ConfigError(f"{w}.missing must be a list of strings such as [\"N/A\", \"-\"]")
    return ReadOptions(skip_rows=skip, sheet=sheet.strip() if isinstance(sheet, str) else sheet,
                       missing=tuple(missing))


def _path(table: dict[str, Any], key: str, default: str, base: Path, where: str) -> Path:
    value = table.get(key, default)
    if not isinstance(value, str) or not value:
        raise ConfigError(f"{where}{key} must be a path string")
    p = Path(value).expanduser()
    return p if p.is_absolute() else (base / p)


def parse_config(data: dict[str, Any], *, base: Path, path: Path | None = None) -> Config:
    """Validate a parsed TOML document. Relative paths are taken relative to ``base``."""
    _check_keys(data, {"store", "inbox", "curves", "schedule"}, "")
    store = data.get("store", {})
    inbox = data.get("inbox", {})
    sched = data.get("schedule", {})
    for key, table in (("store", store), ("inbox", inbox), ("schedule", sched)):
        if not isinstance(table, dict):
            raise ConfigError(f"[{key}] must be a table")
    _check_keys(store, {"path"}, "store.")
    _check_keys(inbox, {"path", "loaded", "refused"}, "inbox.")
    _check_keys(sched, {"cron", "timezone"}, "schedule.")
    curves_raw = data.get("curves", {})
    if not isinstance(curves_raw, dict) or not curves_raw:
        raise ConfigError("[curves.NAME] is required: configure at least one curve")
    curves = {}
    for name, table in curves_raw.items():
        if not name.replace("_", "").replace("-", "").isalnum():
            raise ConfigError(f"curves.{name}: a curve name may hold letters, digits, '_' and '-' only")
        if not isinstance(table, dict):
            raise ConfigError(f"curves.{name} must be a table")
        curves[name] = _parse_curve(name, table, base)
    inbox_path = _path(inbox, "path", "inbox", base, "inbox.")
    cron = sched.get("cron", "30 18 * * 1-5")
    if not isinstance(cron, str) or len(cron.split()) != 5:
        raise ConfigError(f"schedule.cron = {cron!r} must be a five-field cron expression")
    tz = sched.get("timezone", "local")
    if tz == "local":
        tz = local_timezone()
    try:
        from zoneinfo import ZoneInfo

        ZoneInfo(str(tz))
    except Exception:
        raise ConfigError(f"schedule.timezone = {tz!r} is not an IANA time zone (e.g. \"Europe/Paris\")") from None
    return Config(
        path=path,
        store_path=_path(store, "path", "afterward.duckdb", base, "store."),
        inbox=inbox_path,
        loaded=_path(inbox, "loaded", str(inbox_path / "loaded"), base, "inbox."),
        refused=_path(inbox, "refused", str(inbox_path / "refused"), base, "inbox."),
        curves=curves,
        schedule_cron=cron,
        schedule_timezone=str(tz),
    )
