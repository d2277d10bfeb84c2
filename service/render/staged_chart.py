"""Chart of a staged (stop-or-go) plan against the true deviation rate, as an SVG document.

Two panels share the rate axis. The upper one is the plan's operating characteristic: the
probability that the staged test ends in acceptance. The lower one is its expected sample
size (average sample number): the items the test takes on average before it stops, between
the first stage's size and the last stage's cumulative size. The tolerable deviation rate
and the expected population deviation rate are marked in both panels; at the tolerable
rate the acceptance probability is the risk of overreliance, at the expected rate one minus
it is the risk of underreliance (Dodge & Romig 1959, double sampling plans).

Drawn with matplotlib as :mod:`service.render.oc_chart` draws a single plan, with the same
settings, lock and deterministic output; the document's first children are ``<title>``
and ``<desc>``.
"""

from __future__ import annotations

import io
import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any, cast

from service.render.oc_chart import (
    _CURVE,
    _EXPECTED,
    _GRID,
    _INK,
    _LOCK,
    _MUTED,
    _SETTINGS,
    _TOLERABLE,
    _percent,
    _with_title,
)

__all__ = ["StagedChartPoint", "render_staged_curve_svg"]

_SIZE = "#7a5c99"  # muted violet: the expected sample size


@dataclass(frozen=True)
class StagedChartPoint:
    """One rate of the chart: the acceptance probability and the expected sample size."""

    rate: float
    acceptance_probability: float
    expected_sample_size: float


def _check_unit(value: float | None, name: str) -> None:
    if value is None:
        return
    if isinstance(value, bool) or not isinstance(value, int | float) or not (
        math.isfinite(value) and 0.0 <= value <= 1.0
    ):
        raise ValueError(f"{name} must be a number from 0 to 1; got {value!r}")


