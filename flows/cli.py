"""The ``afterward`` command line.

Heavy libraries are imported inside the commands that need them, so ``sql``, ``status`` and ``build``
start quickly. A user's mistake (a bad config, a missing file, a locked store) ends in a one-line
message and exit status 1 or 2, never a traceback.

Exit status: 0 success; 1 the command ran but found errors; 2 bad usage or config.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path
from typing import Annotated

import typer
from typer.core import TyperArgument, TyperGroup

from pipeline.errors import AfterwardError, ConfigError


class _Argument(TyperArgument):
    """An argument whose help shows only what a user types: its metavar (``FILE...``, ``[DIR]``), no
    Python type column. A repeated argument's metavar carries its own ``...``."""

    def display_type_rich(self, ctx):  # noqa: ANN001, ANN201
        return None

    def _usage_display_name(self) -> str:
        return self.display_name_raw if self.required else f"[{self.display_name_raw}]"


def _plain_help(command, ctx) -> None:  # noqa: ANN001
    """Help without Python types: a flag (``--all``, ``--help``) shows no value, an argument only its
    metavar. Options that take a value carry their own metavar (``DATE``, ``CURVE``, ...)."""
    for param in command.params:
        if isinstance(param, TyperArgument) and not isinstance(param, _Argument):
            param.__class__ = _Argument
        elif getattr(param, "is_flag", False) and param.metavar is None:
            param.metavar = ""
    help_option = command.get_help_option(ctx)
    if help_option is not None:
        help_option.metavar = ""


class _Group(TyperGroup):
    def get_command(self, ctx, cmd_name):  # noqa: ANN001, ANN201
        command = super().get_command(ctx, cmd_name)
        if command is not None:
            _plain_help(command, ctx)
        return command

    def format_help(self, ctx, formatter) -> None:  # noqa: ANN001
        _plain_help(self, ctx)
        super().format_help(ctx, formatter)


app = typer.Typer(
    cls=_Group,
    add_completion=False,
    no_args_is_help=True,
    pretty_exceptions_enable=False,
    help="Archive rate curves, build implied forwards, and score them against realised rates.",
)

_state: dict[str, object] = {"config": None}


class _Exit(AfterwardError):
    """A usage or request error found by the command line itself, with its exit status."""

    def __init__(self, message: str, code: int) -> None:
        super().__init__(message)
        self.exit_code = code


def _console(stderr: bool = False):  # noqa: ANN202
    import sys as _sys

    from rich.console import Console

    stream = _sys.stderr if stderr else _sys.stdout
    # wide output when piped or captured, so tables are not squeezed into 80 columns
    width = None if stream.isatty() else 180
    return Console(stderr=stderr, highlight=False, soft_wrap=True, width=width)


def _config(curve: str | None = None):  # noqa: ANN202
    """The config (``--config``, ``$AFTERWARD_CONFIG`` or ``./afterward.toml``); with ``curve``, checked
    to name a configured curve."""
    from pipeline.config import find_config, load_config

    cfg = load_config(find_config(_state["config"]))  # type: ignore[arg-type]
    if curve is not None:
        cfg.curve(curve)
    return cfg


def _set_config(value: str | None) -> str | None:
    # before or after the command name: the one given last wins
    if value is not None:
        _state["config"] = value
    return value


# one option, accepted before the command (afterward --config F status) and after it (afterward status
# --config F); every command that reads the config declares it
ConfigOption = Annotated[str | None, typer.Option(
    "--config", metavar="FILE", callback=_set_config, expose_value=True,
    help="Path to afterward.toml (else $AFTERWARD_CONFIG, else ./afterward.toml).")]

ForceOption = Annotated[bool, typer.Option("--force", help="Overwrite an existing --out file.")]
CurveOption = Annotated[str | None, typer.Option("--curve", metavar="CURVE", help="Only this curve.")]
StartOption = Annotated[str | None, typer.Option("--start", metavar="TENOR",
                                                 help="Only forecasts starting this far ahead (e.g. 1Y).")]
