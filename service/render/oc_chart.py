"""Operating characteristic chart of an attribute sampling plan, as an SVG document.

The operating characteristic (OC) curve of a plan "sample ``n`` items, rely on the control
if at most ``k`` deviations are found" gives, for each true deviation rate, the probability
that the sample supports reliance.  The chart marks the tolerable deviation rate (where
that probability should not exceed the risk of overreliance) and the expected population
deviation rate (where the probability of *not* supporting reliance should not exceed the
risk of underreliance).

Drawn on the scaffolding of :mod:`service.render.svg` (shared lock and settings,
deterministic output, ``<title>`` and ``<desc>`` as the document's first children); the
rates are marked as :mod:`service.render.rate_marks` draws them.
"""

from __future__ import annotations

from collections.abc import Sequence

from service.render.rate_marks import check_rates, draw_guide, draw_line, rate_marks
from service.render.svg import (
    CURVE,
    INK,
    add_caption,
    add_legend,
    check_unit,
    clean_axes,
    figure_svg,
    percent_formatter,
    population_line,
    rate_axis,
    svg_figure,
    with_title,
)

__all__ = ["render_operating_characteristic_svg"]


def _checked_points(points: Sequence[tuple[float, float]]) -> list[tuple[float, float]]:
    if len(points) < 2:
        raise ValueError(f"at least two points are needed; got {len(points)}")
    checked = []
    for index, point in enumerate(points):
        if len(point) != 2:
            raise ValueError(f"point {index} must be a (rate, probability) pair; got {point!r}")
        rate, probability = float(point[0]), float(point[1])
        check_unit(rate, f"point {index} rate")
        check_unit(probability, f"point {index} probability")
        checked.append((rate, probability))
    return sorted(checked)


def render_operating_characteristic_svg(
    points: Sequence[tuple[float, float]],
    *,
    sample_size: int,
    allowed_deviations: int,
    tolerable_rate: float | None,
    expected_rate: float | None,
    risk_of_overreliance: float | None,
    risk_of_underreliance: float | None,
    caption: str,
    population_label: str | None = None,
    description: str = "",
) -> str:
    """Draw the operating characteristic curve of a plan and return it as SVG text.

    Parameters
    ----------
    points : sequence of (float, float)
        ``(true deviation rate, probability the sample supports reliance)`` pairs, rates
        and probabilities from 0 to 1; at least two.  They are drawn in order of rate,
        joined by straight segments, one vertex per point.
    sample_size : int
        Sample size ``n`` of the plan (shown in the chart title).
    allowed_deviations : int
        Largest number of deviations ``k`` that still supports reliance.
    tolerable_rate, expected_rate : float or None
        Tolerable deviation rate and expected population deviation rate, marked by
        vertical lines when given.
    risk_of_overreliance, risk_of_underreliance : float or None
        Risks stated in the labels of the two marks, and drawn as short horizontal guides:
        at the tolerable rate the curve should lie at or below the risk of overreliance;
        at the expected rate at or above one minus the risk of underreliance.
    caption : str
        Text set under the chart.
    population_label : str, optional
        The population's name, shown under the plan title and in the SVG ``<title>``.
    description : str
        The SVG ``<desc>``: the plan and its curve in words, for screen readers and for
        anyone reading the file without drawing it.

    Returns
    -------
    str
        A standalone SVG document.  Element ids: ``oc-curve``, ``mark-tolerable``,
        ``mark-expected``, ``risk-overreliance``, ``risk-underreliance`` (when drawn),
        ``legend`` with ``label-curve``, ``label-tolerable``, ``label-expected``,
        ``axis-x-label``, ``axis-y-label``, ``plan-title``, ``population-label`` (when a
        label is given) and ``caption``; the root's first children are ``<title>`` (the plan
        and the population label) and ``<desc>``.

    Raises
    ------
    ValueError
        For points, rates or risks outside 0…1, fewer than two points, or a negative
        sample size or deviation count.
    """
    curve = _checked_points(points)
    for value, name in ((sample_size, "sample_size"), (allowed_deviations, "allowed_deviations")):
        if isinstance(value, bool) or not isinstance(value, int) or value < 0:
            raise ValueError(f"{name} must be a whole number ≥ 0; got {value!r}")
    check_rates(tolerable_rate, expected_rate, risk_of_overreliance, risk_of_underreliance)

    from matplotlib.ticker import MultipleLocator

    with svg_figure((6.4, 4.4)) as figure:
        axes = figure.add_axes((0.11, 0.22, 0.85, 0.68))

        rates = [rate for rate, _ in curve]
        rate_axis(axes, rates, tolerable_rate)
        axes.set_ylim(0.0, 1.0)
        axes.xaxis.set_major_formatter(percent_formatter())
        axes.yaxis.set_major_formatter(percent_formatter())
        axes.yaxis.set_major_locator(MultipleLocator(0.2))
        clean_axes(axes)
        span = 0.035 * (axes.get_xlim()[1] - axes.get_xlim()[0])

        (line,) = axes.plot(rates, [probability for _, probability in curve], color=CURVE,
                            linewidth=1.8, solid_joinstyle="round", gid="oc-curve")
        handles = [line]
        labels = ["Operating characteristic"]
        ids = ["label-curve"]
        for mark in rate_marks(tolerable_rate, risk_of_overreliance,
                               expected_rate, risk_of_underreliance):
            handles.append(draw_line(axes, mark, f"mark-{mark.name}"))
            labels.append(mark.label)
            ids.append(f"label-{mark.name}")
            draw_guide(axes, mark, span)
        add_legend(axes, handles, labels, ids, fontsize=8)

        axes.set_xlabel("True deviation rate", gid="axis-x-label")
        axes.set_ylabel("Probability the sample supports reliance", gid="axis-y-label")
        noun = "deviation" if allowed_deviations == 1 else "deviations"
        allowance = (
            "only with no deviation"
            if allowed_deviations == 0
            else f"with up to {allowed_deviations:,} {noun}"
        )
        items = "item" if sample_size == 1 else "items"
        title = f"Sample of {sample_size:,} {items}, reliance {allowance}"
        axes.set_title(title, loc="left", fontsize=9.5, color=INK, gid="plan-title",
                       pad=18 if population_label else 6)
        if population_label:
            population_line(axes, population_label, 1.015)
        add_caption(figure, 0.11, 0.035, caption)
        svg = figure_svg(figure)
    full_title = title if not population_label else f"{title}; population: {population_label}"
    return with_title(svg, full_title, description or caption)
