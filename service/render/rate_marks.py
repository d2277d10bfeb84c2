"""The tolerable and expected deviation rates as marked on the curve charts.

Each rate given is a vertical line; its risk, when given, is stated in the legend label and
drawn as a short horizontal guide where the curve should pass: at the tolerable rate the
probability of acceptance should be at most the risk of overreliance, at the expected rate
at least one minus the risk of underreliance.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

from service.render.svg import EXPECTED, TOLERABLE, check_unit, percent

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.lines import Line2D

__all__ = ["RateMark", "check_rates", "draw_guide", "draw_line", "rate_marks"]


@dataclass(frozen=True)
class RateMark:
    """One marked rate: its name in ids (``tolerable``, ``expected``), line style, legend
    label, and the height of its risk guide (None: no risk given)."""

    name: str
    rate: float
    color: str
    dashes: tuple[int, tuple[int, int]]
    label: str
    guide_level: float | None
    guide_id: str


def _label(kind: str, rate: float, risk_name: str, risk: float | None) -> str:
    label = f"{kind} {percent(rate)}"
    if risk is not None:
        label += f", {risk_name} {percent(risk)}"
    return label


def check_rates(
    tolerable_rate: float | None,
    expected_rate: float | None,
    risk_of_overreliance: float | None,
    risk_of_underreliance: float | None,
) -> None:
    """Refuse any of the two rates and two risks that is given and not a number from 0 to 1."""
    for value, name in ((tolerable_rate, "tolerable_rate"), (expected_rate, "expected_rate"),
                        (risk_of_overreliance, "risk_of_overreliance"),
                        (risk_of_underreliance, "risk_of_underreliance")):
        check_unit(value, name)


def rate_marks(
    tolerable_rate: float | None,
    risk_of_overreliance: float | None,
    expected_rate: float | None,
    risk_of_underreliance: float | None,
) -> list[RateMark]:
    """The marks of the rates that are given, the tolerable rate first."""
    marks = []
    if tolerable_rate is not None:
        marks.append(RateMark(
            "tolerable", tolerable_rate, TOLERABLE, (0, (5, 3)),
            _label("Tolerable rate", tolerable_rate, "risk of overreliance",
                   risk_of_overreliance),
            risk_of_overreliance, "risk-overreliance"))
    if expected_rate is not None:
        marks.append(RateMark(
            "expected", expected_rate, EXPECTED, (0, (1, 2)),
            _label("Expected rate", expected_rate, "risk of underreliance",
                   risk_of_underreliance),
            None if risk_of_underreliance is None else 1.0 - risk_of_underreliance,
            "risk-underreliance"))
    return marks


def draw_line(axes: Axes, mark: RateMark, gid: str) -> Line2D:
    """The mark's vertical line across ``axes``."""
    return axes.axvline(mark.rate, color=mark.color, linewidth=1.1, linestyle=mark.dashes,
                        gid=gid)


def draw_guide(axes: Axes, mark: RateMark, span: float) -> None:
    """The mark's risk guide, ``span`` either side of the rate, when its risk is given."""
    if mark.guide_level is not None:
        axes.plot([mark.rate - span, mark.rate + span], [mark.guide_level] * 2,
                  color=mark.color, linewidth=1.1, gid=mark.guide_id)