TenorOption = Annotated[str | None, typer.Option("--tenor", metavar="TENOR",
                                                 help="Only forecasts of this tenor (e.g. 3M).")]
FromOption = Annotated[str | None, typer.Option("--from", metavar="DATE", help="First as-of date (YYYY-MM-DD).")]
ToOption = Annotated[str | None, typer.Option("--to", metavar="DATE", help="Last as-of date (YYYY-MM-DD).")]
TableFormatOption = Annotated[str, typer.Option("--format", metavar="FORMAT", help="table | csv | json")]


def _table_format(fmt: str) -> None:
    if fmt not in ("table", "csv", "json"):
        raise _Exit(f"--format {fmt!r} is not allowed; allowed: table, csv, json", 2)


@app.callback()
def _main(config: ConfigOption = None) -> None:
    pass  # --config is stored by its callback


# --- init ----------------------------------------------------------------------------------------

@app.command()
def init(directory: Annotated[Path, typer.Argument(metavar="DIR", help="Folder for afterward.toml and the store.")
                              ] = Path(".")) -> None:
    """Write a commented afterward.toml and an empty store."""
    from pipeline.config import load_config
    from pipeline.config_template import CONFIG_TEMPLATE
    from warehouse.connect import writer

    directory.mkdir(parents=True, exist_ok=True)
    target = directory / "afterward.toml"
    if target.exists():
        raise _Exit(f"{target} already exists; not overwritten", 1)
    target.write_text(CONFIG_TEMPLATE, encoding="utf-8")
    cfg = load_config(target)
    cfg.inbox.mkdir(parents=True, exist_ok=True)
    with writer(cfg.store_path):
        pass
    _console().print(f"wrote {target}\ncreated the store {cfg.store_path}")


# --- load ----------------------------------------------------------------------------------------

def describe_outcome(o) -> str:  # noqa: ANN001
    name = Path(o.source_file).name
    if o.status == "already loaded":
        return f"{name}: already loaded ({o.detail})"
    if o.status in ("refused", "missing"):
        return f"{name}: refused: {o.detail}"
    revised = f", revised {o.rows_revised}" if o.rows_revised else ""
    unchanged = f", unchanged {o.rows_unchanged}" if o.rows_unchanged else ""
    note = f" ({o.detail})" if o.detail else ""
    return (f"{name}: read {o.rows_read}, accepted {o.rows_accepted}{revised}{unchanged}, "
            f"rejected {o.rows_rejected}{note}")


@app.command()
def load(
    files: Annotated[list[Path], typer.Argument(metavar="FILE...", help="Rate files (CSV, Parquet, .xlsx).")],
    curve: Annotated[str | None, typer.Option("--curve", metavar="CURVE", help="Load every file into this curve.")
                     ] = None,
    reprocess: Annotated[bool, typer.Option(
        "--reprocess", help="Load files already loaded into the same curve again, as new loads that say so.")] = False,
    known_since: Annotated[str | None, typer.Option(
        "--known-since", metavar="TS", help="When the files' data was first available (ISO 8601, UTC when no zone "
                                            "is given; not after now); default: the load time.")] = None,
    config: ConfigOption = None,
) -> None:
    """Load rate files, each in one transaction, and report what happened to every row."""
    from flows.load_step import load_files

    since = None
    if known_since is not None:
        from flows.known_at_step import parse_known_at

        since = parse_known_at(known_since, "--known-since")
    cfg = _config(curve)
    console = _console()
    outcomes = load_files(cfg, files, curve, reprocess=reprocess, known_since=since,
                          on_file=lambda o: console.print(describe_outcome(o), markup=False))
    bad = [o for o in outcomes if o.status in ("refused", "missing") or o.rows_rejected]
    if bad:
        raise typer.Exit(1)


# --- forecasts (user contenders) -----------------------------------------------------------------

