"""Every citation of docs/sources.md in the code and the tests names a section that exists,
and the design notes the code points to are in the repository."""

from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
_HEADING = re.compile(r"^#{2,3} (\d+(?:\.\d+)?)[ .]", re.M)
# "docs/sources.md §1.7", "docs/sources.md 2.5", "docs/sources.md section 1.2-1.4"
_CITATION = re.compile(r"docs/sources\.md,?\s*(?:§|sections?\s+)?\s*(\d+(?:\.\d+)?)(?:\s*-\s*(\d+(?:\.\d+)?))?")


def _sections() -> set[str]:
    return set(_HEADING.findall((ROOT / "docs" / "sources.md").read_text(encoding="utf-8")))


def _citations():
    for folder in ("analysis", "app", "tests"):
        for path in sorted((ROOT / folder).rglob("*.py")):
            text = path.read_text(encoding="utf-8")
            for match in _CITATION.finditer(text):
                for number in filter(None, match.groups()):
                    yield path.relative_to(ROOT), number.rstrip(".")


def test_sources_keep_their_section_numbers():
    sections = _sections()
    for number in ("1", "1.1", "1.2", "1.3", "1.4", "1.5", "1.6", "1.7", "2", "2.1", "2.5",
                   "3.1", "3.2", "4.1", "4.2", "4.3", "5", "6", "7", "8"):
        assert number in sections, number


def test_every_citation_points_to_a_section_that_exists():
    sections = _sections()
    found = list(_citations())
    assert len(found) > 20  # the code cites its sources
    missing = sorted({f"{path}: §{number}" for path, number in found if number not in sections})
    assert not missing, missing


def test_no_citation_points_outside_the_repository():
    outside = []
    for folder in ("analysis", "app", "tests"):
        for path in sorted((ROOT / folder).rglob("*.py")):
            text = path.read_text(encoding="utf-8")
            if re.search(r"\b(REFERENCES|DESIGN)\.md\b|REFERENCES §", text) and path.name != Path(__file__).name:
                outside.append(str(path.relative_to(ROOT)))
    assert not outside, outside
    assert (ROOT / "docs" / "design.md").is_file()
