"""Margin chart of a monetary-unit evaluation, as an SVG document.

One horizontal bar per evaluation method shows its upper misstatement limit for
overstatements, the part of it that is the projected misstatement darker; a dashed vertical
line marks the tolerable misstatement, so the margin between each limit and it is seen at
a glance. The book value is drawn as a line when it falls within the scale and is always
stated in the heading. The document carries a ``<title>`` and a ``<desc>`` that state the
same figures in words for screen readers.

The SVG is written by hand (no plotting library), in the palette of
:mod:`service.render.svg`: the output is deterministic and every text is XML-escaped.
"""

from __future__ import annotations

import textwrap
from collections.abc import Sequence
from dataclasses import dataclass
from decimal import Decimal
from html import escape

from service.render.svg import CURVE, EXPECTED, INK, MUTED, TOLERABLE

__all__ = ["MarginBar", "render_margin_svg"]

_WIDTH, _ROW, _LEFT, _RIGHT, _TOP = 640, 34, 150, 30, 70
_PROJECTED = CURVE
_ALLOWANCE = "#9fb3c8"  # pale slate: the allowance for sampling risk
_BOOK = EXPECTED


@dataclass(frozen=True)
class MarginBar:
    """One method's projected misstatement and upper limit (None: not computed)."""

    label: str
    projected: Decimal
    limit: Decimal | None


def _amount(value: Decimal) -> str:
    return f"{value:,.2f}"


def render_margin_svg(
    bars: Sequence[MarginBar],
    *,
    book_value: Decimal,
    tolerable_misstatement: Decimal | None,
    caption: str,
) -> str:
    """The margin chart as a standalone SVG document.

    Element ids: ``chart-title``, ``bar-<label>`` and ``projected-<label>`` per method,
    ``mark-tolerable`` (when given), ``mark-book-value`` (when within the scale), ``caption``.

    >>> svg = render_margin_svg([MarginBar("stringer", Decimal(7000), Decimal(41802))],
    ...                         book_value=Decimal(600000), tolerable_misstatement=None,
    ...                         caption="Demo")
    >>> "<title>" in svg and 'id="bar-stringer"' in svg
    True
    """
    if not bars:
        raise ValueError("at least one bar is needed")
    values = [b.limit for b in bars if b.limit is not None] + [b.projected for b in bars]
    if tolerable_misstatement is not None:
        values.append(tolerable_misstatement)
    top = max(max(values, default=Decimal(1)) * Decimal("1.15"), Decimal(1))
    book_in_scale = book_value <= top
    if book_in_scale:
        top = max(top, book_value * Decimal("1.05"))
    span = _WIDTH - _LEFT - _RIGHT
    height = _TOP + _ROW * len(bars) + 70 + 13 * len(textwrap.wrap(caption, 100))

    def x(value: Decimal) -> float:
        return round(_LEFT + float(value / top) * span, 2)

    words = [f"Book value {_amount(book_value)}."]
    if tolerable_misstatement is not None:
        words.append(f"Tolerable misstatement {_amount(tolerable_misstatement)}.")
    for bar in bars:
        limit = "not computed" if bar.limit is None else _amount(bar.limit)
        words.append(
            f"{bar.label}: upper misstatement limit {limit}, "
            f"projected misstatement {_amount(bar.projected)}."
        )
    heading = f"Upper misstatement limits (overstatement); book value {_amount(book_value)}"
    parts = [
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{_WIDTH}" height="{height}" '
        f'viewBox="0 0 {_WIDTH} {height}" role="img" aria-labelledby="t d" '
        f'font-family="DejaVu Sans, sans-serif" font-size="11">',
        f'<title id="t">{escape(heading)}</title>',
        f'<desc id="d">{escape(" ".join(words))}</desc>',
        f'<text id="chart-title" x="{_LEFT}" y="24" fill="{INK}" font-size="13">'
        f"{escape(heading)}</text>",
    ]
    for row, bar in enumerate(bars):
        y = _TOP + row * _ROW
        name = escape(bar.label)
        parts.append(
            f'<text x="{_LEFT - 8}" y="{y + 15}" text-anchor="end" fill="{INK}">{name}</text>'
        )
        if bar.limit is None:
            parts.append(
                f'<text id="bar-{name}" x="{_LEFT + 4}" y="{y + 15}" fill="{MUTED}">'
                "not computed</text>"
            )
            continue
        parts.append(
            f'<rect id="bar-{name}" x="{_LEFT}" y="{y}" width="{x(bar.limit) - _LEFT}" '
            f'height="20" fill="{_ALLOWANCE}"><title>{name}: {_amount(bar.limit)}</title></rect>'
        )
        parts.append(
            f'<rect id="projected-{name}" x="{_LEFT}" y="{y}" '
            f'width="{x(bar.projected) - _LEFT}" height="20" fill="{_PROJECTED}"/>'
        )
        parts.append(
            f'<text x="{x(bar.limit) + 4}" y="{y + 15}" fill="{INK}">{_amount(bar.limit)}</text>'
        )
    bottom = _TOP + _ROW * len(bars)
    if tolerable_misstatement is not None:
        tx = x(tolerable_misstatement)
        parts.append(
            f'<line id="mark-tolerable" x1="{tx}" y1="{_TOP - 12}" x2="{tx}" y2="{bottom}" '
            f'stroke="{TOLERABLE}" stroke-width="1.5" stroke-dasharray="5 3"/>'
        )
        parts.append(
            f'<text x="{tx}" y="{_TOP - 16}" text-anchor="middle" fill="{TOLERABLE}">'
            f"tolerable {_amount(tolerable_misstatement)}</text>"
        )
    if book_in_scale:
        bx = x(book_value)
        parts.append(
            f'<line id="mark-book-value" x1="{bx}" y1="{_TOP - 12}" x2="{bx}" y2="{bottom}" '
            f'stroke="{_BOOK}" stroke-width="1.5"/>'
        )
    parts.append(
        f'<line x1="{_LEFT}" y1="{bottom}" x2="{_WIDTH - _RIGHT}" y2="{bottom}" stroke="{MUTED}"/>'
    )
    parts.append(
        f'<text x="{_LEFT}" y="{bottom + 18}" fill="{MUTED}">0</text>'
        f'<text x="{_WIDTH - _RIGHT}" y="{bottom + 18}" text-anchor="end" fill="{MUTED}">'
        f"{_amount(top)}</text>"
    )
    parts.append(
        f'<text x="{_LEFT}" y="{bottom + 36}" fill="{_PROJECTED}">■ projected misstatement'
        f'</text><text x="{_LEFT + 190}" y="{bottom + 36}" fill="{_ALLOWANCE}">'
        "■ precision and allowance</text>"
    )
    lines = textwrap.wrap(caption, 100) or [""]
    spans = "".join(
        f'<tspan x="{_LEFT - 120}" dy="{0 if i == 0 else 13}">{escape(line)}</tspan>'
        for i, line in enumerate(lines)
    )
    parts.append(
        f'<text id="caption" x="{_LEFT - 120}" y="{bottom + 56}" fill="{MUTED}" '
        f'font-size="9">{spans}</text>'
    )
    parts.append("</svg>")
    return "\n".join(parts) + "\n"
