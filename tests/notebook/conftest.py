"""The notebook handle's store: built once per session by the real steps (see store.py); tests that
change a store work on their own copy."""

from __future__ import annotations

import pytest

from tests.e2e.stores import Project
from tests.notebook.store import build_store


@pytest.fixture(scope="session")
def small_store(tmp_path_factory: pytest.TempPathFactory) -> Project:
    return build_store(tmp_path_factory.mktemp("notebook"))
