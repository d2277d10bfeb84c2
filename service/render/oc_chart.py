"""Operating characteristic chart of an attribute sampling plan, as an SVG document.

The operating characteristic (OC) curve of a plan "sample ``n`` items, rely on the control
if at most ``k`` deviations are found" gives, for each true deviation rate, the probability
that the sample supports reliance.  The chart marks the tolerable deviation rate (where
that probability should not exceed the risk of overreliance) and the expected population
deviation rate (where the probability of *not* supporting reliance should not exceed the
risk of underreliance).

matplotlib is imported inside :func:`render_operating_characteristic_svg`, so importing
this module stays cheap.  The figure is drawn on its own :class:`matplotlib.figure.Figure`
with the SVG canvas (no pyplot state); the few settings that matplotlib reads from its
global configuration while writing SVG are applied under a lock, so concurrent calls from
several threads do not interfere.  The output is deterministic: fixed hash salt for
element ids, no date in the metadata, text kept as SVG text, no path simplification.
"""

from __future__ import annotations

import io
import math
import threading
from collections.abc import Sequence
from typing import Any, cast

__all__ = ["render_operating_characteristic_svg"]

_LOCK = threading.Lock()

_CURVE = "#1f3a5f"  # deep slate blue
_TOLERABLE = "#9b3d2e"  # brick
_EXPECTED = "#4a6b3a"  # moss
_INK = "#2e2e2e"
_MUTED = "#6b6b6b"
_GRID = "#e3e3e3"

_SETTINGS: dict[str, Any] = {
    "svg.hashsalt": "oc-chart",
    "svg.fonttype": "none",
    "path.simplify": False,
    "font.family": "DejaVu Sans",
    "font.size": 9.0,
    "axes.edgecolor": _MUTED,
    "axes.labelcolor": _INK,
    "xtick.color": _MUTED,
    "ytick.color": _MUTED,
    "text.color": _INK,
}


def _percent(rate: float) -> str:
    """A rate as a percentage with up to two decimals: 0.05 → '5%', 0.0125 → '1.25%'."""
    text = f"{rate * 100:.2f}".rstrip("0").rstrip(".")
    return f"{text}%"


def _check_unit(value: float | None, name: str) -> None:
    if value is None:
        return
    if isinstance(value, bool) or not isinstance(value, int | float) or not (
        math.isfinite(value) and 0.0 <= value <= 1.0
    ):
        raise ValueError(f"{name} must be a number from 0 to 1; got {value!r}")


def _checked_points(points: Sequence[tuple[float, float]]) -> list[tuple[float, float]]:
    if len(points) < 2:
        raise ValueError(f"at least two points are needed; got {len(points)}")
    checked = []
    for index, point in enumerate(points):
        if len(point) != 2:
            raise ValueError(f"point {index} must be a (rate, probability) pair; got {point!r}")
        rate, probability = float(point[0]), float(point[1])
        _check_unit(rate, f"point {index} rate")
        _check_unit(probability, f"point {index} probability")
        checked.append((rate, probability))
    return sorted(checked)


