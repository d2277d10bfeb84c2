"""Tests for the operating characteristic chart (SVG)."""

from __future__ import annotations

import os
import re
import subprocess
import sys
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from service.render.oc_chart import render_operating_characteristic_svg
from tests.unit.render.svg_checks import SVG, by_id, parse, texts, vertices

ROOT = Path(__file__).resolve().parents[3]

# A demo plan: 93 items, reliance with at most 1 deviation.  Its operating characteristic
# is the binomial probability of at most 1 deviation, scipy.stats.binom.cdf(1, 93, p).
SAMPLE_SIZE = 93
ALLOWED = 1
RATES = np.linspace(0.0, 0.12, 121)
POINTS = [(float(p), float(stats.binom.cdf(ALLOWED, SAMPLE_SIZE, p))) for p in RATES]


def _render(**changes: object) -> str:
    arguments: dict[str, object] = {
        "sample_size": SAMPLE_SIZE,
        "allowed_deviations": ALLOWED,
        "tolerable_rate": 0.05,
        "expected_rate": 0.01,
        "risk_of_overreliance": 0.05,
        "risk_of_underreliance": 0.25,
        "caption": "Demo plan: 93 items, reliance if at most 1 deviation is found.",
    }
    points = changes.pop("points", POINTS)
    arguments.update(changes)
    return render_operating_characteristic_svg(points, **arguments)  # type: ignore[arg-type]


def test_svg_document_with_ids_and_labels() -> None:
    root = parse(_render())
    assert root.tag == f"{SVG}svg"
    ids = by_id(root)
    for gid in ("oc-curve", "mark-tolerable", "mark-expected", "risk-overreliance",
                "risk-underreliance", "caption", "axis-x-label", "axis-y-label", "plan-title",
                "legend", "label-tolerable", "label-expected"):
        assert gid in ids, gid
    all_text = texts(root)
    assert "True deviation rate" in all_text
    assert "Probability the sample supports reliance" in all_text
    assert texts(ids["caption"]) == [
        "Demo plan: 93 items, reliance if at most 1 deviation is found."
    ]
    assert texts(ids["label-tolerable"]) == ["Tolerable rate 5%, risk of overreliance 5%"]
    assert texts(ids["label-expected"]) == ["Expected rate 1%, risk of underreliance 25%"]
    assert texts(ids["plan-title"]) == ["Sample of 93 items, reliance with up to 1 deviation"]


def test_curve_has_one_vertex_per_point() -> None:
    root = parse(_render())
    paths = list(by_id(root)["oc-curve"].iter(f"{SVG}path"))
    assert len(paths) == 1
    commands = re.findall(r"[ML]", paths[0].get("d", ""))
    assert len(commands) == len(POINTS)


def test_curve_follows_the_points() -> None:
    # The drawn curve falls from the top of the plot to the bottom, as the binomial
    # probability of at most one deviation does (SVG y grows downwards).
    ys = [y for _, y in vertices(by_id(parse(_render()))["oc-curve"])]
    assert ys == sorted(ys)
    assert ys[-1] > ys[0]


def test_marks_are_left_out_when_not_given() -> None:
    root = parse(_render(tolerable_rate=None, expected_rate=None,
                         risk_of_overreliance=None, risk_of_underreliance=None))
    ids = by_id(root)
    assert "oc-curve" in ids
    for gid in ("mark-tolerable", "mark-expected", "risk-overreliance", "risk-underreliance"):
        assert gid not in ids


def test_labels_without_risks() -> None:
    ids = by_id(parse(_render(risk_of_overreliance=None, risk_of_underreliance=None)))
    assert texts(ids["label-tolerable"]) == ["Tolerable rate 5%"]
    assert "risk-overreliance" not in ids


def test_output_is_deterministic() -> None:
    assert _render() == _render()


def test_concurrent_renders_match() -> None:
    expected = _render()
    with ThreadPoolExecutor(max_workers=4) as pool:
        results = list(pool.map(lambda _: _render(), range(8)))
    assert all(result == expected for result in results)


def test_importing_the_module_does_not_import_matplotlib() -> None:
    code = ("import sys, service.render.oc_chart; "
            "print(any(name == 'matplotlib' or name.startswith('matplotlib.') "
            "for name in sys.modules))")
    environment = {**os.environ, "PYTHONPATH": str(ROOT)}
    result = subprocess.run([sys.executable, "-c", code], cwd=ROOT, env=environment,
                            capture_output=True, text=True, check=True)
    assert result.stdout.strip() == "False"


@pytest.mark.parametrize("changes", [
    {"points": [(0.0, 1.0)]},
    {"points": [(0.0, 1.0), (0.1, 1.5)]},
    {"points": [(-0.1, 1.0), (0.1, 0.5)]},
    {"tolerable_rate": 1.5},
    {"risk_of_overreliance": -0.01},
    {"sample_size": -1},
    {"allowed_deviations": 1.5},
])
def test_bad_input_is_rejected(changes: dict[str, object]) -> None:
    with pytest.raises(ValueError):
        _render(**changes)
