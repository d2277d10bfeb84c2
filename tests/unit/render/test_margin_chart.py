"""Tests for the margin chart of a monetary-unit evaluation (SVG)."""

from __future__ import annotations

from decimal import Decimal

import pytest
from flask.testing import FlaskClient

from service.render.margin_chart import MarginBar, render_margin_svg
from tests.unit.render.svg_checks import SVG, by_id, parse

BARS = [
    MarginBar("stringer", Decimal(7000), Decimal(41802)),
    MarginBar("cell", Decimal(7000), Decimal(36957)),
    MarginBar("betting", Decimal(7000), None),
]


def test_bars_are_to_scale_and_the_tolerable_line_is_placed() -> None:
    root = parse(
        render_margin_svg(
            BARS, book_value=Decimal(600000), tolerable_misstatement=Decimal(45000), caption="Demo"
        )
    )
    ids = by_id(root)
    stringer = float(ids["bar-stringer"].get("width", "0"))
    cell = float(ids["bar-cell"].get("width", "0"))
    projected = float(ids["projected-stringer"].get("width", "0"))
    assert stringer / cell == pytest.approx(41802 / 36957, rel=1e-3)
    assert projected / stringer == pytest.approx(7000 / 41802, rel=1e-3)
    start = float(ids["bar-stringer"].get("x", "0"))
    line = float(ids["mark-tolerable"].get("x1", "0"))
    assert (line - start) / stringer == pytest.approx(45000 / 41802, rel=1e-3)
    assert ids["bar-betting"].text == "not computed"
    assert "mark-book-value" not in ids  # 600,000 is far off the scale, stated in words


def test_title_and_desc_state_the_figures() -> None:
    root = parse(
        render_margin_svg(
            BARS, book_value=Decimal(600000), tolerable_misstatement=Decimal(45000), caption="Demo"
        )
    )
    title = root.find(f"{SVG}title")
    desc = root.find(f"{SVG}desc")
    assert title is not None and "600,000.00" in (title.text or "")
    assert desc is not None
    for words in (
        "Tolerable misstatement 45,000.00",
        "stringer: upper misstatement limit 41,802.00",
        "projected misstatement 7,000.00",
        "betting: upper misstatement limit not computed",
    ):
        assert words in (desc.text or "")


def test_text_is_escaped() -> None:
    svg = render_margin_svg(
        [MarginBar("<b>&", Decimal(1), Decimal(2))],
        book_value=Decimal(10),
        tolerable_misstatement=None,
        caption="<script>",
    )
    parse(svg)
    assert "<script>" not in svg and "<b>" not in svg


def test_served_on_the_evaluation_operation(client: FlaskClient) -> None:
    body = {
        "book_value": "600000.00",
        "sample_size": 60,
        "tolerable_misstatement": 45000,
        "misstatements": [{"id": "A", "book_amount": 4000, "audited_amount": 2000}],
    }
    answer = client.post("/v1/monetary/evaluation", json=body, headers={"Accept": "image/svg+xml"})
    assert answer.status_code == 200
    assert answer.headers["Content-Type"].startswith("image/svg+xml")
    ids = by_id(parse(answer.get_data(as_text=True)))
    assert {
        "bar-stringer",
        "bar-stringer_binomial",
        "bar-cell",
        "bar-betting",
        "mark-tolerable",
        "caption",
    } <= set(ids)
    assert "professional judgement" in " ".join(ids["caption"].itertext())
