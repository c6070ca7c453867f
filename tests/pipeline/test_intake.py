"""Intake of read rows (pipeline.intake): duplicates and load findings, bounded for any group size.

Reference for the semantics: CONTRACT ("every input row ends in exactly one place") and the README's
load section (an identical repeat keeps its first line; conflicting values keep none). The expected
groups are recomputed here with plain Python dictionaries over the cells we wrote, not with the
project's code.
"""

from __future__ import annotations

import re
import time
from collections import defaultdict

import numpy as np
import pytest

from pipeline.config import load_config
from pipeline.intake import load_findings, prepare_many, validate_intakes
from pipeline.readers import read_rate_file
from pipeline.wording import SHOWN, band_text, first_items, number_text
from tests.conftest import SMALL_CONFIG

TENORS = ["3M", "1Y", "2Y", "5Y", "10Y"]


@pytest.fixture(scope="module")
def cfg(tmp_path_factory):
    root = tmp_path_factory.mktemp("intake")
    (root / "afterward.toml").write_text(SMALL_CONFIG, encoding="utf-8")
    return load_config(root / "afterward.toml")


def _wide(lines: list[list[str]]) -> bytes:
    return ("date," + ",".join(TENORS) + "\n" + "".join(",".join(r) + "\n" for r in lines)).encode()


def _intake(cfg, data: bytes, name: str = "govt_x.csv", validate: bool = False):
    result = read_rate_file(data, name)
    [it] = prepare_many([result], cfg, ["govt"])
    if validate:
        from flows.load_step import _gx_validator

        validate_intakes([it], cfg, _gx_validator)
    return it


def _expected(lines: list[list[str]]) -> tuple[set[tuple[int, str]], dict[tuple[int, str], str]]:
    """Plain Python: which (line, tenor) cells are kept, and why each other one is rejected."""
    groups: dict[tuple[str, str], list[tuple[int, float]]] = defaultdict(list)
    for i, r in enumerate(lines, start=2):
        for t, cell in zip(TENORS, r[1:], strict=True):
            groups[(r[0], t)].append((i, float(cell)))
    kept, why = set(), {}
    for (_day, t), members in groups.items():
        if len({v for _, v in members}) > 1:
            why.update({(i, t): "conflict" for i, _ in members})
        else:
            kept.add((members[0][0], t))
            why.update({(i, t): f"repeats line {members[0][0]}" for i, _ in members[1:]})
    return kept, why


def _flood(n: int, seed: int = 7) -> list[list[str]]:
    """``n`` lines of one day: 3M differs on every line, 1Y is the same everywhere, 5Y takes two values."""
    rng = np.random.default_rng(seed)
    return [["2031-01-02", f"{4 + rng.random():.4f}", "4.20", "4.30", "4.50" if i % 2 else "4.51", "4.80"]
            for i in range(n)]


def test_duplicates_keep_the_documented_rows_and_reasons(cfg):
    lines = _flood(9) + [["2031-01-03", "4.1", "4.2", "4.3", "4.5", "4.8"]]
    it = _intake(cfg, _wide(lines))
    kept, why = _expected(lines)
    assert set(zip(it.rows["line"], it.rows["tenor"], strict=True)) == kept
    rj = it.rejected
    assert len(rj) + len(it.rows) == 5 * len(lines)
    for line, raw, reason in zip(rj["line"], rj["raw"], rj["reason"], strict=True):
        tenor = re.search(r"for (\w+) on", reason)
        if "conflicting" in reason:
            assert why[(line, tenor.group(1))] == "conflict", reason
        else:
            assert reason == "duplicate: repeats line 2 with the same value", reason
        assert raw == ",".join(lines[line - 2])


def test_a_conflict_reason_names_three_values_as_written_and_counts_the_rest(cfg):
    lines = [["2031-01-02", "4.10", "4.2", "4.3", "4.5", "4.8"], ["2031-01-02", "4.10", "4.2", "4.3", "4.5", "4.8"],
             ["2031-01-02", "4.25", "4.2", "4.3", "4.5", "4.8"], ["2031-01-02", "4.3", "4.2", "4.3", "4.5", "4.8"],
             ["2031-01-02", "5", "4.2", "4.3", "4.5", "4.8"], ["2031-01-02", "4.10", "4.2", "4.3", "4.5", "4.8"]]
    it = _intake(cfg, _wide(lines))
    reasons = set(it.rejected.loc[it.rejected["reason"].str.contains("conflicting"), "reason"])
    # the distinct values at their first lines (4.10 twice more is not a new value), in the file's percent
    assert reasons == {"duplicate: conflicting values (percent) for 3M on 6 lines: 4.1 on line 2, 4.25 on line 4, "
                       "4.3 on line 5 and 3 more lines; none is kept"}
    [detail] = it.duplicates["detail"]
    assert detail == ("conflicting values (percent) on 6 lines of one file: 4.1 on line 2, 4.25 on line 4, "
                      "4.3 on line 5 and 3 more lines")
    findings = load_findings(it, cfg)
    assert findings[["check_name", "tenor", "severity"]].values.tolist() == [["duplicate", "3M", "warn"]]


