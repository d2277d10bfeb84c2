"""The README's examples, pasted into a shell against the real server, give what it shows.

Each ``sh`` block that calls the service with curl and is followed by a ``json`` block is
run with bash (the address rewritten to the test server's port); the answer is compared
with the README's JSON field by field. Blocks followed by ``markdown`` or ``text`` are
compared line by line. Each ``python`` block followed by an output block is run as a
script, and its standard output compared the same way.

A README value may be the placeholder ``"..."`` (a generated seed, a request id, a time):
the field must then be present, with any value. Blocks that show something other than the
service's answer are marked with an HTML comment ``<!-- readme-test: skip -->`` just above
them.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess
import sys
from collections.abc import Iterator
from dataclasses import dataclass
from itertools import pairwise
from pathlib import Path
from typing import Any

import pytest

from tests.functional.servers import ROOT, Server, running_server

README = ROOT / "README.md"
PLACEHOLDER = "..."
# A list the README cuts short ends with an unquoted ellipsis: [17, 87, …].
ELLIPSIS = "…"
_CUT_LIST = re.compile(r",\s*…\s*\]")
SKIP = "<!-- readme-test: skip -->"
# A block with no answer of its own that the examples after it need (filling a test sheet).
RUN = "<!-- readme-test: run -->"
_FENCE = re.compile(r"^```(\w*)\s*$")
_OUTPUT_KINDS = {"json", "markdown", "text"}


@dataclass(frozen=True)
class Example:
    line: int
    kind: str  # "sh" or "python"
    code: str
    output_kind: str
    output: str
    shortened: bool = False

    @property
    def name(self) -> str:
        return f"README line {self.line}"


def _blocks(text: str) -> Iterator[tuple[int, str, str, bool, str]]:
    """(first line, language, content, skipped, the text line just above) of each block."""
    lines = text.splitlines()
    index = 0
    while index < len(lines):
        match = _FENCE.match(lines[index])
        if match is None:
            index += 1
            continue
        start, language = index, match.group(1)
        end = start + 1
        while end < len(lines) and not lines[end].startswith("```"):
            end += 1
        previous = next((line for line in reversed(lines[:start]) if line.strip()), "")
        yield (start + 1, language, "\n".join(lines[start + 1:end]), previous.strip() == SKIP,
               previous.strip())
        index = end + 1


def examples(text: str) -> list[Example]:
    """The runnable blocks of ``text``, in order, each with the output block right after it
    (``output_kind`` is "" when none follows: the block is run for what it leaves behind)."""
    found: list[Example] = []
    blocks = [*_blocks(text), (0, "", "", False, "")]
    for (line, language, code, skipped, above), (_, out_kind, output, _, out_above) in pairwise(
        blocks
    ):
        if skipped:
            continue
        if out_kind not in _OUTPUT_KINDS:
            out_kind, output = "", ""
        shortened = "shortened" in out_above
        calls = "127.0.0.1:8000" in code
        if language == "sh" and code.lstrip().startswith("curl ") and calls:
            found.append(Example(line, "sh", code, out_kind, output, shortened))
        elif language == "python" and ((calls and out_kind) or above == RUN):
            found.append(Example(line, "python", code, out_kind, output, shortened))
    return found


EXAMPLES = examples(README.read_text(encoding="utf-8"))


def readme_json(text: str) -> Any:
    """A README JSON block, whose cut lists end with an unquoted ellipsis."""
    return json.loads(_CUT_LIST.sub(', "…"]', text))


def _same(shown: Any, got: Any, path: str = "", subset: bool = False) -> list[str]:
    """Differences between the README's value and the answer, by field path; with
    ``subset`` (an answer the README says it shortened) fields it leaves out are fine."""
    if shown == PLACEHOLDER:
        return []
    if isinstance(shown, dict) and isinstance(got, dict):
        problems = [f"{path}.{key}: missing from the answer"
                    for key in shown if key not in got and not (subset and key == ELLIPSIS)]
        if not subset:
            problems += [f"{path}.{key}: in the answer, not in the README"
                         for key in got if key not in shown]
        for key in shown.keys() & got.keys():
            problems += _same(shown[key], got[key], f"{path}.{key}", subset)
        return problems
    if isinstance(shown, list) and shown and shown[-1] == ELLIPSIS and isinstance(got, list):
        head = shown[:-1]
        if len(got) <= len(head):
            return [f"{path}: the README shows more than the {len(got)} elements answered"]
        return _same(head, got[:len(head)], path, subset)
    if isinstance(shown, list) and isinstance(got, list):
        if len(shown) != len(got):
            return [f"{path}: {len(shown)} elements in the README, {len(got)} in the answer"]
        return [p for i, (a, b) in enumerate(zip(shown, got, strict=True))
                for p in _same(a, b, f"{path}[{i}]", subset)]
    if shown != got or type(shown) is not type(got):
        return [f"{path}: README {shown!r}, answer {got!r}"]
    return []


@pytest.fixture(scope="module")
def server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Server]:
    with running_server(tmp_path_factory.mktemp("readme")) as running:
        yield running


def _run(example: Example, base_url: str, folder: Path) -> str:
    """Run ``example`` in ``folder`` (where the examples before it ran, with the project's
    examples/ beside them) against the server at ``base_url``; its standard output."""
    port = base_url.rsplit(":", 1)[1]
    if not (folder / "examples").exists():
        (folder / "examples").symlink_to(ROOT / "examples")
    code = example.code.replace("127.0.0.1:8000", f"127.0.0.1:{port}")
    if example.kind == "sh":
        shell = "set -o pipefail\n" + code.replace("python3 ", f"{sys.executable} ")
        command = ["bash", "-c", shell]
    else:
        script = folder / "example.py"
        script.write_text(code, encoding="utf-8")
        command = [sys.executable, str(script)]
    # The README's own examples, on a loopback server.
    done = subprocess.run(
        command, capture_output=True, text=True, timeout=120, cwd=folder, check=False
    )
    assert done.returncode == 0, f"{example.name} failed:\n{done.stderr}"
    return done.stdout


def differences(example: Example, out: str) -> list[str]:
    """How the answer ``out`` differs from what the README shows after ``example``."""
    if not example.output_kind:
        return []
    if example.output_kind == "json":
        return _same(readme_json(example.output), json.loads(out), subset=example.shortened)
    shown = [line.rstrip() for line in example.output.strip().splitlines()]
    # A CSV answer starts with a byte order mark, which a README cannot show.
    got = [line.rstrip() for line in out.removeprefix("\ufeff").strip().splitlines()]
    return [] if got == shown else [f"text differs:\n{out[:2000]}"]


def test_the_readme_has_examples_to_check() -> None:
    assert sum(e.kind == "sh" and bool(e.output_kind) for e in EXAMPLES) >= 10
    assert any(e.kind == "python" for e in EXAMPLES)


@pytest.mark.skipif(shutil.which("curl") is None, reason="curl is not installed")
def test_readme_examples_give_what_they_show(server: Server, tmp_path: Path) -> None:
    """Every example, in the README's order and in one folder (a later one may use a file
    an earlier one wrote), against the real server."""
    failures = []
    for example in EXAMPLES:
        problems = differences(example, _run(example, server.url, tmp_path))
        if problems:
            failures.append(f"{example.name}:\n  " + "\n  ".join(problems))
    assert not failures, "\n".join(failures)


def refresh(text: str, base_url: str) -> str:
    """``text`` with each example's output block replaced by what the server at
    ``base_url`` answers now, where it differs; placeholders (``"..."``) are kept.

    Run ``python -m tests.functional.test_readme_examples http://127.0.0.1:8000`` against
    ``make run`` after changing an answer, then read the diff before committing it.
    """
    import tempfile

    lines = text.splitlines(keepends=True)
    replacements: list[tuple[int, int, str]] = []
    blocks = list(_blocks(text))
    with tempfile.TemporaryDirectory() as tmp:
        for example in examples(text):
            out = _run(example, base_url, Path(tmp)).removeprefix("\ufeff")
            if not example.output_kind or not differences(example, out):
                continue  # nothing to show, or the block already shows this answer
            index = next(i for i, block in enumerate(blocks) if block[0] == example.line)
            out_line = blocks[index + 1][0]
            if example.output_kind == "json":
                out = _keep_placeholders(example.output, out, example.shortened)
            end = out_line
            while not lines[end].startswith("```"):
                end += 1
            replacements.append((out_line, end, out.rstrip("\n") + "\n"))
    for start, end, new in reversed(replacements):
        lines[start:end] = [new]
    return "".join(lines)


def _keep_placeholders(block: str, out: str, shortened: bool = False) -> str:
    """The answer as the README shows it: placeholders and cut lists kept, in the block's
    layout (json.tool's four-space indent, or one top-level field per line)."""
    got = json.loads(out)
    placed = _placed(readme_json(block), got, shortened)
    if placed == got and _layout(block) == _layout(out):
        return out
    if _layout(block) == "indented":
        second = block.strip().splitlines()[1]
        indent = len(second) - len(second.lstrip())
        text = json.dumps(placed, indent=indent, ensure_ascii=False)
    elif _layout(block) == "one line":
        text = json.dumps(placed, ensure_ascii=False)
        text = json.dumps(placed, indent=4, ensure_ascii=False)
    elif isinstance(placed, dict):  # one top-level field per line
        rows = [f"  {json.dumps(k)}: {json.dumps(v, ensure_ascii=False)}"
                for k, v in placed.items()]
        text = "{\n" + ",\n".join(rows) + "\n}"
    else:
        text = json.dumps(placed, ensure_ascii=False)
    return text.replace(f', "{ELLIPSIS}"]', f", {ELLIPSIS}]")


def _layout(text: str) -> str:
    """ "one line"; "fields" (one top-level field per line, each value on its line); or
    "indented" (json.tool or json.dumps with an indent)."""
    lines = text.strip().splitlines()
    if len(lines) == 1:
        return "one line"
    depths = {len(line) - len(line.lstrip()) for line in lines[1:-1]}
    return "fields" if depths == {2} else "indented"


def _placed(shown: Any, got: Any, shortened: bool = False) -> Any:
    if shown == PLACEHOLDER:
        return PLACEHOLDER
    if isinstance(shown, list) and shown and shown[-1] == ELLIPSIS and isinstance(got, list):
        return [*got[:len(shown) - 1], ELLIPSIS]
    if isinstance(shown, dict) and isinstance(got, dict):
        return {
            key: PLACEHOLDER
            if key in _VARYING and shown.get(key) != value
            else _placed(shown.get(key), value, shortened)
            for key, value in got.items()
            if not shortened or key in shown
        }
    return got


# Fields whose value changes on every call: shown as the placeholder.
_VARYING = frozenset({"request_id"})


if __name__ == "__main__":
    base = sys.argv[1] if len(sys.argv) > 1 else "http://127.0.0.1:8000"
    README.write_text(refresh(README.read_text(encoding="utf-8"), base), encoding="utf-8")
