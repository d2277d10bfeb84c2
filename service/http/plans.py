"""Plan endpoints: ``POST /v1/plans/curve``, the operating characteristic of a plan.

JSON by default; ``Accept: image/svg+xml`` answers the same curve as an SVG chart.
"""

from __future__ import annotations

from typing import Any

from schemas.curves import CURVE_PATH, CurveRequest, CurveSchema
from service.http.attributes import model_method
from service.http.markdown import TicketLayout
from service.http.operations import Operation, blueprint
from service.render.oc_chart import render_operating_characteristic_svg
from service.sampling.curves import (
    OperatingCharacteristic,
    curve_summary,
    operating_characteristic,
)
from service.sampling.wording import CAUTION, percent, plan_setting_parts
from service.settings import Settings

SVG = "image/svg+xml"


def _curve(inputs: dict[str, Any], settings: Settings) -> OperatingCharacteristic:
    return operating_characteristic(**inputs, max_sample_size=settings.max_sample_size)


def _caption(curve: OperatingCharacteristic) -> str:
    """The plan in one short sentence, then the caution sentence.

    The population label is left out: it is free text of up to 200 characters, and the
    caption has room for three lines under the chart.
    """
    k = curve.allowed_deviations
    noun = "deviation" if k == 1 else "deviations"
    allowance = "no deviation" if k == 0 else f"up to {k:,} {noun}"
    parts = [f"{curve.sample_size:,} items", allowance, f"{curve.method} model"]
    parts += plan_setting_parts(
        curve.population_size, curve.tolerable_rate, curve.expected_rate
    )
    return f"Plan: {', '.join(parts)}. {CAUTION}"


def _chart_points(curve: OperatingCharacteristic) -> list[tuple[float, float]]:
    """The grid, plus the curve at the marked rates so that the line meets the marks."""
    points = {point.rate: point.probability for point in curve.points}
    if curve.tolerable_rate is not None and curve.risk_of_overreliance is not None:
        points.setdefault(curve.tolerable_rate, curve.risk_of_overreliance)
    if curve.expected_rate is not None and curve.risk_of_underreliance is not None:
        points.setdefault(curve.expected_rate, 1.0 - curve.risk_of_underreliance)
    return sorted(points.items())


def _whole_population(curve: OperatingCharacteristic) -> bool:
    return curve.population_size is not None and curve.sample_size == curve.population_size


def _whole_population_points(curve: OperatingCharacteristic) -> list[tuple[float, float]]:
    """The exact curve when every item is tested: a single step at k / N.

    With n = N the test finds every deviant item, so it supports reliance exactly when the
    population holds at most k of them: probability 1 up to the rate k / N, 0 beyond. A
    grid of rates would draw that step as a slope between two grid points.
    """
    size = curve.population_size or curve.sample_size
    step = curve.allowed_deviations / size
    end = max(min(1.0, 2 * step + 2 / size), (curve.tolerable_rate or 0.0) * 1.5)
    below_step = [(0.0, 1.0), (step, 1.0)] if step > 0 else [(0.0, 1.0)]
    return [*below_step, (min(step + 1e-9, 1.0), 0.0), (min(end, 1.0), 0.0)]


def _description(curve: OperatingCharacteristic) -> str:
    """The chart in words: the SVG's <desc>."""
    k = curve.allowed_deviations
    if _whole_population(curve):
        size = curve.population_size or curve.sample_size
        return (
            f"Every item of the population of {size:,} is tested, so there is no sampling "
            "risk: the test supports reliance exactly when the population holds "
            + ("no deviant item" if k == 0 else f"at most {k:,} deviant items")
            + f" (a rate of {percent(k / size)}); the curve is a single step from 100% to 0% "
            "at that rate."
        )
    return curve_summary(curve).removesuffix(CAUTION).strip()


def _svg(document: dict[str, Any], curve: OperatingCharacteristic) -> str:
    points = _whole_population_points(curve) if _whole_population(curve) else _chart_points(curve)
    return render_operating_characteristic_svg(
        points,
        sample_size=curve.sample_size,
        allowed_deviations=curve.allowed_deviations,
        tolerable_rate=curve.tolerable_rate,
        expected_rate=curve.expected_rate,
        risk_of_overreliance=curve.risk_of_overreliance,
        risk_of_underreliance=curve.risk_of_underreliance,
        caption=_caption(curve),
        population_label=curve.population_label,
        description=_description(curve),
    )


OPERATIONS = [
    Operation(
        name="plan-curve",
        repeatable=True,
        path=CURVE_PATH,
        summary="Operating characteristic of a test-of-controls plan",
        description=(
            "For a plan of sample_size items allowing allowed_deviations, the probability "
            "P(X ≤ allowed_deviations) that the sample supports reliance, at evenly spaced "
            "true deviation rates from 0, under the plan's model; with the risk of "
            "overreliance at tolerable_rate and the risk of underreliance at expected_rate "
            "when they are given. The curve_request of a sample size plan is a ready body. "
            "With Accept: image/svg+xml the answer is the curve as an SVG chart, drawn "
            "through the grid and through the marked rates. A staged plan's curve is "
            "POST /v1/plans/staged/curve: its points carry the expected sample size as well, "
            "and each costs a convolution over the stages, so its grid has its own default "
            "and limit."
        ),
        request=CurveRequest,
        response=CurveSchema,
        run=_curve,
        tag="tests of controls",
        renderers={SVG: _svg},
        ticket=TicketLayout(
            answer=("risk_of_overreliance", "risk_of_underreliance", "points"),
            method=lambda document: "operating characteristic of a single sampling plan "
            f"(Dodge & Romig 1959); {model_method(document)}",
        ),
    ),
]

bp = blueprint("plans", OPERATIONS)
