"""The scaffolding shared by the SVG charts: palette, figure, axes, legend, caption, title.

The curve charts are drawn with matplotlib on their own :class:`matplotlib.figure.Figure`
with the SVG canvas (no pyplot state). The few settings that matplotlib reads from its
global configuration while writing SVG are applied under one lock, so concurrent calls
from several threads do not interfere. The output is deterministic: fixed hash salt for
element ids, no date in the metadata, text kept as SVG text, no path simplification.

matplotlib is imported only inside the functions that draw, so importing a chart module
stays cheap. Every text placed in a document by :func:`with_title` is XML-escaped; text
drawn by matplotlib is escaped by its SVG writer.
"""

from __future__ import annotations

import io
import math
import threading
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from html import escape
from typing import TYPE_CHECKING, Any, cast

if TYPE_CHECKING:
    from matplotlib.artist import Artist
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure
    from matplotlib.ticker import Formatter

__all__ = [
    "CURVE", "EXPECTED", "GRID", "INK", "MUTED", "TOLERABLE",
    "add_caption", "add_legend", "check_unit", "clean_axes", "count_formatter", "figure_svg",
    "percent", "percent_formatter", "population_line", "rate_axis", "svg_figure", "with_title",
]

CURVE = "#1f3a5f"  # deep slate blue
TOLERABLE = "#9b3d2e"  # brick
EXPECTED = "#4a6b3a"  # moss
INK = "#2e2e2e"
MUTED = "#6b6b6b"
GRID = "#e3e3e3"

_LOCK = threading.Lock()

_SETTINGS: dict[str, Any] = {
    "svg.hashsalt": "oc-chart",
    "svg.fonttype": "none",
    "path.simplify": False,
    "font.family": "DejaVu Sans",
    "font.size": 9.0,
    "axes.edgecolor": MUTED,
    "axes.labelcolor": INK,
    "xtick.color": MUTED,
    "ytick.color": MUTED,
    "text.color": INK,
}

_POPULATION_SHOWN = 90  # characters of a population label drawn in the chart


def percent(rate: float) -> str:
    """A rate as a percentage with up to two decimals: 0.05 → '5%', 0.0125 → '1.25%'."""
    text = f"{rate * 100:.2f}".rstrip("0").rstrip(".")
    return f"{text}%"


def check_unit(value: float | None, name: str) -> None:
    """Refuse ``value`` unless it is None or a finite number from 0 to 1 (a rate or risk)."""
    if value is None:
        return
    if isinstance(value, bool) or not isinstance(value, int | float) or not (
        math.isfinite(value) and 0.0 <= value <= 1.0
    ):
        raise ValueError(f"{name} must be a number from 0 to 1; got {value!r}")


@contextmanager
def svg_figure(size: tuple[float, float]) -> Iterator[Figure]:
    """A figure of ``size`` inches at 100 dpi, drawn under the shared lock and settings.

    Call :func:`figure_svg` inside the ``with`` block: the settings apply while writing.
    """
    import matplotlib as mpl
    from matplotlib.backends.backend_svg import FigureCanvasSVG
    from matplotlib.figure import Figure

    with _LOCK, mpl.rc_context(cast(Any, _SETTINGS)):
        figure = Figure(figsize=size, dpi=100)
        FigureCanvasSVG(figure)
        yield figure


def figure_svg(figure: Figure) -> str:
    """The figure written as SVG text, without a date in its metadata."""
    buffer = io.StringIO()
    figure.savefig(buffer, format="svg", metadata={"Date": None})
    return buffer.getvalue()


def percent_formatter() -> Formatter:
    """Tick labels as :func:`percent`, the tick value rounded to 12 decimals first."""
    from matplotlib.ticker import FuncFormatter

    def percent_tick(value: float, _position: object) -> str:
        return percent(round(value, 12))

    return FuncFormatter(percent_tick)


def count_formatter() -> Formatter:
    """Tick labels as whole numbers with thousands separators."""
    from matplotlib.ticker import FuncFormatter

    def count_tick(value: float, _position: object) -> str:
        return f"{value:,.0f}"

    return FuncFormatter(count_tick)


def clean_axes(axes: Axes) -> None:
    """Light grid behind the data, no top or right spine."""
    axes.grid(True, color=GRID, linewidth=0.6)
    axes.set_axisbelow(True)
    for side in ("top", "right"):
        axes.spines[side].set_visible(False)


def rate_axis(axes: Axes, rates: Sequence[float], tolerable_rate: float | None) -> None:
    """Set the rate axis from 0 (or the lowest rate) to the last rate, widened to show the
    tolerable rate with room to its right; 0…1 when every rate is 0."""
    right = max(rates[-1], (tolerable_rate or 0.0) * 1.15)
    axes.set_xlim(min(rates[0], 0.0), right if right > 0 else 1.0)


def add_legend(axes: Axes, handles: Sequence[Artist], labels: Sequence[str],
               ids: Sequence[str], *, fontsize: float) -> None:
    """A framed legend in the upper right, with id ``legend`` and one id per label."""
    legend = axes.legend(handles, labels, loc="upper right", fontsize=fontsize, frameon=True,
                         framealpha=0.92, edgecolor=GRID, borderpad=0.6)
    legend.set_gid("legend")
    for text, gid in zip(legend.get_texts(), ids, strict=True):
        text.set_gid(gid)


def population_line(axes: Axes, label: str, height: float) -> None:
    """``Population: <label>`` above the axes at ``height`` (axes units), id
    ``population-label``, a label longer than 90 characters cut with an ellipsis."""
    shown = label if len(label) <= _POPULATION_SHOWN else label[:_POPULATION_SHOWN] + "…"
    axes.text(0.0, height, f"Population: {shown}", transform=axes.transAxes,
              ha="left", va="bottom", fontsize=8, color=MUTED, gid="population-label")


def add_caption(figure: Figure, left: float, bottom: float, caption: str) -> None:
    """The caption under the chart, wrapped to the figure's width, id ``caption``."""
    figure.text(left, bottom, caption, ha="left", va="bottom", fontsize=8, color=MUTED,
                wrap=True, gid="caption")


def with_title(svg: str, title: str, description: str) -> str:
    """``svg`` with ``<title>`` and ``<desc>`` as the first children of its root element."""
    root = svg.index("<svg")
    end = svg.index(">", root) + 1
    extra = f"\n <title>{escape(title)}</title>\n <desc>{escape(description)}</desc>"
    return svg[:end] + extra + svg[end:]
