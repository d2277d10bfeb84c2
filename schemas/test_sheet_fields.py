"""Fields of the test sheets' contracts: the attributes a selection's request names for an
attribute test sheet, and how an evaluation's request treats the items not tested."""

from __future__ import annotations

from collections import Counter
from collections.abc import Sequence
from typing import Any

from marshmallow import ValidationError, fields, validate

from schemas.fields import StrictString, json_kind
from service.sampling.test_sheets.layout import MAX_ATTRIBUTE_LENGTH, MAX_ATTRIBUTES


class AttributeNames(fields.List[Any]):
    """1 to MAX_ATTRIBUTES distinct names of 1 to MAX_ATTRIBUTE_LENGTH characters.

    The length of the list is checked before any entry, so that an oversized list is refused
    at once instead of entry by entry.
    """

    def __init__(self, **kwargs: Any) -> None:
        entry = StrictString(metadata={"minLength": 1, "maxLength": MAX_ATTRIBUTE_LENGTH})
        metadata = {"minItems": 1, "maxItems": MAX_ATTRIBUTES, **kwargs.pop("metadata", {})}
        super().__init__(entry, metadata=metadata, **kwargs)

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> list[Any]:
        if not isinstance(value, list):
            raise ValidationError(f"must be an array of names, not {json_kind(value)}")
        if not 1 <= len(value) <= MAX_ATTRIBUTES:
            raise ValidationError(
                f"must name between 1 and {MAX_ATTRIBUTES} attributes; got {len(value):,}"
            )
        errors: dict[int, list[str]] = {}
        for index, name in enumerate(value):
            if not isinstance(name, str):
                errors[index] = [f"must be a string, not {json_kind(name)}"]
            elif not 1 <= len(name) <= MAX_ATTRIBUTE_LENGTH:
                errors[index] = [
                    f"must have between 1 and {MAX_ATTRIBUTE_LENGTH} characters; got {len(name)}"
                ]
        if errors:
            raise ValidationError(errors)
        repeated = sorted(name for name, times in Counter(value).items() if times > 1)
        if repeated:
            raise ValidationError(f"must be distinct; repeated: {', '.join(repeated)}")
        return list(value)


def not_tested_treatment(treatments: Sequence[str], description: str) -> StrictString:
    """The request's ``not_tested``: one of ``treatments``, optional."""
    return StrictString(
        validate=validate.OneOf(treatments, error="must be one of {choices}"),
        metadata={"description": description},
    )