forecasts_app = typer.Typer(cls=_Group, no_args_is_help=True,
                            help="Load a team's own forecast files, scored later beside the forwards.")
app.add_typer(forecasts_app, name="forecasts")


@forecasts_app.command("load")
def forecasts_load(
    files: Annotated[list[Path], typer.Argument(metavar="FILE...", help="Forecast files (CSV, Parquet, .xlsx): "
                                                "as_of, start, tenor, rate[, curve].")],
    name: Annotated[str, typer.Option("--name", metavar="NAME", help="The contender's name: a lower-case "
                                      "letter, then lower-case letters, digits or _; not a built-in.")],
    curve: Annotated[str | None, typer.Option("--curve", metavar="CURVE", help="The curve of rows without a curve "
                                              "column (required if the file has none).")] = None,
    units: Annotated[str | None, typer.Option("--units", metavar="UNITS", help="percent | decimal | bp (default: "
                                              "the curve's units).")] = None,
    config: ConfigOption = None,
) -> None:
    """Load forecast files as one contender, each in one transaction, and report what happened to every row."""
    from flows.forecasts_step import load_forecasts

    cfg = _config()
    console = _console()
    outcomes = load_forecasts(cfg, files, name, curve, units,
                              on_file=lambda o: console.print(describe_outcome(o), markup=False))
    if any(o.status == "refused" or o.rows_rejected for o in outcomes):
        raise typer.Exit(1)


@forecasts_app.command("list")
def forecasts_list(
    fmt: TableFormatOption = "table",
    config: ConfigOption = None,
) -> None:
    """What forecasts are loaded: per name and curve, files, current rows, first and last as-of, last load."""
    _table_format(fmt)
    from flows.forecasts_step import list_forecasts
    from flows.output import write_result

    table = list_forecasts(_config())
    if fmt == "table" and table.num_rows == 0:
        _console().print("no forecasts loaded (afterward forecasts load FILE... --name NAME)", markup=False)
        return
    write_result(table, fmt, None, _console())


# --- sql -----------------------------------------------------------------------------------------

def _guard_sql(query: str) -> None:
    from warehouse.query import refuse_writes

    refuse_writes(query)  # shared with the notebook handle (afterward.open().sql)


@app.command()
def sql(
    query: Annotated[str, typer.Argument(metavar="QUERY", help="A read-only SQL query over the views.")],
    fmt: Annotated[str, typer.Option("--format", metavar="FORMAT", help="table | csv | json | parquet")] = "table",
    out: Annotated[Path | None, typer.Option("--out", metavar="FILE", help="Write the result to this file.")] = None,
    allow_files: Annotated[bool, typer.Option("--allow-files", help="Let the query read files.")] = False,
    force: ForceOption = False,
    as_known_at: KnownAtOption = None,
    config: ConfigOption = None,
) -> None:
    """Run an ad-hoc query on a read-only connection.

    One query a run: SELECT, or EXPLAIN of a SELECT. Without --allow-files a query reads files only
    under the store's folder and the inbox folders; nothing can be installed, loaded or attached.
    An existing --out file is kept (exit 1) unless --force.
    """
    from flows.output import write_result

    if fmt not in ("table", "csv", "json", "parquet"):
        raise _Exit(f"--format {fmt!r} is not allowed; allowed: table, csv, json, parquet", 2)
    if fmt == "parquet" and out is None:
        raise _Exit("--format parquet needs --out FILE", 2)
    _check_out_file(out, force)
    _guard_sql(query)
    import duckdb

    from warehouse.connect import reader

    cfg = _config()
    # without --allow-files, files are readable only under the store's folder and the inbox folders
    # (never a whole home directory or filesystem root, should the store sit there)
    folders: list[Path] = []
    for folder in (cfg.store_path.parent, cfg.inbox, cfg.loaded, cfg.refused):
        for p in (Path(os.path.abspath(folder)), Path(folder).resolve()):
            if p != Path.home().resolve() and p.parent != p and p not in folders:
                folders.append(p)

    def run(path: Path):  # noqa: ANN202
        with reader(path, external_access=allow_files, allowed_directories=folders) as con:
            try:
                rel = con.sql(query)
                return rel.to_arrow_table() if rel is not None else None
            except duckdb.Error as exc:
                raise _Exit(f"SQL error: {str(exc).splitlines()[0]}", 2) from None

    def on(c) -> object:  # noqa: ANN001 - the store, or the scratch copy of the archive as known then
        if c.store_path != cfg.store_path:
            folders.append(c.store_path.parent)
        return run(c.store_path)

    table = _as_known(cfg, as_known_at, on, notes_to_stderr=True, compare=True)
    if table is None:
        return
    write_result(table, fmt, out, _console())


