"""Amounts written as text, read exactly: the styles an export may use.

An amount is read from its text, never through a binary float, into a decimal with at
most :data:`MAX_PLACES` places. The caller declares the style the export writes, named by
how it writes one thousand two hundred and thirty-four point five six:

============== ================================ =============================
style          accepted                         negative
============== ================================ =============================
``1,234.56``   ``1234.56``, ``1,234.56``         a leading ``-``
``1.234,56``   ``1234,56``, ``1.234,56``         a leading ``-``
``(1,234.56)`` as ``1,234.56``                   a leading ``-`` or ``(1,234.56)``
============== ================================ =============================

A thousands separator, when used, must group every three digits left of the decimal
separator; a leading ``+`` is accepted; spaces around the text are ignored. Anything else
(a currency sign, a letter, two decimal separators) is refused, naming its line.

The rules are applied in the database engine as a regular expression and a cast to
``DECIMAL(38, 10)``, exact for every accepted text (:func:`sql_amount`), and in Python by
:func:`parse_amount`, which states the same rules for cells that arrive typed.
"""

from __future__ import annotations

import re
from decimal import Decimal
from typing import Final

from service.sampling.errors import InvalidInput

MAX_PLACES: Final = 10
"""Most decimal places an amount may have."""

STYLES: Final = ("1,234.56", "1.234,56", "(1,234.56)")
"""The accepted amount styles; the first is the default."""

_PLACES = rf"\d{{1,{MAX_PLACES}}}"
_POINT = rf"[-+]?(?:\d{{1,3}}(?:,\d{{3}})+|\d+)(?:\.{_PLACES})?"
_COMMA = rf"[-+]?(?:\d{{1,3}}(?:\.\d{{3}})+|\d+)(?:,{_PLACES})?"
_BRACKETED = r"\((?:\d{1,3}(?:,\d{3})+|\d+)(?:\." + _PLACES + r")?\)"

PATTERNS: Final = {
    "1,234.56": f"^{_POINT}$",
    "1.234,56": f"^{_COMMA}$",
    "(1,234.56)": f"^(?:{_POINT}|{_BRACKETED})$",
}
"""For each style, the regular expression an amount's trimmed text must match."""

DECIMAL_TYPE: Final = f"DECIMAL(38, {MAX_PLACES})"


def _normalise(text: str, style: str) -> str:
    """The text as plain decimal notation (``-1234.56``) once it matches ``style``."""
    if style == "1.234,56":
        return text.replace(".", "").replace(",", ".")
    plain = text.replace(",", "")
    if plain.startswith("("):
        return "-" + plain[1:-1]
    return plain


def parse_amount(text: str, style: str = STYLES[0], where: str = "amount") -> Decimal:
    """The amount ``text`` written in ``style``, as an exact Decimal.

    Examples
    --------
    >>> parse_amount("1,234.56"), parse_amount("1.234,56", "1.234,56")
    (Decimal('1234.56'), Decimal('1234.56'))
    >>> parse_amount("(1,234.56)", "(1,234.56)")
    Decimal('-1234.56')
    """
    if style not in PATTERNS:
        raise InvalidInput("amount_style", f"must be one of {', '.join(STYLES)}; got {style!r}")
    trimmed = text.strip()
    if not re.fullmatch(PATTERNS[style], trimmed):
        raise InvalidInput(where, f"{text[:40]!r} is not an amount written as {style}")
    return Decimal(_normalise(trimmed, style))


def sql_amount(column: str, style: str) -> tuple[str, str, str]:
    """SQL expressions for the column ``column`` (a quoted name) written in ``style``.

    Returns ``(valid, value, places)``: ``valid`` is true when the trimmed text is blank
    or an amount of the style; ``value`` is the amount as ``DECIMAL(38, 10)`` (NULL when
    blank); ``places`` the number of decimal places written.
    """
    if style not in PATTERNS:
        raise InvalidInput("amount_style", f"must be one of {', '.join(STYLES)}; got {style!r}")
    text = f"trim({column})"
    pattern = PATTERNS[style].replace("'", "''")
    valid = f"(coalesce({text}, '') = '' OR regexp_full_match({text}, '{pattern}'))"
    if style == "1.234,56":
        plain = f"replace(replace({text}, '.', ''), ',', '.')"
    else:
        plain = f"replace({text}, ',', '')"
        if style == "(1,234.56)":
            plain = (
                f"CASE WHEN starts_with({plain}, '(') THEN '-' || {plain}[2:-2] ELSE {plain} END"
            )
    value = (
        f"CASE WHEN coalesce({text}, '') = '' THEN NULL "
        f"ELSE TRY_CAST({plain} AS {DECIMAL_TYPE}) END"
    )
    dot = f"strpos({plain}, '.')"
    places = f"CASE WHEN {dot} > 0 THEN length({plain}) - {dot} ELSE 0 END"
    return valid, value, places
