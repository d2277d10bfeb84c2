"""The core's README index names files and functions that exist.

``service/sampling/README.md`` tells a newcomer where each formula lives; a rename that
forgets the index would send them to nothing.
"""

from __future__ import annotations

import re
from pathlib import Path

CORE = Path(__file__).resolve().parents[2] / "service" / "sampling"
ROW = re.compile(r"^\| [^|]+ \| (?P<where>.+) \|$")
PLACE = re.compile(r"`(?P<file>[\w/]+\.py)`: (?P<names>(?:`\w+`(?:, | and )?)+)")


def index_entries() -> list[tuple[str, str]]:
    text = (CORE / "README.md").read_text(encoding="utf-8")
    section = text.split("## Where each formula lives", 1)[1]
    entries = []
    for line in section.splitlines():
        row = ROW.match(line)
        if not row or row["where"].startswith("file"):
            continue
        for place in PLACE.finditer(row["where"]):
            entries.extend((place["file"], name) for name in re.findall(r"`(\w+)`", place["names"]))
    return entries


def test_the_index_lists_every_job_of_the_core() -> None:
    files = {file for file, _ in index_entries()}
    assert len(index_entries()) > 40
    assert {"attributes/sizing.py", "estimation/__init__.py", "selection/__init__.py",
            "monetary/bounds.py"} <= files


def test_every_function_the_index_names_is_defined_in_its_file() -> None:
    missing = []
    for file, name in index_entries():
        source = (CORE / file).read_text(encoding="utf-8")
        if not re.search(rf"^\s*def {name}\(|^{name} = ", source, re.M):
            missing.append(f"{file}: {name}")
    assert not missing, missing