def _check_out_file(out: Path | None, force: bool) -> None:
    """Refuse, before any work, an --out that would overwrite a file (unless ``force``) or is a folder."""
    if out is None:
        return
    if out.is_dir():
        raise _Exit(f"--out {out} is a folder; give a file name", 2)
    if out.exists() and not force:
        raise _Exit(f"--out {out} already exists; not overwritten (add --force to replace it)", 1)
    if not out.parent.is_dir():
        raise _Exit(f"--out {out}: folder {out.parent} does not exist", 2)


# --- status --------------------------------------------------------------------------------------

@app.command()
def status(config: ConfigOption = None) -> None:
    """What is in the store: curves, date ranges, last load, open findings, pending forwards."""
    from flows.output import print_status
    from warehouse.connect import reader
    from warehouse.status import store_status

    cfg = _config()
    with reader(cfg.store_path) as con:
        info = store_status(con)
    print_status(info, cfg, _console())


# --- check and build -----------------------------------------------------------------------------

KnownAtOption = Annotated[str | None, typer.Option(
    "--as-known-at", metavar="TS", help="Compute from the archive as it stood at this time (ISO 8601; UTC when "
                                        "no zone is given), on a scratch copy.")]


def _known_at(value: str | None):  # noqa: ANN202
    """The parsed ``--as-known-at`` time (naive UTC), or None."""
    if value is None:
        return None
    from flows.known_at_step import parse_known_at

    return parse_known_at(value, "--as-known-at")


def _print_notes(notes: list[str], console) -> None:  # noqa: ANN001
    for line in notes:
        console.print(line, markup=False)


def _as_known(cfg, as_known_at: str | None, step, *, notes_to_stderr: bool, **what):  # noqa: ANN001, ANN202
    """``step(cfg)`` on the store, or, with ``--as-known-at``, on a scratch copy of the archive as it stood
    then (``what``: which steps :func:`flows.known_at_step.known_at` runs first), its notes printed."""
    ts = _known_at(as_known_at)
    if ts is None:
        return step(cfg)
    from flows.known_at_step import known_at

    with known_at(cfg, ts, **what) as k:
        out = step(k.cfg)
    _print_notes(k.notes, _console(stderr=notes_to_stderr))
    return out


def _day(value: str | None, option: str) -> str | None:
    if value is None:
        return None
    import numpy as np

    try:
        return str(np.datetime64(value, "D"))
    except ValueError:
        raise _Exit(f"{option} {value!r} is not a date (YYYY-MM-DD)", 2) from None


