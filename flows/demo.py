"""``afterward demo``: the invented market, generated, loaded and carried through the whole job.

The demo calls the same steps as the commands (load, check, build, realize, audit, the desk view's
forecast file, compare, report), without
Prefect, so it starts quickly and shows each stage's result as it goes.
"""

from __future__ import annotations

from pathlib import Path

from pipeline.config import Config, load_config
from pipeline.demo.desk_view import DESK_VIEW_FILE, DESK_VIEW_NAME, DESK_VIEW_WEEKDAY

__all__ = ["load_desk_view", "make_demo_folder", "run_demo"]


def make_demo_folder(directory: Path) -> Path:
    """Write the demo's afterward.toml and inbox into ``directory``; returns the config path."""
    from pipeline.demo import demo_config_toml, write_demo_inbox

    directory.mkdir(parents=True, exist_ok=True)
    config_path = directory / "afterward.toml"
    config_path.write_text(demo_config_toml(), encoding="utf-8")
    cfg = load_config(config_path)
    write_demo_inbox(cfg.inbox)
    return config_path


def load_desk_view(cfg: Config, directory: Path, *, con) -> tuple[Path, object]:  # noqa: ANN001
    """Write the treasury desk's weekly view (:mod:`pipeline.demo.desk_view`), drawn from the store's
    built forwards and their outcomes, to ``directory / DESK_VIEW_FILE`` and load it as the contender
    ``DESK_VIEW_NAME``; returns the file and its load outcome. Run after ``realize``."""
    from flows.forecasts_step import load_forecasts
    from pipeline.demo.desk_view import desk_view_csv, desk_view_forecasts
    from warehouse.forecasts import forward_sample

    path = directory / DESK_VIEW_FILE
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(desk_view_csv(desk_view_forecasts(forward_sample(con, DESK_VIEW_WEEKDAY))))
    [outcome] = load_forecasts(cfg, [path], DESK_VIEW_NAME, units="percent", con=con)
    return path, outcome


HEADLINE = ("govt", 24, 12)  # the verdict the demo prints: the 1Y rate 2Y ahead on the government curve


def _headline(compared) -> str:  # noqa: ANN001
    """One verdict line of the comparison: :data:`HEADLINE`'s cell, else the first cell compared."""
    curve, start, tenor = HEADLINE
    for name, info in compared.curves.items():
        v = info["verdicts"]
        hit = v[(v["start_months"] == start) & (v["tenor_months"] == tenor)] if name == curve else v.iloc[:0]
        if len(hit):
            return f"{name} {hit['verdict'].iloc[0]}"
    for name, info in compared.curves.items():
        if len(info["verdicts"]):
            return f"{name} {info['verdicts']['verdict'].iloc[0]}"
    return "nothing to compare yet"


def run_demo(directory: Path, console) -> None:  # noqa: ANN001
    """Write the demo market into ``directory`` and carry it through the whole job on one store,
    printing a line a step and where the config, store and report are."""
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    from flows.audit_step import run_audit
    from flows.build_step import run_build
    from flows.check_step import run_checks
    from flows.compare_step import run_compare
    from flows.load_step import load_files, reader_process
    from flows.realize_step import run_realize
    from flows.report_step import write_report
    from warehouse.connect import writer

    console.print(f"writing the invented demo market (the Republic of Orvane, 30 years) into {directory} ...")
    config_path = make_demo_folder(directory)
    cfg = load_config(config_path)
    files = sorted(p for p in cfg.inbox.iterdir() if p.is_file())
    totals = {"loaded": 0, "already loaded": 0, "refused": 0, "rows": 0, "rejected": 0, "revised": 0}
    with Progress(TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
                  console=console, transient=False, disable=not console.is_terminal) as progress:
        task = progress.add_task("loading files", total=len(files))

        def on_file(o) -> None:  # noqa: ANN001
            totals[o.status if o.status in totals else "refused"] += 1
            totals["rows"] += o.rows_accepted
            totals["rejected"] += o.rows_rejected
            totals["revised"] += o.rows_revised
            progress.advance(task)

        def on_progress(name: str, done: int, total: int) -> None:
            progress.update(build_task, description=f"building {name}", completed=done, total=total)

        # one store for the job's steps; the reading process is forked before it is opened
        reader = reader_process()
        try:
            with writer(cfg.store_path) as con:
                load_files(cfg, files, on_file=on_file, con=con, reader=reader)
                console.print(
                    f"load: {totals['loaded']} files ({totals['already loaded']} already loaded, "
                    f"{totals['refused']} refused): {totals['rows']:,} quotes accepted, {totals['revised']} revised, "
                    f"{totals['rejected']} rows rejected")
                checked = run_checks(cfg, con=con)
                counts = ", ".join(f"{n}: {c['findings']:,}" for n, c in checked.curves.items())
                console.print(f"check: {checked.new_findings:,} findings ({counts}); "
                              "see 'afterward check' or the findings view")
                build_task = progress.add_task("building curves", total=None)
                built = run_build(cfg, on_progress=on_progress, con=con)
                progress.update(build_task, visible=False)
                held = sum(c["held"] for c in built.curves.values())
                console.print(f"build: {built.days_built:,} curve-days, {built.forwards_built:,} forwards "
                              f"({held} day(s) held back by reject findings)")
                realized = run_realize(cfg, con=con)
                pending = sum(c["pending"] for c in realized.curves.values())
                console.print(f"realize: {realized.realized:,} outcomes; {pending:,} forwards still pending")
                rows = sum(len(f) for f in run_audit(cfg, con=con).values())
                console.print(f"audit: {rows} horizon x regime rows in audit_summary; see 'afterward audit'")
                desk_path, desk = load_desk_view(cfg, directory, con=con)
                console.print(f"forecasts: {DESK_VIEW_NAME} ({desk.rows_accepted:,} weekly forecasts of the forward "
                              f"grid) loaded from {desk_path}")
                compared = run_compare(cfg, con=con)
                console.print(f"compare: {_headline(compared)}", markup=False)
        finally:
            if reader is not None:
                reader.shutdown(wait=True)
        report = write_report(cfg, None, None, None, None)
    console.print(f"config: {config_path}")
    console.print(f"store:  {cfg.store_path}")
    console.print(f"report: {report}")
    console.print("try:    afterward --config " + str(config_path) + " audit --curve govt --start 1Y")
    console.print("        afterward --config " + str(config_path) + " compare --curve govt --start 2Y")
