"""Chart of a staged (stop-or-go) plan against the true deviation rate, as an SVG document.

Two panels share the rate axis. The upper one is the plan's operating characteristic: the
probability that the staged test ends in acceptance. The lower one is its expected sample
size (average sample number): the items the test takes on average before it stops, between
the first stage's size and the last stage's cumulative size. The tolerable deviation rate
and the expected population deviation rate are marked in both panels; at the tolerable
rate the acceptance probability is the risk of overreliance, at the expected rate one minus
it is the risk of underreliance (Dodge & Romig 1959, double sampling plans).

Drawn on the scaffolding of :mod:`service.render.svg`, as :mod:`service.render.oc_chart`
draws a single plan (shared lock and settings, deterministic output, ``<title>`` and
``<desc>`` as the document's first children); the rates are marked as
:mod:`service.render.rate_marks` draws them.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from service.render.rate_marks import check_rates, draw_guide, draw_line, rate_marks
from service.render.svg import (
    CURVE,
    INK,
    MUTED,
    add_caption,
    add_legend,
    check_unit,
    clean_axes,
    count_formatter,
    figure_svg,
    percent_formatter,
    population_line,
    rate_axis,
    svg_figure,
    with_title,
)

__all__ = ["StagedChartPoint", "render_staged_curve_svg"]

_SIZE = "#7a5c99"  # muted violet: the expected sample size


@dataclass(frozen=True)
class StagedChartPoint:
    """One rate of the chart: the acceptance probability and the expected sample size."""

    rate: float
    acceptance_probability: float
    expected_sample_size: float


def _checked(points: Sequence[StagedChartPoint], largest: int) -> list[StagedChartPoint]:
    if len(points) < 2:
        raise ValueError(f"at least two points are needed; got {len(points)}")
    for index, point in enumerate(points):
        check_unit(point.rate, f"point {index} rate")
        check_unit(point.acceptance_probability, f"point {index} acceptance_probability")
        size = point.expected_sample_size
        if not (math.isfinite(size) and 0.0 <= size <= largest):
            raise ValueError(
                f"point {index} expected_sample_size must be from 0 to {largest:,}; got {size!r}"
            )
    return sorted(points, key=lambda point: point.rate)


def _stages_line(stages: Sequence[tuple[int, int, int]]) -> str:
    """The stages in one line: ``Stage 1: 66 items, accept ≤ 0, fail ≥ 2; …``."""
    parts = []
    for number, (size, accept, fail) in enumerate(stages, start=1):
        accept_text = "never accept" if accept < 0 else f"accept ≤ {accept:,}"
        parts.append(f"stage {number}: {size:,} items, {accept_text}, fail ≥ {fail:,}")
    text = "; ".join(parts)
    return text[0].upper() + text[1:]


def render_staged_curve_svg(
    points: Sequence[StagedChartPoint],
    *,
    stages: Sequence[tuple[int, int, int]],
    tolerable_rate: float | None,
    expected_rate: float | None,
    risk_of_overreliance: float | None,
    risk_of_underreliance: float | None,
    caption: str,
    population_label: str | None = None,
    description: str = "",
) -> str:
    """Draw a staged plan's acceptance probability and expected sample size as SVG text.

    Parameters
    ----------
    points : sequence of StagedChartPoint
        The curve at each rate, at least two; drawn in order of rate, one vertex per point.
    stages : sequence of (int, int, int)
        Each stage's cumulative sample size, ``accept_if_at_most`` and ``fail_if_at_least``
        (cumulative deviations), in order; shown under the title.
    tolerable_rate, expected_rate : float or None
        Marked by vertical lines in both panels when given.
    risk_of_overreliance, risk_of_underreliance : float or None
        Stated in the labels of the marks and drawn as short guides in the upper panel: at
        the tolerable rate the curve should lie at or below the risk of overreliance; at the
        expected rate at or above one minus the risk of underreliance.
    caption : str
        Text set under the chart.
    population_label : str, optional
        The population's name, shown under the stages and in the SVG ``<title>``.
    description : str
        The SVG ``<desc>``: the plan and its curve in words.

    Returns
    -------
    str
        A standalone SVG document. Element ids: ``acceptance-curve``,
        ``expected-size-curve``, ``largest-sample-size``, ``mark-tolerable``,
        ``mark-expected`` (upper panel) and ``mark-tolerable-size``, ``mark-expected-size``
        (lower panel) when the rates are given, ``risk-overreliance`` and
        ``risk-underreliance`` when the risks are, ``legend`` with ``label-acceptance``,
        ``label-tolerable``, ``label-expected``, ``axis-x-label``, ``axis-y-label``,
        ``axis-y-size-label``, ``plan-title``, ``plan-stages``, ``population-label`` (with a
        label) and ``caption``.

    Raises
    ------
    ValueError
        For rates, probabilities or risks outside 0…1, an expected sample size outside
        0…the last stage's size, fewer than two points, or no stage.
    """
    if not stages:
        raise ValueError("at least one stage is needed")
    largest = stages[-1][0]
    if isinstance(largest, bool) or not isinstance(largest, int) or largest < 1:
        raise ValueError(f"the last stage's size must be a whole number ≥ 1; got {largest!r}")
    curve = _checked(points, largest)
    check_rates(tolerable_rate, expected_rate, risk_of_overreliance, risk_of_underreliance)

    from matplotlib.ticker import MaxNLocator, MultipleLocator

    rates = [point.rate for point in curve]
    with svg_figure((6.4, 6.2)) as figure:
        top = figure.add_axes((0.12, 0.50, 0.84, 0.38))
        bottom = figure.add_axes((0.12, 0.17, 0.84, 0.25), sharex=top)

        rate_axis(top, rates, tolerable_rate)
        top.set_ylim(0.0, 1.0)
        bottom.set_ylim(0.0, largest * 1.08)
        top.yaxis.set_major_formatter(percent_formatter())
        top.yaxis.set_major_locator(MultipleLocator(0.2))
        bottom.xaxis.set_major_formatter(percent_formatter())
        bottom.yaxis.set_major_formatter(count_formatter())
        bottom.yaxis.set_major_locator(MaxNLocator(nbins=4, integer=True))
        top.tick_params(labelbottom=False)
        for axes in (top, bottom):
            clean_axes(axes)
        span = 0.035 * (top.get_xlim()[1] - top.get_xlim()[0])

        (line,) = top.plot(rates, [p.acceptance_probability for p in curve], color=CURVE,
                           linewidth=1.8, solid_joinstyle="round", gid="acceptance-curve")
        (size_line,) = bottom.plot(rates, [p.expected_sample_size for p in curve], color=_SIZE,
                                   linewidth=1.8, solid_joinstyle="round",
                                   gid="expected-size-curve")
        bottom.axhline(largest, color=MUTED, linewidth=0.9, linestyle=(0, (4, 2)),
                       gid="largest-sample-size")
        handles = [line, size_line]
        labels = ["Probability the staged test accepts",
                  f"Expected items tested (at most {largest:,})"]
        ids = ["label-acceptance", "label-expected-size"]
        for mark in rate_marks(tolerable_rate, risk_of_overreliance,
                               expected_rate, risk_of_underreliance):
            handles.append(draw_line(top, mark, f"mark-{mark.name}"))
            draw_line(bottom, mark, f"mark-{mark.name}-size")
            draw_guide(top, mark, span)
            labels.append(mark.label)
            ids.append(f"label-{mark.name}")
        add_legend(top, handles, labels, ids, fontsize=7.5)

        bottom.set_xlabel("True deviation rate", gid="axis-x-label")
        top.set_ylabel("Probability of acceptance", gid="axis-y-label")
        bottom.set_ylabel("Expected items tested", gid="axis-y-size-label")
        count = len(stages)
        title = (
            f"Staged plan of {count} stage{'' if count == 1 else 's'}, "
            f"at most {largest:,} item{'' if largest == 1 else 's'}"
        )
        top.set_title(title, loc="left", fontsize=9.5, color=INK, gid="plan-title",
                      pad=30 if population_label else 18)
        top.text(0.0, 1.015, _stages_line(stages), transform=top.transAxes, ha="left",
                 va="bottom", fontsize=7.5, color=MUTED, gid="plan-stages")
        if population_label:
            population_line(top, population_label, 1.065)
        add_caption(figure, 0.12, 0.02, caption)
        svg = figure_svg(figure)
    full_title = f"{title}; {_stages_line(stages).lower()}"
    if population_label:
        full_title += f"; population: {population_label}"
    return with_title(svg, full_title, description or caption)
