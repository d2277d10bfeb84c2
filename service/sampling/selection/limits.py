"""The algorithm's name, version and identifiers, and the limits of its inputs."""

from __future__ import annotations

import struct
from collections.abc import Mapping
from typing import Final

ALGORITHM: Final = "sha256-counter-fisher-yates"
"""Name of the selection algorithm."""

ALGORITHM_VERSION: Final = 1
"""Version of the byte-level specification; bumped whenever any selected item could change."""

ALGORITHM_ID: Final = f"{ALGORITHM}/v{ALGORITHM_VERSION}"
"""Identifier reported with every random selection: ``"sha256-counter-fisher-yates/v1"``."""

SYSTEMATIC_ALGORITHM_ID: Final = "hmac-sha256-systematic/v1"
"""Identifier reported with every systematic selection (a random start, no shuffle)."""

ALGORITHM_IDS: Final[Mapping[str, str]] = {
    "random": ALGORITHM_ID,
    "systematic": SYSTEMATIC_ALGORITHM_ID,
}
"""The algorithm identifier of each method; each is bound into the selection fingerprint."""

MAX_SEED_LENGTH: Final = 256
"""Longest seed accepted, in characters (Unicode code points)."""

MAX_IDENTIFIER_LENGTH: Final = 1_000
"""Longest item identifier accepted, in characters (Unicode code points)."""

MAX_NUMBER: Final = 2**53 - 1
"""Largest population size and largest document number; every value stays exact in JSON."""

DEFAULT_MAX_ITEMS: Final = 1_000_000
"""Default cap on listed inputs (identifiers, ranges plus exclusions) and on the sample size."""

_TWO_64: Final = 1 << 64
_WORDS: Final = struct.Struct(">4Q").unpack
_SHOWN: Final = 5  # how many offending values a message names before "and N more"
