"""Reading the charts' own SVG output in tests: parse it, find elements by id, read texts
and the vertices of a drawn path."""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET

SVG = "{http://www.w3.org/2000/svg}"


def parse(svg: str) -> ET.Element:
    """The document's root element."""
    return ET.fromstring(svg)  # noqa: S314 - the chart's own output, not outside data


def by_id(root: ET.Element) -> dict[str, ET.Element]:
    """Every element that has an ``id``, by its id."""
    return {element.get("id", ""): element for element in root.iter() if element.get("id")}


def texts(element: ET.Element) -> list[str]:
    """The stripped text of each ``<text>`` element within ``element``."""
    return ["".join(node.itertext()).strip() for node in element.iter(f"{SVG}text")]


def vertices(element: ET.Element) -> list[tuple[float, float]]:
    """The (x, y) vertices of the first ``<path>`` within ``element`` (move and line commands)."""
    d = next(element.iter(f"{SVG}path")).get("d", "")
    return [(float(x), float(y)) for x, y in re.findall(r"[ML] ([-\d.]+) ([-\d.]+)", d)]
