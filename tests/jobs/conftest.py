"""Fixtures for the Prefect jobs: one Prefect test server for the session, demo files, small projects.

Prefect reads its settings when it is first imported, so its environment is set here, at import
time: a throw-away PREFECT_HOME, a start-up timeout a cold machine can meet, no telemetry.
"""

from __future__ import annotations

import os
import shutil
import tempfile

_HOME = tempfile.mkdtemp(prefix="afterward-prefect-home-")
os.environ["PREFECT_HOME"] = _HOME
os.environ["PREFECT_SERVER_EPHEMERAL_STARTUP_TIMEOUT_SECONDS"] = "90"
os.environ["PREFECT_SERVER_ANALYTICS_ENABLED"] = "false"
os.environ["PREFECT_LOGGING_HANDLERS_CONSOLE_LEVEL"] = "ERROR"
os.environ.setdefault("AFTERWARD_LOCK_WAIT", "2")

import pytest  # noqa: E402

from pipeline.config import Config, load_config  # noqa: E402


@pytest.fixture(scope="session", autouse=True)
def prefect_server():
    """Prefect's test harness (a temporary server and database), once for the whole session."""
    from prefect.testing.utilities import prefect_test_harness

    with prefect_test_harness(server_startup_timeout=90):
        yield
    shutil.rmtree(_HOME, ignore_errors=True)


@pytest.fixture(scope="session")
def demo_files(tmp_path_factory):  # noqa: ANN001, ANN201
    """The demo market's delivered files (30 years, two curves), written once for the session."""
    from pipeline.demo import write_demo_inbox

    return write_demo_inbox(tmp_path_factory.mktemp("demo-inbox"))


@pytest.fixture
def make_project(demo_files, tmp_path):  # noqa: ANN001, ANN201
    """``make_project(name, years)``: a demo project under ``tmp_path/name`` whose inbox holds the demo
    files of ``years`` (the store not yet created); returns its :class:`Config`."""
    from pipeline.demo import demo_config_toml

    def make(name: str, years: tuple[int, ...]) -> Config:
        root = tmp_path / name
        root.mkdir(parents=True, exist_ok=True)
        (root / "afterward.toml").write_text(demo_config_toml(), encoding="utf-8")
        cfg = load_config(root / "afterward.toml")
        cfg.inbox.mkdir(parents=True, exist_ok=True)
        for p in demo_files.files:
            if any(f"_{y}-" in p.name for y in years):
                shutil.copy2(p, cfg.inbox / p.name)
        return cfg

    return make
