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

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    pretty_exceptions_enable=False,
    help="Archive rate curves, build implied forwards, and score them against realised rates.",
)

_state: dict[str, object] = {"config": None}


class _Exit(Exception):
    def __init__(self, message: str, code: int) -> None:
        super().__init__(message)
        self.code = code


def _console(stderr: bool = False):  # noqa: ANN202
    from rich.console import Console

    return Console(stderr=stderr, highlight=False, soft_wrap=True)


def _config():  # noqa: ANN202
    from pipeline.config import find_config, load_config

    return load_config(find_config(_state["config"]))  # type: ignore[arg-type]


@app.callback()
def _main(
    config: Annotated[str | None, typer.Option("--config", help="Path to afterward.toml.")] = None,
) -> None:
    _state["config"] = config


# --- init ----------------------------------------------------------------------------------------

@app.command()
def init(directory: Annotated[Path, typer.Argument(help="Folder for afterward.toml and the store.")] = Path(".")
         ) -> None:
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
    return (f"{name}: read {o.rows_read}, accepted {o.rows_accepted}{revised}{unchanged}, "
            f"rejected {o.rows_rejected}")


@app.command()
def load(
    files: Annotated[list[Path], typer.Argument(help="Rate files (CSV, Parquet, .xlsx).")],
    curve: Annotated[str | None, typer.Option("--curve", help="Load every file into this curve.")] = None,
) -> None:
    """Load rate files, each in one transaction, and report what happened to every row."""
    from flows.steps import load_files

    cfg = _config()
    if curve is not None:
        cfg.curve(curve)
    console = _console()
    outcomes = load_files(cfg, files, curve, on_file=lambda o: console.print(describe_outcome(o)))
    bad = [o for o in outcomes if o.status in ("refused", "missing") or o.rows_rejected]
    if bad:
        raise typer.Exit(1)


# --- sql -----------------------------------------------------------------------------------------

_ALLOWED_STATEMENTS = {"SELECT", "EXPLAIN"}


def _guard_sql(query: str) -> None:
    import duckdb

    try:
        statements = duckdb.extract_statements(query)
    except duckdb.Error as exc:
        raise _Exit(f"SQL error: {str(exc).splitlines()[0]}", 2) from None
    if not statements:
        raise _Exit("no SQL statement given", 2)
    for st in statements:
        kind = str(st.type).rsplit(".", 1)[-1]
        if kind not in _ALLOWED_STATEMENTS:
            raise _Exit(f"refused: {kind} statements are not allowed; 'afterward sql' is read-only "
                        "(queries only)", 2)


@app.command()
def sql(
    query: Annotated[str, typer.Argument(help="A read-only SQL query over the views.")],
    fmt: Annotated[str, typer.Option("--format", help="table | csv | json | parquet")] = "table",
    out: Annotated[Path | None, typer.Option("--out", help="Write the result to this file.")] = None,
    allow_files: Annotated[bool, typer.Option("--allow-files", help="Let the query read files.")] = False,
) -> None:
    """Run an ad-hoc query on a read-only connection."""
    from flows.output import write_result

    if fmt not in ("table", "csv", "json", "parquet"):
        raise _Exit(f"--format {fmt!r} is not allowed; allowed: table, csv, json, parquet", 2)
    if fmt == "parquet" and out is None:
        raise _Exit("--format parquet needs --out FILE", 2)
    _guard_sql(query)
    import duckdb

    from warehouse.connect import reader

    cfg = _config()
    with reader(cfg.store_path, external_access=allow_files) as con:
        try:
            rel = con.sql(query)
            table = rel.to_arrow_table() if rel is not None else None
        except duckdb.Error as exc:
            raise _Exit(f"SQL error: {str(exc).splitlines()[0]}", 2) from None
    if table is None:
        return
    write_result(table, fmt, out, _console())


# --- status --------------------------------------------------------------------------------------

@app.command()
def status() -> None:
    """What is in the store: curves, date ranges, last load, open findings, pending forwards."""
    from flows.output import print_status
    from warehouse.connect import reader
    from warehouse.status import store_status

    cfg = _config()
    with reader(cfg.store_path) as con:
        info = store_status(con)
    print_status(info, cfg, _console())


# --- demo ----------------------------------------------------------------------------------------

@app.command()
def demo(directory: Annotated[Path, typer.Argument(help="Folder for the demo.")] = Path("afterward-demo")
         ) -> None:
    """Make the invented demo market, run the whole job on it, and print where everything is."""
    from flows.demo import run_demo

    run_demo(directory, _console())


# --- entry point ---------------------------------------------------------------------------------

def main(argv: list[str] | None = None) -> int:
    """Run the command line; map every user-facing error to a one-line message and an exit status."""
    from pipeline.config import ConfigError

    def fail(message: str, code: int) -> int:
        print(f"afterward: {message}", file=sys.stderr)
        return code

    try:
        rc = app(args=argv, standalone_mode=False)
    except typer.Exit as exc:
        return int(exc.exit_code or 0)
    except _Exit as exc:
        return fail(str(exc), exc.code)
    except ConfigError as exc:
        return fail(f"config: {exc}", 2)
    except KeyboardInterrupt:
        return fail("interrupted", 130)
    except Exception as exc:  # the last line of defence: one line, no traceback
        name = type(exc).__name__
        if name == "Abort":
            return fail("aborted", 1)
        if hasattr(exc, "format_message") and name.endswith(("Error", "Exception", "Parameter", "Option")):
            # typer's own usage errors (it carries its own copy of click)
            return fail(exc.format_message(), 2)
        from flows.steps import UserError
        from warehouse.connect import StoreError

        if isinstance(exc, UserError | StoreError):
            return fail(str(exc), 1)
        if os.environ.get("AFTERWARD_DEBUG"):
            raise
        first = str(exc).splitlines()[0] if str(exc) else ""
        return fail(f"internal error: {type(exc).__name__}: {first} (set AFTERWARD_DEBUG=1 for details)", 1)
    return rc if isinstance(rc, int) else 0


if __name__ == "__main__":
    sys.exit(main())
