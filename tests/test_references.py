"""Every citation of the references file in tests/ resolves to one of its entries, every entry names
the test files that really cite it, and no citation is left in a form a reader cannot resolve."""

from __future__ import annotations

import re
from pathlib import Path

TESTS = Path(__file__).resolve().parent
REFERENCES = TESTS / "REFERENCES.md"
# "tests/REFERENCES.md #5", "#1-#4", "#19, #20"
CITATION = re.compile(r"tests/REFERENCES\.md((?:(?:\s*,\s*|\s+)#\d+(?:-#\d+)?)+)")
ENTRY = re.compile(r"^### (\d+)\. ", re.M)


def entries() -> dict[int, str]:
    text = REFERENCES.read_text(encoding="utf-8")
    heads = list(ENTRY.finditer(text))
    return {int(m.group(1)): text[m.start(): heads[k + 1].start() if k + 1 < len(heads) else len(text)]
            for k, m in enumerate(heads)}


def cited_numbers(text: str) -> list[int]:
    out = []
    for m in CITATION.finditer(text):
        for a, b in re.findall(r"#(\d+)(?:-#(\d+))?", m.group(1)):
            out.extend(range(int(a), int(b or a) + 1))
    return out


def citations() -> dict[Path, list[int]]:
    found = {}
    for path in sorted(TESTS.rglob("*.py")):
        if path == Path(__file__).resolve():
            continue
        numbers = cited_numbers(path.read_text(encoding="utf-8"))
        if numbers:
            found[path] = numbers
    return found


def test_the_citation_pattern_reads_single_numbers_lists_and_ranges():
    assert cited_numbers("see tests/REFERENCES.md #5 (Hull)") == [5]
    assert cited_numbers("(tests/REFERENCES.md #19, #20)") == [19, 20]
    assert cited_numbers("tests/REFERENCES.md #1-#4, seen") == [1, 2, 3, 4]
    assert cited_numbers("REFERENCES item 5") == []


def test_every_citation_resolves_to_an_entry():
    known = entries()
    assert len(known) >= 20 and sorted(known) == list(range(1, max(known) + 1)), sorted(known)
    found = citations()
    assert len(found) >= 10
    missing = {str(p.relative_to(TESTS.parent)): sorted(set(n) - set(known)) for p, n in found.items()
               if set(n) - set(known)}
    assert missing == {}


def test_no_citation_in_an_unresolvable_form():
    # the older forms ("REFERENCES item N", "REFERENCES.md items N") named a file outside the repository
    bad = {}
    for path in sorted(TESTS.rglob("*.py")):
        if path == Path(__file__).resolve():
            continue
        for k, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1):
            for m in re.finditer(r"REFERENCES", line):
                if not CITATION.match(line, m.start() - len("tests/")):
                    bad.setdefault(str(path.relative_to(TESTS.parent)), []).append(k)
    assert bad == {}


def test_each_entry_lists_the_files_that_cite_it():
    known = entries()
    found = citations()
    by_entry: dict[int, set[str]] = {}
    for path, numbers in found.items():
        for n in numbers:
            by_entry.setdefault(n, set()).add(str(path.relative_to(TESTS.parent)))
    wrong = {}
    for n, text in known.items():
        m = re.search(r"^- Used by: (.+)$", text, re.M)
        assert m, f"entry {n} has no 'Used by' line"
        listed = {x.strip() for x in m.group(1).split(",")}
        if listed != by_entry.get(n, set()):
            wrong[n] = (sorted(listed), sorted(by_entry.get(n, set())))
        for field in ("- Value", "- How sure:"):
            assert field in text, f"entry {n} lacks {field!r}"
    assert wrong == {}
