"""Service settings: read once from the environment into one frozen object.

=========================== ========== ===============================================
variable                    default    meaning
=========================== ========== ===============================================
SAMPLING_MAX_BODY_BYTES     1048576    largest request body accepted (413 beyond)
SAMPLING_MAX_SAMPLE_SIZE    10000000   largest sample any computation may consider
SAMPLING_MAX_ITEMS          1000000    largest explicit item list a selection accepts
SAMPLING_MAX_LIST_BODY_BYTES 67108864  largest body of an endpoint that takes item lists
=========================== ========== ===============================================

A value that is not a positive whole number stops start-up with a message
naming the variable.
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from dataclasses import dataclass, fields


class SettingsError(ValueError):
    """A setting in the environment is invalid."""


@dataclass(frozen=True)
class Settings:
    max_body_bytes: int = 1_048_576
    max_sample_size: int = 10_000_000
    max_items: int = 1_000_000
    # A million identifiers of a dozen characters are about 16 MB of JSON.
    max_list_body_bytes: int = 67_108_864

    @classmethod
    def from_environ(cls, environ: Mapping[str, str] | None = None) -> Settings:
        environ = os.environ if environ is None else environ
        values: dict[str, int] = {}
        for spec in fields(cls):
            name = f"SAMPLING_{spec.name.upper()}"
            raw = environ.get(name)
            if raw is None:
                continue
            text = raw.strip().replace("_", "")
            if not text.isdigit() or int(text) < 1:
                raise SettingsError(f"{name}={raw!r}: must be a positive whole number")
            values[spec.name] = int(text)
        return cls(**values)