@app.command()
def check(
    curve: CurveOption = None,
    first: FromOption = None,
    last: ToOption = None,
    all_days: Annotated[bool, typer.Option("--all", help="Re-check every day, not only new ones.")] = False,
    accept: Annotated[tuple[str, str] | None, typer.Option("--accept", metavar="CURVE DAY",
                                                          help="Override a day's reject findings.")] = None,
    reason: Annotated[str | None, typer.Option("--reason", metavar="TEXT",
                                               help="Why the accepted day's quotes are right (needed with --accept).")
                      ] = None,
    config: ConfigOption = None,
) -> None:
    """Run the curve-level data checks and show the open findings; exit 1 if any reject is open."""
    from flows.check_step import accept_day, run_checks
    from flows.output import print_findings

    cfg = _config(curve)
    console = _console()
    if accept is None and reason is not None:
        raise _Exit("--reason goes with --accept CURVE DAY", 2)
    if accept is not None:
        a_curve, a_day = accept
        if reason is None or not reason.strip():
            raise _Exit("--accept needs --reason TEXT: why the day's quotes are right, kept with the acceptance", 2)
        cfg.curve(a_curve)
        n = accept_day(cfg, a_curve, _day(a_day, "--accept") or a_day, reason.strip())
        if n == 0:
            raise _Exit(f"{a_curve} {a_day} has no open reject finding; nothing accepted", 1)
        console.print(f"accepted {a_curve} {a_day}: {n} reject finding(s) overridden until the day's quotes "
                      "change; the day will be built")
        return
    summary = run_checks(cfg, curve, _day(first, "--from"), _day(last, "--to"), all_days)
    for name, info in summary.curves.items():
        console.print(f"{name}: checked {info['days_checked']:,} day(s), {info['findings']:,} finding(s)")
    if print_findings(cfg, console, curve, _day(first, "--from"), _day(last, "--to")):
        raise typer.Exit(1)


@app.command()
def build(
    curve: CurveOption = None,
    first: FromOption = None,
    last: ToOption = None,
    rebuild: Annotated[bool, typer.Option("--rebuild", help="Rebuild days already built.")] = False,
    method: Annotated[str | None, typer.Option("--method", metavar="METHOD", help="What-if interpolation method.")
                      ] = None,
    config: ConfigOption = None,
) -> None:
    """Build zero curves and forward surfaces for days not yet built."""
    from pipeline.config import INTERPOLATIONS

    if method is not None and method not in INTERPOLATIONS:
        raise _Exit(f"--method {method!r} is not allowed; allowed: {', '.join(INTERPOLATIONS)}", 2)
    from flows.build_step import run_build

    cfg = _config(curve)
    console = _console()
    with _progress(console) as progress:
        tasks: dict[str, int] = {}

        def on_progress(name: str, done: int, total: int) -> None:
            if name not in tasks:
                tasks[name] = progress.add_task(f"building {name}", total=total)
            progress.update(tasks[name], completed=done)

        summary = run_build(cfg, curve, _day(first, "--from"), _day(last, "--to"), rebuild, method, on_progress)
    for name, info in summary.curves.items():
        extra = f", {info['held']} held back by reject findings" if info["held"] else ""
        failed = f", {info['failed']} could not be built" if info["failed"] else ""
        console.print(f"{name} ({info['scenario']}, {info['method']}): built {info['days_built']:,} day(s), "
                      f"{info['forwards']:,} forwards{failed}{extra}")


@app.command()
def realize(config: ConfigOption = None) -> None:
    """Match forwards whose target date has been observed with the realised rate."""
    from flows.realize_step import run_realize

    cfg = _config()
    summary = run_realize(cfg, full=True)
    console = _console()
    for name, info in summary.curves.items():
        again = f", {info['re_derived']:,} re-derived after a restatement" if info["re_derived"] else ""
        console.print(f"{name}: realised {info['realized']:,} forward(s){again}; {info['pending']:,} pending")


def _months_option(value: str | None, option: str) -> int | None:
    if value is None:
        return None
    from pipeline.tenors import TenorError, parse_tenor

    try:
        t = parse_tenor(value, allow_zero=True)
    except TenorError as exc:
        raise _Exit(f"{option}: {exc}", 2) from None
    if t.months is None:
        raise _Exit(f"{option} {value!r} must be whole months (e.g. 3M, 1Y)", 2)
    return t.months


def _month_label(months: int) -> str:
    return f"{months // 12}Y" if months and months % 12 == 0 else f"{months}M"


