"""The command line on a store the steps built: `status` counts pending forwards; `audit` output parses.

References: the pending count by hand (the contract's tolerance rule with numpy business days);
the CSV and JSON parsed by pandas and the json module and compared with what the store holds.
"""

from __future__ import annotations

import io
import json
import re

import numpy as np
import pandas as pd
import pytest

from tests.conftest import run_cli
from tests.e2e.stores import FLAT_HOLIDAYS, clone_project, expected_observation


@pytest.fixture(scope="module")
def cli_store(flat_store, tmp_path_factory):
    return clone_project(flat_store[0], tmp_path_factory.mktemp("cli")), flat_store[1]


def test_status_counts_pending_forwards(cli_store):
    p, levels = cli_store
    fwd = p.sql("SELECT * FROM forwards")
    want = expected_observation(fwd, levels.index.to_numpy().astype("datetime64[D]"), FLAT_HOLIDAYS, 3)
    n_pending = int((want["kind"] != "realised").sum())
    assert n_pending > 0
    proc = run_cli("status", cwd=p.root)
    assert proc.returncode == 0, proc.stderr
    m = re.search(r"pending forwards[^:]*:\s*([\d,]+)", proc.stdout)
    assert m, proc.stdout
    assert int(m.group(1).replace(",", "")) == n_pending == p.value("SELECT count(*) FROM pending_forwards")


@pytest.mark.parametrize("fmt", ["csv", "json"])
def test_audit_output_parses(cli_store, fmt):
    p, _ = cli_store
    proc = run_cli("audit", "--format", fmt, cwd=p.root)
    assert proc.returncode == 0, proc.stderr
    assert "Traceback" not in proc.stdout + proc.stderr
    if fmt == "csv":
        got = pd.read_csv(io.StringIO(proc.stdout))
    else:
        data = json.loads(proc.stdout)
        got = pd.DataFrame(data if isinstance(data, list) else data.get("rows", data))
    want = p.sql("SELECT * FROM audit_summary ORDER BY start_months, tenor_months, regime")
    got = got.sort_values(["start_months", "tenor_months", "regime"]).reset_index(drop=True)
    assert len(got) == len(want) == 9
    for col in ("start_months", "tenor_months", "n"):
        assert list(got[col].astype(int)) == list(want[col].astype(int))
    for col in ("mean_error_bp", "rmse_bp", "mae_bp"):
        np.testing.assert_allclose(got[col].astype(float), want[col].astype(float), rtol=1e-9, atol=1e-12)
    assert "verdict" in got.columns


def test_audit_filters_by_horizon(cli_store):
    p, _ = cli_store
    proc = run_cli("audit", "--start", "1M", "--tenor", "3M", "--format", "csv", cwd=p.root)
    assert proc.returncode == 0, proc.stderr
    got = pd.read_csv(io.StringIO(proc.stdout))
    assert set(zip(got["start_months"], got["tenor_months"], strict=True)) == {(1, 3)}
