"""Tests for the scaffolding shared by the SVG charts."""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor

import pytest

from service.render.oc_chart import render_operating_characteristic_svg
from service.render.staged_chart import StagedChartPoint, render_staged_curve_svg
from service.render.svg import check_unit, percent, with_title
from tests.unit.render.svg_checks import SVG, by_id, parse, texts


@pytest.mark.parametrize(("rate", "shown"), [
    (0.05, "5%"), (0.0125, "1.25%"), (0.0, "0%"), (1.0, "100%"), (0.123456, "12.35%"),
    (0.00004, "0%"),
])
def test_percent_has_at_most_two_decimals(rate: float, shown: str) -> None:
    assert percent(rate) == shown


@pytest.mark.parametrize("value", [0, 0.0, 0.5, 1, 1.0, None])
def test_check_unit_accepts_zero_to_one_and_none(value: float | None) -> None:
    check_unit(value, "rate")


@pytest.mark.parametrize("value", [True, -0.0001, 1.0001, float("nan"), float("inf"), "0.5"])
def test_check_unit_refuses_the_rest_naming_the_field(value: object) -> None:
    with pytest.raises(ValueError, match=r"^rate must be a number from 0 to 1"):
        check_unit(value, "rate")  # type: ignore[arg-type]


def test_title_and_desc_are_escaped_first_children() -> None:
    svg = ('<?xml version="1.0"?>\n'
           '<svg xmlns="http://www.w3.org/2000/svg" width="1">\n <g/>\n</svg>\n')
    root = parse(with_title(svg, 'A <b> & "c"', "d < e"))
    assert [child.tag for child in root] == [f"{SVG}title", f"{SVG}desc", f"{SVG}g"]
    assert root[0].text == 'A <b> & "c"'
    assert root[1].text == "d < e"


def _oc(label: str | None) -> str:
    return render_operating_characteristic_svg(
        [(0.0, 1.0), (0.1, 0.2)], sample_size=30, allowed_deviations=0, tolerable_rate=0.08,
        expected_rate=None, risk_of_overreliance=None, risk_of_underreliance=None,
        caption="Demo caption", population_label=label)


def _staged(label: str | None) -> str:
    return render_staged_curve_svg(
        [StagedChartPoint(0.0, 1.0, 20.0), StagedChartPoint(0.1, 0.3, 31.0)],
        stages=[(20, 0, 2), (40, 1, 2)], tolerable_rate=0.08, expected_rate=0.01,
        risk_of_overreliance=0.1, risk_of_underreliance=0.05, caption="Demo caption",
        population_label=label)


@pytest.mark.parametrize("render", [_oc, _staged])
def test_a_long_population_label_is_cut_in_the_chart_not_in_the_title(render: object) -> None:
    label = "Northwind Fixtures <vendor invoices> " + "x" * 80
    root = parse(render(label))  # type: ignore[operator]
    assert texts(by_id(root)["population-label"]) == [f"Population: {label[:90]}…"]
    assert (root[0].text or "").endswith(f"population: {label}")
    assert texts(by_id(root)["caption"]) == ["Demo caption"]


def test_both_charts_drawn_at_once_match_drawn_alone() -> None:
    alone = [_oc("Q3"), _staged("Q3")]
    with ThreadPoolExecutor(max_workers=4) as pool:
        together = list(pool.map(lambda i: (_oc, _staged)[i % 2]("Q3"), range(8)))
    assert together == alone * 4
