"""Stores built on disk by the real steps (load, check, build, realize, audit), no Prefect.

The demo store is built once per session and shared; tests that change a store (accepting a day,
restating a quote, rebuilding with another method) work on their own copy or their own small
synthetic store, so the order in which tests run does not matter.
"""

from __future__ import annotations

import pytest

from flows.audit_step import run_audit
from flows.build_step import run_build
from flows.check_step import run_checks
from flows.load_step import load_files
from flows.realize_step import run_realize
from pipeline.config import load_config
from pipeline.demo import demo_config_toml, write_demo_inbox
from tests.e2e.stores import DemoStore, build_flat_project


@pytest.fixture(scope="session")
def demo_loaded(tmp_path_factory: pytest.TempPathFactory) -> DemoStore:
    """The invented demo market written to an inbox and loaded file by file, in name order."""
    root = tmp_path_factory.mktemp("demo")
    (root / "afterward.toml").write_text(demo_config_toml(), encoding="utf-8")
    cfg = load_config(root / "afterward.toml")
    manifest = write_demo_inbox(cfg.inbox)
    files = sorted(manifest.files, key=lambda p: p.name)
    loads = load_files(cfg, files)
    return DemoStore(root, cfg, manifest, loads)


@pytest.fixture(scope="session")
def demo_checked(demo_loaded: DemoStore) -> DemoStore:
    """The demo store after the curve-level checks."""
    run_checks(demo_loaded.cfg)
    return demo_loaded


@pytest.fixture(scope="session")
def demo_done(demo_checked: DemoStore) -> DemoStore:
    """The demo store after build, realize and audit (the whole job without Prefect)."""
    run_build(demo_checked.cfg)
    run_realize(demo_checked.cfg)
    run_audit(demo_checked.cfg)
    return demo_checked


@pytest.fixture(scope="session")
def flat_store(tmp_path_factory: pytest.TempPathFactory):  # noqa: ANN201
    """A year and a quarter of flat curves whose level changes every day, through every step."""
    return build_flat_project(tmp_path_factory.mktemp("flat"))