def _in_grid(cfg, names: list[str], months: int | None, given: str | None, option: str, what: str,  # noqa: ANN001
             attr: str) -> None:
    """A --start / --tenor outside every chosen curve's forward grid would show an empty table: refuse it,
    naming the grid's values (``forward.starts`` / ``forward.tenors`` of the config)."""
    if months is None:
        return
    grids = {n: [t.months for t in getattr(cfg.curve(n), attr)] for n in names}
    if any(months in g for g in grids.values()):
        return
    shown = {n: ", ".join(_month_label(m) for m in g) or "none" for n, g in grids.items()}
    listed = (next(iter(shown.values())) if len(set(shown.values())) == 1
              else "; ".join(f"{n}: {text}" for n, text in shown.items()))
    raise _Exit(f"{option} {given} is not in the forward grid; the {what} are {listed}", 2)


@app.command()
def audit(
    curve: CurveOption = None,
    start: StartOption = None,
    tenor: TenorOption = None,
    first: FromOption = None,
    last: ToOption = None,
    fmt: TableFormatOption = "table",
    as_known_at: KnownAtOption = None,
    config: ConfigOption = None,
) -> None:
    """Forecast-error statistics by horizon, with a plain-language line for each."""
    _table_format(fmt)
    s_months, t_months = _months_option(start, "--start"), _months_option(tenor, "--tenor")
    from flows.audit_step import run_audit
    from flows.output import print_audit

    cfg = _config(curve)
    names = [curve] if curve else list(cfg.curves)
    _in_grid(cfg, names, s_months, start, "--start", "starts", "forward_starts")
    _in_grid(cfg, names, t_months, tenor, "--tenor", "tenors", "forward_tenors")
    window = (_day(first, "--from"), _day(last, "--to"))
    results = _as_known(cfg, as_known_at, lambda c: run_audit(c, curve, *window), notes_to_stderr=fmt != "table",
                        audit=False)
    print_audit(results, fmt, _console(), s_months, t_months)


@app.command()
def compare(
    curve: CurveOption = None,
    start: StartOption = None,
    tenor: TenorOption = None,
    first: FromOption = None,
    last: ToOption = None,
    fmt: TableFormatOption = "table",
    as_known_at: KnownAtOption = None,
    config: ConfigOption = None,
) -> None:
    """Score the forwards against every contender forecast: errors, tests and the confidence set by horizon."""
    _table_format(fmt)
    s_months, t_months = _months_option(start, "--start"), _months_option(tenor, "--tenor")
    from flows.compare_step import run_compare
    from flows.output import print_compare

    cfg = _config(curve)
    first_day, last_day = _day(first, "--from"), _day(last, "--to")
    if first_day and last_day and first_day > last_day:
        raise _Exit(f"--from {first_day} is after --to {last_day}", 2)
    summary = _as_known(cfg, as_known_at, lambda c: run_compare(c, curve, first_day, last_day),
                        notes_to_stderr=fmt != "table", audit=False, model=True)
    print_compare(summary, fmt, _console(), s_months, t_months)


@app.command()
def changes(
    since: Annotated[str, typer.Option("--since", metavar="TS", help="Since this time (ISO 8601; UTC when no zone "
                                                                     "is given).")],
    curve: CurveOption = None,
    fmt: TableFormatOption = "table",
    config: ConfigOption = None,
) -> None:
    """What changed in the record since a time, and why: restated quotes, rebuilt days, superseded outcomes,
    audit cells that moved."""
    _table_format(fmt)
    from flows.changes_step import change_rows, changes_since
    from flows.known_at_step import parse_known_at
    from flows.output import print_changes

    ts = parse_known_at(since, "--since")
    cfg = _config(curve)
    print_changes(change_rows(changes_since(cfg, ts, curve)), fmt, _console(), ts)


