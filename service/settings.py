"""Service settings: read once from the environment into one frozen object.

============================= ========== ==================================================
variable                      default    meaning
============================= ========== ==================================================
SAMPLING_MAX_BODY_BYTES       1048576    largest request body accepted (413 beyond)
SAMPLING_MAX_SAMPLE_SIZE      10000000   largest sample any computation may consider
SAMPLING_MAX_ITEMS            1000000    largest explicit item list a selection accepts
SAMPLING_MAX_LIST_BODY_BYTES  67108864   largest body of an endpoint that takes item lists
SAMPLING_MAX_BATCH_OPERATIONS 1000       most operations one batch may hold
SAMPLING_MAX_BATCH_WORK       1000000    most work units one batch may hold (see below)
============================= ========== ==================================================

A batch's work units are, summed over its operations, the elements of every JSON array
in the request (listed items, ranges, exclusions, methods) plus its ``sample_size`` when
that is a whole number: so a batch can list, or draw, no more in total than one
selection may.

Every setting is read once, at start-up, into one frozen :class:`Settings`. A value that
is not a positive whole number, or a ``SAMPLING_`` variable that is not a setting, stops
start-up with a message naming the variable.
"""

from __future__ import annotations

import os
import re
from collections.abc import Mapping
from dataclasses import dataclass, fields

PREFIX = "SAMPLING_"
_MAX_DIGITS = 18
# ASCII digits only (str.isdigit also accepts other scripts' digits and superscripts).
_WHOLE_NUMBER = re.compile(rf"[0-9](?:_?[0-9]){{0,{_MAX_DIGITS - 1}}}")


class SettingsError(ValueError):
    """A setting in the environment is invalid."""


@dataclass(frozen=True)
class Settings:
    max_body_bytes: int = 1_048_576
    max_sample_size: int = 10_000_000
    max_items: int = 1_000_000
    # A million identifiers of a dozen characters are about 16 MB of JSON.
    max_list_body_bytes: int = 67_108_864
    max_batch_operations: int = 1_000
    max_batch_work: int = 1_000_000

    @classmethod
    def from_environ(cls, environ: Mapping[str, str] | None = None) -> Settings:
        """The settings from ``environ`` (default: the process environment).

        Every bad value, and every ``SAMPLING_`` variable that is not a setting (a typo
        would otherwise be ignored), is named in one :class:`SettingsError`.
        """
        environ = os.environ if environ is None else environ
        known = {variable(spec.name): spec.name for spec in fields(cls)}
        values: dict[str, int] = {}
        problems: list[str] = []
        for name in sorted(environ):
            if not name.startswith(PREFIX):
                continue
            raw = environ[name]
            if name not in known:
                problems.append(
                    f"{name}: is not a setting of this service (known: {', '.join(known)})"
                )
            elif not _WHOLE_NUMBER.fullmatch(raw.strip()):
                problems.append(
                    f"{name}={raw[:40]!r}: must be a positive whole number of at most "
                    f"{_MAX_DIGITS} digits (underscores may group them)"
                )
            elif (value := int(raw.strip().replace("_", ""))) < 1:
                problems.append(f"{name}={raw[:40]!r}: must be at least 1")
            else:
                values[known[name]] = value
        if problems:
            raise SettingsError("invalid configuration: " + "; ".join(problems))
        return cls(**values)


def variable(setting: str) -> str:
    """The environment variable of a setting: ``max_items`` → ``SAMPLING_MAX_ITEMS``."""
    return PREFIX + setting.upper()
