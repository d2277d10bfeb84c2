"""README's Contents list names every section, in order, with GitHub's anchors."""

from __future__ import annotations

import re
from pathlib import Path

README = Path(__file__).resolve().parents[2] / "README.md"


def github_anchor(title: str) -> str:
    """The anchor GitHub gives a heading: lower case, punctuation dropped but for hyphens
    and underscores, spaces as hyphens."""
    return "#" + re.sub(r"[^\w\- ]", "", title.strip().lower()).replace(" ", "-")


def test_the_contents_list_every_section_in_order() -> None:
    text = README.read_text(encoding="utf-8")
    listed = re.search(r"<!-- contents -->\n(.*?)<!-- /contents -->", text, re.S)
    assert listed is not None
    entries = re.findall(r"^- \[(.+)\]\((#[^)]+)\)$", listed.group(1), re.M)
    sections = [h for h in re.findall(r"^## (.+)$", text, re.M) if h != "Contents"]
    assert [title for title, _ in entries] == sections
    assert all(anchor == github_anchor(title) for title, anchor in entries)


def test_anchors_follow_githubs_rule() -> None:
    # GitHub's rule as it renders headings (recalled from its rendering of README files).
    assert github_anchor("Sizing a test of controls: `POST /v1/sample-size`") == (
        "#sizing-a-test-of-controls-post-v1sample-size")
    assert github_anchor("Browser pages on other origins (CORS)") == (
        "#browser-pages-on-other-origins-cors")
