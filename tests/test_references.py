"""Citations in code and tests resolve inside the repository.

Every ``docs/references.md [n]`` named in ``celllab/`` or ``tests/`` must be an entry of the
reference notes, and no comment may send a reader to a file outside the repository.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
NOTES = ROOT / "docs" / "references.md"
HEADING = re.compile(r"^### \[(\d+)\] ", re.M)
# "docs/references.md [41]", "... [40], [41]", "... [100]-[103]"
CITATION = re.compile(r"docs/references\.md((?:[ ,]*\[\d+\](?:-\[\d+\])?)+)")
NUMBER = re.compile(r"\[(\d+)\]")
# A cited file that is not part of the repository (a shared notes file, a section sign into it).
OUTSIDE = re.compile(r"REFERENCES(\.md| §)")


def _sources() -> list[Path]:
    return sorted([*ROOT.joinpath("celllab").rglob("*.py"), *ROOT.joinpath("tests").rglob("*.py")])


def _entries() -> list[int]:
    return [int(n) for n in HEADING.findall(NOTES.read_text(encoding="utf-8"))]


def test_entry_numbers_are_unique_and_in_order() -> None:
    numbers = _entries()
    assert numbers, "no '### [n] ' headings in docs/references.md"
    assert numbers == sorted(set(numbers))


def test_contents_table_lists_every_entry() -> None:
    text = NOTES.read_text(encoding="utf-8")
    table = text.split("## Contents", 1)[1].split("\n---\n", 1)[0]
    last_columns = re.findall(r"\| ((?:\[\d+\] ?)+)\|$", table, re.M)
    listed = {int(n) for column in last_columns for n in NUMBER.findall(column)}
    assert listed == set(_entries())


def test_every_citation_names_an_existing_entry() -> None:
    entries = set(_entries())
    cited = 0
    missing = []
    for path in _sources():
        for lineno, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1):
            for match in CITATION.finditer(line):
                for number in NUMBER.findall(match.group(1)):
                    cited += 1
                    if int(number) not in entries:
                        missing.append(f"{path.relative_to(ROOT)}:{lineno}: [{number}]")
    assert not missing, "entries docs/references.md does not have:\n" + "\n".join(missing)
    # the tests cite the notes throughout; finding none means the pattern above went stale
    assert cited > 50


def test_no_citation_points_outside_the_repository() -> None:
    offenders = [
        f"{path.relative_to(ROOT)}:{lineno}: {line.strip()}"
        for path in _sources()
        if path != Path(__file__).resolve()
        for lineno, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1)
        if OUTSIDE.search(line)
    ]
    assert not offenders, "\n".join(offenders)


@pytest.mark.parametrize(
    ("text", "numbers"),
    [
        ("# Source: docs/references.md [41] (Larsson 1997); rel 1e-3", ["41"]),
        ("docs/references.md [40], [41] (Szekely)", ["40", "41"]),
        ("docs/references.md [100]-[103] through plan_block", ["100", "103"]),
        ("see docs/references.md for the list", []),
    ],
)
def test_citation_pattern(text: str, numbers: list[str]) -> None:
    found = [n for m in CITATION.finditer(text) for n in NUMBER.findall(m.group(1))]
    assert found == numbers