def _mark_label(kind: str, rate: float, risk_name: str, risk: float | None) -> str:
    label = f"{kind} {_percent(rate)}"
    if risk is not None:
        label += f", {risk_name} {_percent(risk)}"
    return label


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
    for rate_or_risk, name in ((tolerable_rate, "tolerable_rate"), (expected_rate, "expected_rate"),
                               (risk_of_overreliance, "risk_of_overreliance"),
                               (risk_of_underreliance, "risk_of_underreliance")):
        _check_unit(rate_or_risk, name)

    import matplotlib as mpl
    from matplotlib.backends.backend_svg import FigureCanvasSVG
    from matplotlib.figure import Figure
    from matplotlib.ticker import FuncFormatter, MultipleLocator

    def percent_tick(value: float, _position: object) -> str:
        return _percent(round(value, 12))

    with _LOCK, mpl.rc_context(cast(Any, _SETTINGS)):
        figure = Figure(figsize=(6.4, 4.4), dpi=100)
        FigureCanvasSVG(figure)
        axes = figure.add_axes((0.11, 0.22, 0.85, 0.68))

        rates = [rate for rate, _ in curve]
        right = max(rates[-1], (tolerable_rate or 0.0) * 1.15)
        axes.set_xlim(min(rates[0], 0.0), right if right > 0 else 1.0)
        axes.set_ylim(0.0, 1.0)
        axes.xaxis.set_major_formatter(FuncFormatter(percent_tick))
        axes.yaxis.set_major_formatter(FuncFormatter(percent_tick))
        axes.yaxis.set_major_locator(MultipleLocator(0.2))
        axes.grid(True, color=_GRID, linewidth=0.6)
        axes.set_axisbelow(True)
        for side in ("top", "right"):
            axes.spines[side].set_visible(False)
        span = 0.035 * (axes.get_xlim()[1] - axes.get_xlim()[0])

        handles, labels, ids = [], [], []
        (line,) = axes.plot(rates, [probability for _, probability in curve], color=_CURVE,
                            linewidth=1.8, solid_joinstyle="round", gid="oc-curve")
        handles.append(line)
        labels.append("Operating characteristic")
        ids.append("label-curve")

        if tolerable_rate is not None:
            handles.append(axes.axvline(tolerable_rate, color=_TOLERABLE, linewidth=1.1,
                                        linestyle=(0, (5, 3)), gid="mark-tolerable"))
            labels.append(_mark_label("Tolerable rate", tolerable_rate,
                                      "risk of overreliance", risk_of_overreliance))
            ids.append("label-tolerable")
            if risk_of_overreliance is not None:
                axes.plot([tolerable_rate - span, tolerable_rate + span],
                          [risk_of_overreliance] * 2, color=_TOLERABLE, linewidth=1.1,
                          gid="risk-overreliance")

        if expected_rate is not None:
            handles.append(axes.axvline(expected_rate, color=_EXPECTED, linewidth=1.1,
                                        linestyle=(0, (1, 2)), gid="mark-expected"))
            labels.append(_mark_label("Expected rate", expected_rate,
                                      "risk of underreliance", risk_of_underreliance))
            ids.append("label-expected")
            if risk_of_underreliance is not None:
                axes.plot([expected_rate - span, expected_rate + span],
                          [1.0 - risk_of_underreliance] * 2, color=_EXPECTED, linewidth=1.1,
                          gid="risk-underreliance")

        legend = axes.legend(handles, labels, loc="upper right", fontsize=8, frameon=True,
                             framealpha=0.92, edgecolor=_GRID, borderpad=0.6)
        legend.set_gid("legend")
        for text, gid in zip(legend.get_texts(), ids, strict=True):
            text.set_gid(gid)

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
        axes.set_title(title, loc="left", fontsize=9.5, color=_INK, gid="plan-title",
                       pad=18 if population_label else 6)
        if population_label:
            shown = population_label if len(population_label) <= 90 else (
                population_label[:90] + "…")
            axes.text(0.0, 1.015, f"Population: {shown}", transform=axes.transAxes,
                      ha="left", va="bottom", fontsize=8, color=_MUTED, gid="population-label")
        figure.text(0.11, 0.035, caption, ha="left", va="bottom", fontsize=8, color=_MUTED,
                    wrap=True, gid="caption")

        buffer = io.StringIO()
        figure.savefig(buffer, format="svg", metadata={"Date": None})
    full_title = title if not population_label else f"{title}; population: {population_label}"
    return _with_title(buffer.getvalue(), full_title, description or caption)


def _with_title(svg: str, title: str, description: str) -> str:
    """``svg`` with ``<title>`` and ``<desc>`` as the first children of its root element."""
    from html import escape

    root = svg.index("<svg")
    end = svg.index(">", root) + 1
    extra = f"\n <title>{escape(title)}</title>\n <desc>{escape(description)}</desc>"
    return svg[:end] + extra + svg[end:]