def _checked(points: Sequence[StagedChartPoint], largest: int) -> list[StagedChartPoint]:
    if len(points) < 2:
        raise ValueError(f"at least two points are needed; got {len(points)}")
    for index, point in enumerate(points):
        _check_unit(point.rate, f"point {index} rate")
        _check_unit(point.acceptance_probability, f"point {index} acceptance_probability")
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
    for value, name in ((tolerable_rate, "tolerable_rate"), (expected_rate, "expected_rate"),
                        (risk_of_overreliance, "risk_of_overreliance"),
                        (risk_of_underreliance, "risk_of_underreliance")):
        _check_unit(value, name)

    import matplotlib as mpl
    from matplotlib.backends.backend_svg import FigureCanvasSVG
    from matplotlib.figure import Figure
    from matplotlib.ticker import FuncFormatter, MaxNLocator, MultipleLocator

    def percent_tick(value: float, _position: object) -> str:
        return _percent(round(value, 12))

    def count_tick(value: float, _position: object) -> str:
        return f"{value:,.0f}"

    rates = [point.rate for point in curve]
    with _LOCK, mpl.rc_context(cast(Any, _SETTINGS)):
        figure = Figure(figsize=(6.4, 6.2), dpi=100)
        FigureCanvasSVG(figure)
        top = figure.add_axes((0.12, 0.50, 0.84, 0.38))
        bottom = figure.add_axes((0.12, 0.17, 0.84, 0.25), sharex=top)

        right = max(rates[-1], (tolerable_rate or 0.0) * 1.15)
        top.set_xlim(min(rates[0], 0.0), right if right > 0 else 1.0)
        top.set_ylim(0.0, 1.0)
        bottom.set_ylim(0.0, largest * 1.08)
        top.yaxis.set_major_formatter(FuncFormatter(percent_tick))
        top.yaxis.set_major_locator(MultipleLocator(0.2))
        bottom.xaxis.set_major_formatter(FuncFormatter(percent_tick))
        bottom.yaxis.set_major_formatter(FuncFormatter(count_tick))
        bottom.yaxis.set_major_locator(MaxNLocator(nbins=4, integer=True))
        top.tick_params(labelbottom=False)
        for axes in (top, bottom):
            axes.grid(True, color=_GRID, linewidth=0.6)
            axes.set_axisbelow(True)
            for side in ("top", "right"):
                axes.spines[side].set_visible(False)
        span = 0.035 * (top.get_xlim()[1] - top.get_xlim()[0])

        handles, labels, ids = [], [], []
        (line,) = top.plot(rates, [p.acceptance_probability for p in curve], color=_CURVE,
                           linewidth=1.8, solid_joinstyle="round", gid="acceptance-curve")
        handles.append(line)
        labels.append("Probability the staged test accepts")
        ids.append("label-acceptance")
        (size_line,) = bottom.plot(rates, [p.expected_sample_size for p in curve], color=_SIZE,
                                   linewidth=1.8, solid_joinstyle="round",
                                   gid="expected-size-curve")
        bottom.axhline(largest, color=_MUTED, linewidth=0.9, linestyle=(0, (4, 2)),
                       gid="largest-sample-size")
        handles.append(size_line)
        labels.append(f"Expected items tested (at most {largest:,})")
        ids.append("label-expected-size")

        if tolerable_rate is not None:
            handles.append(top.axvline(tolerable_rate, color=_TOLERABLE, linewidth=1.1,
                                       linestyle=(0, (5, 3)), gid="mark-tolerable"))
            bottom.axvline(tolerable_rate, color=_TOLERABLE, linewidth=1.1,
                           linestyle=(0, (5, 3)), gid="mark-tolerable-size")
            label = f"Tolerable rate {_percent(tolerable_rate)}"
            if risk_of_overreliance is not None:
                label += f", risk of overreliance {_percent(risk_of_overreliance)}"
                top.plot([tolerable_rate - span, tolerable_rate + span],
                         [risk_of_overreliance] * 2, color=_TOLERABLE, linewidth=1.1,
                         gid="risk-overreliance")
            labels.append(label)
            ids.append("label-tolerable")

        if expected_rate is not None:
            handles.append(top.axvline(expected_rate, color=_EXPECTED, linewidth=1.1,
                                       linestyle=(0, (1, 2)), gid="mark-expected"))
            bottom.axvline(expected_rate, color=_EXPECTED, linewidth=1.1,
                           linestyle=(0, (1, 2)), gid="mark-expected-size")
            label = f"Expected rate {_percent(expected_rate)}"
            if risk_of_underreliance is not None:
                label += f", risk of underreliance {_percent(risk_of_underreliance)}"
                top.plot([expected_rate - span, expected_rate + span],
                         [1.0 - risk_of_underreliance] * 2, color=_EXPECTED, linewidth=1.1,
                         gid="risk-underreliance")
            labels.append(label)
            ids.append("label-expected")

        legend = top.legend(handles, labels, loc="upper right", fontsize=7.5, frameon=True,
                            framealpha=0.92, edgecolor=_GRID, borderpad=0.6)
        legend.set_gid("legend")
        for text, gid in zip(legend.get_texts(), ids, strict=True):
            text.set_gid(gid)

        bottom.set_xlabel("True deviation rate", gid="axis-x-label")
        top.set_ylabel("Probability of acceptance", gid="axis-y-label")
        bottom.set_ylabel("Expected items tested", gid="axis-y-size-label")
        count = len(stages)
        title = (
            f"Staged plan of {count} stage{'' if count == 1 else 's'}, "
            f"at most {largest:,} item{'' if largest == 1 else 's'}"
        )
        top.set_title(title, loc="left", fontsize=9.5, color=_INK, gid="plan-title",
                      pad=30 if population_label else 18)
        top.text(0.0, 1.015, _stages_line(stages), transform=top.transAxes, ha="left",
                 va="bottom", fontsize=7.5, color=_MUTED, gid="plan-stages")
        if population_label:
            shown = population_label if len(population_label) <= 90 else (
                population_label[:90] + "…")
            top.text(0.0, 1.065, f"Population: {shown}", transform=top.transAxes,
                     ha="left", va="bottom", fontsize=8, color=_MUTED, gid="population-label")
        figure.text(0.12, 0.02, caption, ha="left", va="bottom", fontsize=8, color=_MUTED,
                    wrap=True, gid="caption")

        buffer = io.StringIO()
        figure.savefig(buffer, format="svg", metadata={"Date": None})
    full_title = f"{title}; {_stages_line(stages).lower()}"
    if population_label:
        full_title += f"; population: {population_label}"
    return _with_title(buffer.getvalue(), full_title, description or caption)
