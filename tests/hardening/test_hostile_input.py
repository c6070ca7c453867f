"""Malformed and hostile files fed to the real ``afterward load``: never a traceback, never a hang
(each call runs under a 3 GiB address-space limit and a timeout), one line per file, a one-line
reason for every refused file and rejected row, and for every file rows read = accepted + rejected,
with the table rows behind those counts really there. Where a file was built from a grid of cells,
its rows read must also equal the count made from the cells (``corpus.count_rows``)."""

from __future__ import annotations

import csv
import re

import pytest

from pipeline.readers import DEFAULT_MISSING
from tests.hardening.corpus import CORPUS_CONFIG, Corpus, count_rows
from tests.hardening.harness import TALLY, load_problems, open_store, run_bounded

CALLS = 2                   # the corpus goes to `afterward load` in this many commands
TIMEOUT = 150               # seconds per command (each takes a few seconds here)
_OUTCOME = re.compile(r": (read \d+, accepted \d+(, revised \d+)?(, unchanged \d+)?, rejected \d+"
                      r"|already loaded \(same content as load \d+\)|refused: \S.*)$")


@pytest.fixture(scope="module")
def loaded_corpus(tmp_path_factory):
    root = tmp_path_factory.mktemp("hostile")
    (root / "afterward.toml").write_text(CORPUS_CONFIG, encoding="utf-8")
    files = Corpus(root / "files", seed=20310230).build()
    size = -(-len(files) // CALLS)
    runs = []
    for k in range(0, len(files), size):
        part = files[k:k + size]
        runs.append((part, run_bounded("load", *[str(f.path) for f in part], cwd=root, timeout=TIMEOUT)))
    TALLY.bad_inputs += len(files)
    TALLY.tracebacks += sum(r.traceback for _, r in runs)
    TALLY.hangs += sum(r.hung for _, r in runs)
    return root, files, runs


def test_corpus_is_large_and_varied(loaded_corpus):
    _root, files, _runs = loaded_corpus
    categories = {f.category for f in files}
    assert len(files) >= 300
    for needed in ("truncated", "binary", "encoding", "huge line", "10^6 columns", "duplicated header", "formula",
                   "impossible date", "extreme rate", "NaN or inf", "thousands separator", "mixed units", "zip bomb",
                   "path name"):
        assert needed in categories


def test_no_traceback_no_hang_one_line_per_file(loaded_corpus):
    _root, _files, runs = loaded_corpus
    for part, run in runs:
        assert not run.hung, f"a load of {len(part)} files hung for {TIMEOUT} s"
        assert not run.traceback, run.stderr[-2000:]
        assert run.returncode == 1, "the corpus has bad files, so each load exits 1"
        assert run.stderr.strip() == "", f"nothing but the per-file lines is printed: {run.stderr[-500:]!r}"
        lines = run.stdout.splitlines()
        assert len(lines) == len(part), "one line per file"
        for f, line in zip(part, lines, strict=True):
            # rich reads [..] in a name as markup and drops it; compare names only where there is none
            if "[" not in f.path.name:
                assert line.startswith(f.path.name + ":"), (f.path.name, line)
            assert _OUTCOME.search(line), line
            if f.expect_status in ("refused", "missing"):
                assert ": refused: " in line, (f.category, f.path.name, line)
            elif f.expect_status == "loaded":
                assert ": read " in line or "already loaded" in line, (f.category, f.path.name, line)


_MARKERS = {m.strip().lower() for m in DEFAULT_MISSING}


def _expected_rows(f) -> int | None:  # noqa: ANN001 - a corpus BadFile
    """The corpus's count from the cells, with the default missing markers (README, read.missing) as
    empty cells: a marker is a missing quote, not a row. Recounted from the file by Python's csv module
    only where a countable file holds a marker; the corpus's own count otherwise."""
    # a named pipe or a link to a device is no file to read back: opening the pipe would wait forever
    # for a writer, and /dev/zero never ends
    if f.expect_rows is None or f.path.suffix != ".csv" or not f.path.is_file():
        return f.expect_rows
    text = f.path.read_text(encoding="utf-8")
    first = text.split("\n", 1)[0]
    grid = list(csv.reader(text.splitlines(), delimiter=";" if ";" in first and "," not in first else ","))
    if not any(c.strip().lower() in _MARKERS and c.strip() for r in grid[1:] for c in r[1:]):
        return f.expect_rows
    header, *rows = grid
    return count_rows(header, [[r[0], *("" if c.strip().lower() in _MARKERS else c for c in r[1:])] if r else r
                               for r in rows])


def test_every_row_accounted_for(loaded_corpus):
    root, files, runs = loaded_corpus
    with open_store(root / "store.duckdb") as con:
        problems = load_problems(con)
        logged = {src: (status, read, detail) for src, status, read, detail in con.execute(
            "SELECT source_file, status, rows_read, detail FROM load_log").fetchall()}
        (rows_read,) = con.execute("SELECT sum(rows_read) FROM load_log").fetchone()  # type: ignore[misc]
    lines = {f.path: line for part, run in runs for f, line in zip(part, run.stdout.splitlines(), strict=False)}
    for f in files:
        # a link is logged under the file it points to, or (a device) under its own name
        entry = logged.get(str(f.path.resolve()), logged.get(str(f.path.absolute())))
        already = "already loaded" in lines.get(f.path, "")
        if f.expect_status == "missing":
            if entry is not None:
                problems.append(f"{f.path.name}: not a readable file, yet logged as {entry[0]}")
            continue
        if entry is None and not already:
            problems.append(f"{f.path.name} ({f.category}): no trace in load_log")
            continue
        if f.expect_status == "refused" and entry is not None and entry[0] != "refused":
            problems.append(f"{f.path.name} ({f.category}): expected refused, got {entry[0]}")
        expect_rows = _expected_rows(f)
        if expect_rows is not None and entry is not None and entry[1] != expect_rows:
            problems.append(f"{f.path.name} ({f.category}): {entry[1]} rows read, its cells hold {expect_rows}")
    TALLY.rows_checked += int(rows_read or 0)
    TALLY.rows_lost += len(problems)
    assert problems == []


def test_every_reason_is_one_line(loaded_corpus):
    root, _files, _runs = loaded_corpus
    with open_store(root / "store.duckdb") as con:
        reasons = con.execute("SELECT reason FROM rejected_row").fetchall()
        refused = con.execute("SELECT l.detail, r.reason, r.line FROM load_log l JOIN rejected_row r USING (load_id) "
                              "WHERE l.status = 'refused'").fetchall()
        kinds = con.execute("SELECT count(DISTINCT check_name) FROM rejected_row").fetchone()[0]  # type: ignore[index]
    assert len(reasons) > 200_000 and kinds >= 4
    assert all(r and r.strip() and "\n" not in r and "\r" not in r and len(r) < 600 for (r,) in reasons)
    assert refused and all(d == r and line == 0 for d, r, line in refused)


def test_markup_in_a_refused_header_does_not_stop_the_load(tmp_path):
    (tmp_path / "afterward.toml").write_text(CORPUS_CONFIG, encoding="utf-8")
    (tmp_path / "govt_a.csv").write_text("date,[/b]\n2031-01-02,4.1\n", encoding="utf-8")
    (tmp_path / "govt_b.csv").write_text("date,3M\n2031-01-02,4.1\n", encoding="utf-8")
    run = run_bounded("load", "govt_a.csv", "govt_b.csv", cwd=tmp_path, timeout=60)
    assert "internal error" not in run.stderr
    assert "govt_b.csv: read 1, accepted 1, rejected 0" in run.stdout
