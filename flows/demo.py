"""``afterward demo``: the invented market, generated, loaded and carried through the whole job."""

from __future__ import annotations

from pathlib import Path

from pipeline.config import load_config

__all__ = ["make_demo_folder", "run_demo"]


def make_demo_folder(directory: Path) -> Path:
    """Write the demo's afterward.toml and inbox into ``directory``; returns the config path."""
    from pipeline.demo_market import demo_config_toml, write_demo_inbox

    directory.mkdir(parents=True, exist_ok=True)
    config_path = directory / "afterward.toml"
    config_path.write_text(demo_config_toml(), encoding="utf-8")
    cfg = load_config(config_path)
    write_demo_inbox(cfg.inbox)
    return config_path


def run_demo(directory: Path, console) -> None:  # noqa: ANN001
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    from flows.steps import load_files

    console.print(f"writing the invented demo market into {directory} ...")
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

        load_files(cfg, files, on_file=on_file)
    console.print(
        f"loaded {totals['loaded']} files ({totals['already loaded']} already loaded, {totals['refused']} refused): "
        f"{totals['rows']:,} quotes accepted, {totals['revised']} revised, {totals['rejected']} rows rejected"
    )
    console.print(f"config: {config_path}")
    console.print(f"store:  {cfg.store_path}")
