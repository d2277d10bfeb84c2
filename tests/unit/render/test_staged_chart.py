"""Tests for the chart of a staged plan (SVG)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from service.render.staged_chart import StagedChartPoint, render_staged_curve_svg
from tests.unit.render.svg_checks import SVG, by_id, parse, texts, vertices

# A demo two-stage plan: test 66 items, accept with no deviation, fail with 2 or more,
# else test 69 more and accept with at most 2 in all. Its acceptance probability and
# expected sample size at each rate are computed here by enumerating the first stage's
# outcomes with scipy.stats.binom (Dodge & Romig 1959: OC and average sample number of a
# double sampling plan).
STAGES = [(66, 0, 2), (135, 2, 3)]


def _acceptance_and_size(rate: float) -> tuple[float, float]:
    first = stats.binom.pmf(0, 66, rate)
    extend = stats.binom.pmf(1, 66, rate)
    second = stats.binom.cdf(1, 69, rate)  # one found so far, at most two in all
    return float(first + extend * second), float(66 + 69 * extend)


RATES = np.linspace(0.0, 0.1, 41)
POINTS = [StagedChartPoint(float(p), *_acceptance_and_size(float(p))) for p in RATES]


def _render(**changes: object) -> str:
    arguments: dict[str, object] = {
        "stages": STAGES,
        "tolerable_rate": 0.05,
        "expected_rate": 0.01,
        "risk_of_overreliance": _acceptance_and_size(0.05)[0],
        "risk_of_underreliance": 1 - _acceptance_and_size(0.01)[0],
        "caption": "Demo staged plan for Harbour Lane Supplies, purchase approvals.",
        "description": "Demo description.",
    }
    points = changes.pop("points", POINTS)
    arguments.update(changes)
    return render_staged_curve_svg(points, **arguments)  # type: ignore[arg-type]


def _is_affine(values: list[float], drawn: list[float]) -> bool:
    """Whether ``drawn`` is ``a + b × values`` for one a and b (to 0.01 of a pixel)."""
    slope = (drawn[-1] - drawn[0]) / (values[-1] - values[0])
    return all(abs(drawn[0] + slope * (v - values[0]) - y) < 0.01
               for v, y in zip(values, drawn, strict=True))


def test_svg_document_with_title_desc_ids_and_labels() -> None:
    root = parse(_render())
    assert root.tag == f"{SVG}svg"
    assert [child.tag for child in root][:2] == [f"{SVG}title", f"{SVG}desc"]
    assert root[0].text == (
        "Staged plan of 2 stages, at most 135 items; stage 1: 66 items, accept ≤ 0, fail ≥ 2; "
        "stage 2: 135 items, accept ≤ 2, fail ≥ 3"
    )
    assert root[1].text == "Demo description."
    ids = by_id(root)
    for gid in ("acceptance-curve", "expected-size-curve", "largest-sample-size",
                "mark-tolerable", "mark-expected", "mark-tolerable-size", "mark-expected-size",
                "risk-overreliance", "risk-underreliance", "legend", "label-acceptance",
                "label-expected-size", "label-tolerable", "label-expected", "axis-x-label",
                "axis-y-label", "axis-y-size-label", "plan-title", "plan-stages", "caption"):
        assert gid in ids, gid
    assert texts(ids["label-tolerable"]) == ["Tolerable rate 5%, risk of overreliance 4.97%"]
    assert texts(ids["label-expected"]) == ["Expected rate 1%, risk of underreliance 19.36%"]
    assert texts(ids["label-expected-size"]) == ["Expected items tested (at most 135)"]
    assert texts(ids["plan-stages"]) == [
        "Stage 1: 66 items, accept ≤ 0, fail ≥ 2; stage 2: 135 items, accept ≤ 2, fail ≥ 3"]
    assert texts(ids["caption"]) == [
        "Demo staged plan for Harbour Lane Supplies, purchase approvals."]


def test_both_curves_are_the_points_one_vertex_each() -> None:
    ids = by_id(parse(_render()))
    rates = [p.rate for p in POINTS]
    for gid, values in (("acceptance-curve", [p.acceptance_probability for p in POINTS]),
                        ("expected-size-curve", [p.expected_sample_size for p in POINTS])):
        drawn = vertices(ids[gid])
        assert len(drawn) == len(POINTS)
        assert _is_affine(rates, [x for x, _ in drawn])
        assert _is_affine(values, [y for _, y in drawn])
    # SVG y grows downwards: the acceptance probability falls as the rate grows.
    ys = [y for _, y in vertices(ids["acceptance-curve"])]
    assert ys == sorted(ys)


def test_marks_are_left_out_when_not_given() -> None:
    ids = by_id(parse(_render(tolerable_rate=None, expected_rate=None,
                                risk_of_overreliance=None, risk_of_underreliance=None)))
    assert "acceptance-curve" in ids
    for gid in ("mark-tolerable", "mark-expected", "mark-tolerable-size", "mark-expected-size",
                "risk-overreliance", "risk-underreliance", "label-tolerable"):
        assert gid not in ids


def test_population_label_in_title_and_chart() -> None:
    root = parse(_render(population_label="Harbour Lane Supplies <purchase orders>"))
    assert root[0].text is not None
    assert root[0].text.endswith("; population: Harbour Lane Supplies <purchase orders>")
    assert texts(by_id(root)["population-label"]) == [
        "Population: Harbour Lane Supplies <purchase orders>"]


def test_a_stage_that_never_accepts_is_said_so() -> None:
    root = parse(_render(stages=[(40, -1, 2), (135, 2, 3)]))
    assert texts(by_id(root)["plan-stages"])[0].startswith(
        "Stage 1: 40 items, never accept, fail ≥ 2")


def test_output_is_deterministic() -> None:
    assert _render() == _render()


@pytest.mark.parametrize("changes", [
    {"points": POINTS[:1]},
    {"points": [POINTS[0], StagedChartPoint(0.1, 1.5, 70.0)]},
    {"points": [POINTS[0], StagedChartPoint(0.1, 0.5, 136.0)]},
    {"points": [POINTS[0], StagedChartPoint(float("nan"), 0.5, 70.0)]},
    {"stages": []},
    {"tolerable_rate": 1.5},
    {"risk_of_underreliance": -0.01},
])
def test_bad_input_is_rejected(changes: dict[str, object]) -> None:
    with pytest.raises(ValueError):
        _render(**changes)
