"""Size classes of the hostile corpus (``corpus.flood_corpus``), each file loaded by the real
``afterward load`` in a process of its own: its peak resident memory stays under 1 GiB, the counts
are the ones the file was built to give, and every reason and finding detail stays a few hundred
characters however large the group behind it (the defect: a 20,000-line one-day file took 24 GB,
each reason listing every line of its group).

The 10^6-row same-key flood is a typed long-layout Parquet file (a few MB, read column-wise); a
10^6-line CSV flood is measured by ``benchmarks/bench_flood.py`` instead, to keep this suite quick.
"""

from __future__ import annotations

import pytest

from tests.hardening.corpus import CORPUS_CONFIG, flood_corpus
from tests.hardening.harness import TALLY, load_problems, open_store, run_measured

PEAK_RSS = 1 << 30          # bytes: the bound for any one file's load
TIMEOUT = 180               # seconds per file (each takes a few seconds here)
MAX_REASON = 250            # characters: a reason names at most 3 values and lines, then counts the rest
MAX_DETAIL = 700            # characters: a finding names at most 3 rows with their reasons

CATEGORIES = ["same-key flood 10^3", "same-key flood 10^4", "same-key flood 10^5", "same-key flood 10^6",
              "same-key flood 10^5 (identical)", "wide one-day flood", "many distinct days", "many columns",
              "very long lines", "huge single cell"]


@pytest.fixture(scope="module")
def loaded_floods(tmp_path_factory):
    root = tmp_path_factory.mktemp("floods")
    (root / "afterward.toml").write_text(CORPUS_CONFIG, encoding="utf-8")
    floods = flood_corpus(root / "files")
    runs = {f.category: (f, run_measured("load", str(f.path), cwd=root, timeout=TIMEOUT)) for f in floods}
    TALLY.bad_inputs += len(floods)
    TALLY.tracebacks += sum(r.traceback for _, r in runs.values())
    TALLY.hangs += sum(r.hung for _, r in runs.values())
    TALLY.notes.append("flood corpus peak RSS (MiB): " + ", ".join(
        f"{c} {r.peak_rss / 2**20:.0f}" for c, (_, r) in runs.items()))
    return root, runs


def test_the_size_classes_are_all_there(loaded_floods):
    _root, runs = loaded_floods
    assert list(runs) == CATEGORIES


@pytest.mark.parametrize("category", CATEGORIES, ids=CATEGORIES)
def test_each_file_loads_in_under_one_gib_without_a_traceback(loaded_floods, category):
    _root, runs = loaded_floods
    flood, run = runs[category]
    assert not run.hung, f"{flood.path.name} did not finish in {TIMEOUT} s"
    assert not run.traceback, run.stderr[-2000:]
    assert run.stderr.strip() == "", run.stderr[-500:]
    assert run.returncode in (0, 1), (run.returncode, run.stdout[-500:])
    assert len(run.stdout.splitlines()) == 1 and run.stdout.startswith(flood.path.name + ":"), run.stdout
    assert 0 < run.peak_rss < PEAK_RSS, f"{flood.path.name}: peak RSS {run.peak_rss / 2**20:.0f} MiB"


@pytest.mark.parametrize("category", CATEGORIES, ids=CATEGORIES)
def test_counts_reasons_and_findings_stay_as_built_and_bounded(loaded_floods, category):
    root, runs = loaded_floods
    flood, _run = runs[category]
    with open_store(root / "store.duckdb") as con:
        assert load_problems(con) == []
        row = con.execute("SELECT load_id, status, rows_read, rows_accepted, rows_rejected FROM load_log "
                          "WHERE source_file = ?", [str(flood.path.resolve())]).fetchone()
        assert row is not None, f"{flood.path.name}: no trace in load_log"
        load_id, status, read, accepted, rejected = row
        longest, kinds = con.execute("SELECT coalesce(max(length(reason)), 0), count(DISTINCT reason) "
                                     "FROM rejected_row WHERE load_id = ?", [load_id]).fetchone()
        n_findings, detail = con.execute("SELECT count(*), coalesce(max(length(detail)), 0) FROM finding "
                                         "WHERE load_id = ?", [load_id]).fetchone()
    if flood.rows is not None:
        assert status == "loaded"
        assert (read, accepted, rejected) == (flood.rows, flood.accepted, flood.rejected), flood.path.name
    assert longest <= MAX_REASON, f"{flood.path.name}: a reason of {longest} characters"
    assert detail <= MAX_DETAIL, f"{flood.path.name}: a finding detail of {detail} characters"
    if flood.max_findings is not None:
        assert n_findings <= flood.max_findings, (flood.path.name, n_findings)
    if category.startswith("same-key flood"):
        assert kinds == 1        # one group: every rejected row has the same (bounded) reason


def test_a_million_row_flood_names_three_values_and_counts_the_rest(loaded_floods):
    root, runs = loaded_floods
    flood, _run = runs["same-key flood 10^6"]
    with open_store(root / "store.duckdb") as con:
        [(reason,)] = con.execute("SELECT DISTINCT r.reason FROM rejected_row r JOIN load_log l USING (load_id) "
                                  "WHERE l.source_file = ?", [str(flood.path.resolve())]).fetchall()
    # values as written in the file's percent: 4.0000, 4.0001, 4.0002 on the first three data lines
    assert reason == ("duplicate: conflicting values (percent) for 3M on 1,000,000 lines: 4 on line 2, "
                      "4.0001 on line 3, 4.0002 on line 4 and 999,997 more lines; none is kept")
