"""The wheel carries the schema files (an installed afterward finds sql/ inside its own package) and
the notebook package ``afterward``, which imports from the unpacked wheel alone."""

from __future__ import annotations

import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

from tests.conftest import REPO


@pytest.mark.slow
def test_wheel_ships_the_schema_files(tmp_path: Path):
    built = subprocess.run([sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(tmp_path), str(REPO)],
                           capture_output=True, text=True, timeout=300)
    assert built.returncode == 0, built.stderr[-2000:]
    [wheel] = tmp_path.glob("afterward-*.whl")
    with zipfile.ZipFile(wheel) as zf:
        names = set(zf.namelist())
        zf.extractall(tmp_path / "site")
    expected = {f"warehouse/sql/{p.name}" for p in (REPO / "sql").glob("*.sql")}
    assert expected and expected <= names
    notebook = {f"afterward/{p.name}" for p in (REPO / "afterward").glob("*.py")}
    assert {"afterward/__init__.py", "afterward/handle.py"} <= notebook <= names
    # run from the unpacked wheel alone (not the source tree): the schema is found and applies
    probe = subprocess.run(
        [sys.executable, "-c",
         "import duckdb, warehouse.schema as s; c = duckdb.connect(); print(s.sql_dir()); print(s.apply_schema(c))"],
        cwd=tmp_path, env={"PYTHONPATH": str(tmp_path / "site"), "PATH": "/usr/bin:/bin"},
        capture_output=True, text=True, timeout=120,
    )
    assert probe.returncode == 0, probe.stderr[-2000:]
    where, version = probe.stdout.split()
    assert Path(where).is_relative_to(tmp_path / "site")
    assert int(version) == max(int(p.name[:3]) for p in (REPO / "sql").glob("[0-9][0-9][0-9]_*.sql"))
    handle = subprocess.run(
        [sys.executable, "-c", "import afterward; print(afterward.__file__); print(callable(afterward.open))"],
        cwd=tmp_path, env={"PYTHONPATH": str(tmp_path / "site"), "PATH": "/usr/bin:/bin"},
        capture_output=True, text=True, timeout=120,
    )
    assert handle.returncode == 0, handle.stderr[-2000:]
    where, ok = handle.stdout.split()
    assert Path(where).is_relative_to(tmp_path / "site") and ok == "True"