@app.command()
def model(
    curve: CurveOption = None,
    factors: Annotated[int | None, typer.Option("--factors", metavar="K",
                                                help="Principal components in the model's state (default: "
                                                     "model.factors, 5).")] = None,
    max_months: Annotated[int | None, typer.Option("--max-months", metavar="N",
                                                   help="Longest panel maturity in months (default: "
                                                        "model.max_months, 120).")] = None,
    full_sample_only: Annotated[bool, typer.Option("--full-sample-only",
                                                   help="Only the full-sample fit; keep the real-time rows.")] = False,
    config: ConfigOption = None,
) -> None:
    """The term-structure lens: month-end panel, excess returns, expectations-hypothesis tests, model term premium."""
    from pipeline.config import MODEL_FACTORS, MODEL_MAX_MONTHS

    for option, value, (lo, hi) in (("--factors", factors, MODEL_FACTORS), ("--max-months", max_months,
                                                                           MODEL_MAX_MONTHS)):
        if value is not None and not lo <= value <= hi:
            raise _Exit(f"{option} {value} is not allowed; allowed: a whole number from {lo} to {hi}", 2)
    from flows.model_step import run_model
    from flows.output import print_model

    cfg = _config()
    if curve is not None:
        cfg.curve(curve)
    summary = run_model(cfg, curve, factors, max_months, full_sample_only)
    print_model(summary, _console())
    if summary.refused:
        raise typer.Exit(1)


@app.command()
def report(
    out: Annotated[Path | None, typer.Option("--out", metavar="DIR", help="Folder for the report (default: reports/ "
                                             "beside the config).")] = None,
    curve: CurveOption = None,
    first: FromOption = None,
    last: ToOption = None,
    as_known_at: KnownAtOption = None,
    config: ConfigOption = None,
) -> None:
    """Write a self-contained HTML audit report and print its path.

    The report gets a new name in the folder (curve and UTC time, ``-2``... if taken): nothing is overwritten.
    """
    from flows.report_step import write_report

    if out is not None and out.exists() and not out.is_dir():
        raise _Exit(f"--out {out} is a file; --out names the folder the report is written into", 2)
    cfg = _config(curve)
    window = (_day(first, "--from"), _day(last, "--to"))
    ts = _known_at(as_known_at)
    if ts is not None and out is None:  # reports/ beside the real config, not inside the scratch folder
        out = (cfg.path.parent if cfg.path else Path(cfg.store_path).parent) / "reports"
    path = _as_known(cfg, as_known_at, lambda c: write_report(c, out, curve, *window, as_known_at=ts),
                     notes_to_stderr=True, compare=True)
    _console().print(str(path))


@app.command()
def run(config: ConfigOption = None) -> None:
    """The daily job as one Prefect flow: load the inbox, check, build, realize, audit."""
    from flows.prefect_commands import cli_run
    from warehouse.run_lock import run_lock

    # taken before Prefect starts, so a second run stops at once rather than after the server's start-up
    with run_lock(_config().store_path, "run"):
        rc = cli_run(_config_path(), _console())
    raise typer.Exit(rc)


@app.command()
def backfill(
    first: Annotated[str, typer.Option("--from", metavar="DATE", help="First as-of date (YYYY-MM-DD).")],
    last: Annotated[str, typer.Option("--to", metavar="DATE", help="Last as-of date (YYYY-MM-DD).")],
    workers: Annotated[int, typer.Option("--workers", metavar="N",
                                         help="Parallel workers (a local Dask cluster if > 1).")] = 1,
    scheduler: Annotated[str | None, typer.Option("--scheduler", metavar="ADDRESS",
                                                  help="Address of an existing Dask scheduler.")] = None,
    config: ConfigOption = None,
) -> None:
    """Build and realise a range of dates in parallel chunks, with a progress bar."""
    from flows.prefect_commands import cli_backfill
    from warehouse.run_lock import run_lock

    if workers < 1:
        raise _Exit("--workers must be at least 1", 2)
    with run_lock(_config().store_path, "backfill"):
        rc = cli_backfill(_config_path(), _day(first, "--from"), _day(last, "--to"), workers, scheduler, _console())
    raise typer.Exit(rc)