def test_two_conflicting_lines_are_both_named(cfg):
    lines = [["2031-01-02", "4.10", "4.2", "4.3", "4.5", "4.8"], ["2031-01-02", "4.99", "4.2", "4.3", "4.5", "4.8"]]
    it = _intake(cfg, _wide(lines))
    assert set(it.rejected.loc[it.rejected["line"].isin([2, 3]) & it.rejected["reason"].str.contains("3M"),
                               "reason"]) == {
        "duplicate: conflicting values (percent) for 3M on 2 lines: 4.1 on line 2, 4.99 on line 3; none is kept"}


def test_a_5000_line_one_day_conflict_file_is_bounded_and_linear(cfg):
    """The reported defect: 5,000 lines of one day took 15 s and 4 GB (each reason listed every line)."""
    lines = _flood(5000)
    t0 = time.perf_counter()
    it = _intake(cfg, _wide(lines))
    seconds = time.perf_counter() - t0
    kept, _ = _expected(lines)
    assert set(zip(it.rows["line"], it.rows["tenor"], strict=True)) == kept
    assert len(it.rejected) == 5 * 5000 - len(kept)
    longest = int(it.rejected["reason"].str.len().max())
    assert longest < 200, longest
    assert int(it.duplicates["detail"].str.len().max()) < 200
    assert it.rejected["reason"].str.contains("and 4,997 more lines").any()
    # a loose bound (far above the ~0.1 s this takes) that a quadratic reason list cannot meet
    assert seconds < 10, seconds


def test_out_of_range_rows_give_one_bounded_finding_per_day_and_tenor(cfg):
    lines = [[f"2031-01-{d:02d}", "334", "4.2", "4.3", "4.5", "4.8"] for d in (2, 3)]
    lines += [["2031-03-04", "330", "4.2", "4.3", "4.5", "4.8"]]
    data = _wide(lines)
    it = _intake(cfg, data, validate=True)
    bad = it.rejected
    assert len(bad) == 3 and set(bad["check_name"]) == {"out_of_range"}
    # the value as written and in the file's units; the band in the same units
    assert set(bad["reason"]) == {
        "out of range: rate 334 (percent) outside the plausible band -5 % to 40 % (tenor 3M)",
        "out of range: rate 330 (percent) outside the plausible band -5 % to 40 % (tenor 3M)"}
    f = load_findings(it, cfg)
    assert len(f) == 3 and f["detail"].iloc[0].startswith("line 2: out of range: rate 334 (percent)")


def test_a_flood_of_out_of_range_rows_on_one_day_is_one_finding_per_tenor(cfg):
    # distinct days are needed for the rows to reach the band check (one day would be duplicates)
    lines = [[f"2031-{m:02d}-{d:02d}", "334", "4.2", "4.3", "4.5", "4.8"] for m in (1, 2) for d in range(1, 29)]
    it = _intake(cfg, _wide(lines), validate=True)
    f = load_findings(it, cfg)
    assert len(f) == len(lines)            # one per day and tenor: every day has its own finding
    # a flood on one (day, tenor) from several files' worth of rows is one finding with a bounded detail
    rj = it.rejected.copy()
    rj["as_of"] = rj["as_of"].iloc[0]
    it.rejected = rj
    [(detail, check)] = load_findings(it, cfg)[["detail", "check_name"]].values.tolist()
    assert check == "out_of_range"
    assert detail.startswith(f"{len(lines)} lines: line 2: out of range: rate 334 (percent)")
    assert detail.endswith(f" and {len(lines) - SHOWN} more lines") and detail.count("line ") == SHOWN


def test_number_text_is_the_shortest_round_trip():
    # repr() of a float is the shortest string that reads back as the same float (Python language reference)
    assert number_text(np.array([334.0, 4.1, -0.0625, 1e30, 4125.5])).tolist() == \
        ["334", "4.1", "-0.0625", "1e+30", "4125.5"]


@pytest.mark.parametrize(("units", "text"), [("percent", "-5 % to 40 %"), ("bp", "-500 bp to 4,000 bp"),
                                             ("decimal", "-0.05 to 0.4")], ids=["percent", "bp", "decimal"])
def test_band_text_in_the_files_units(units, text):
    # -5 % .. 40 % (CONTRACT); 1 % = 100 bp = 0.01 (trade convention)
    assert band_text(-0.05, 0.40, False, units) == text


def test_first_items_are_bounded_per_group():
    group = np.array([0, 0, 0, 0, 0, 2])
    items = np.array(list("abcdef"), dtype=object)
    text, size = first_items(group, items, 3)
    assert text.tolist() == ["a, b, c", "", "f"] and size.tolist() == [5, 0, 1]