@app.command()
def serve(
    cron: Annotated[str | None, typer.Option("--cron", metavar="EXPR", help="Cron expression (default from the config: "
                                             "weekdays 18:30).")] = None,
    config: ConfigOption = None,
) -> None:
    """Serve the daily job on a schedule through Prefect."""
    from flows.prefect_commands import cli_serve

    raise typer.Exit(cli_serve(_config_path(), cron, _console()))


@app.command()
def export(
    to: Annotated[Path, typer.Option("--to", metavar="DIR", help="Folder for the Parquet files.")],
    config: ConfigOption = None,
) -> None:
    """Write every view as Parquet, by curve and year where it has both; replaces an earlier export.

    A view with a curve and a date goes to DIR/VIEW/curve=C/year=Y/ (partition columns only in the paths), any
    other view to DIR/VIEW/data.parquet.
    """
    from flows.export_step import EXPORT_VIEWS, export_views

    cfg = _config()
    summary = export_views(cfg, to)
    console = _console()
    for view, n in summary.rows.items():
        layout = f"by curve and year of {EXPORT_VIEWS[view]}" if EXPORT_VIEWS[view] else "one file"
        console.print(f"{view}: {n:,} row(s), {layout}", markup=False)
    again = " (replacing the earlier export there)" if summary.replaced else ""
    console.print(f"wrote {len(summary.rows)} view(s) under {summary.target}{again}", markup=False)


def _config_path() -> Path:
    from pipeline.config import find_config

    cfg = _config()  # validates, so a bad config fails here with its one-line message
    return Path(cfg.path) if cfg.path else find_config(_state["config"])  # type: ignore[arg-type]


def _progress(console):  # noqa: ANN001, ANN202
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    return Progress(TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
                    console=console, transient=True, disable=not console.is_terminal)


# --- demo ----------------------------------------------------------------------------------------

@app.command()
def demo(directory: Annotated[Path, typer.Argument(metavar="DIR", help="Folder for the demo.")] = Path("afterward-demo")
         ) -> None:
    """Make the invented demo market, run the whole job on it, and print where everything is."""
    from flows.demo import run_demo

    run_demo(directory, _console())


# --- entry point ---------------------------------------------------------------------------------

def _usage_errors() -> tuple[type[BaseException], type[BaseException]]:
    """typer's own usage-error class (it carries its own copy of click) and its abort."""
    try:
        from typer._click.exceptions import ClickException
    except ImportError:  # a typer that uses the click package
        from click.exceptions import ClickException
    return ClickException, typer.Abort


def main(argv: list[str] | None = None) -> int:
    """Run the command line; map every user-facing error to a one-line message and an exit status."""
    usage_error, abort = _usage_errors()

    def fail(message: str, code: int) -> int:
        print(f"afterward: {message}", file=sys.stderr)
        return code

    _state["config"] = None
    try:
        rc = app(args=argv, prog_name="afterward", standalone_mode=False)
    except typer.Exit as exc:
        return int(exc.exit_code or 0)
    except ConfigError as exc:
        return fail(f"config: {exc}", exc.exit_code)
    except AfterwardError as exc:  # everything a user can cause (pipeline.errors)
        return fail(str(exc), exc.exit_code)
    except KeyboardInterrupt:
        return fail("interrupted", 130)
    except abort:
        return fail("aborted", 1)
    except usage_error as exc:
        return fail(exc.format_message(), 2)
    except Exception as exc:  # the last line of defence: one line, no traceback
        if os.environ.get("AFTERWARD_DEBUG"):
            raise
        first = str(exc).splitlines()[0] if str(exc) else ""
        return fail(f"internal error: {type(exc).__name__}: {first} (set AFTERWARD_DEBUG=1 for details)", 1)
    return rc if isinstance(rc, int) else 0


if __name__ == "__main__":
    sys.exit(main())
