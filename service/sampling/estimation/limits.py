"""The accepted ranges of the estimation inputs, the exact method's limits and the array types."""

from __future__ import annotations

from typing import Literal

import numpy as np
import numpy.typing as npt

Guarantee = Literal["exact", "approximate", "distribution_free_bound"]

IntArray = npt.NDArray[np.int64]
FloatArray = npt.NDArray[np.float64]

#: Largest sample size for which exact miss probabilities are computed (the exact method
#: raises :class:`ComputationTooLarge` above it; other rows then report no miss probability).
EXACT_SIZE_LIMIT = 400_000

#: Smallest margin accepted: a hundredth of a percentage point.  Smaller margins need
#: more items than any sample could hold, and push the size formulas below the floating
#: point range.
MIN_MARGIN = 0.0001

#: Confidence levels accepted: from an even chance to one miss in a million.
MIN_CONFIDENCE = 0.5
MAX_CONFIDENCE = 0.999999

#: Largest population size accepted (keeps the exact integer thresholds within 64 bits).
MAX_POPULATION_SIZE = 10**11

#: Work limit for exact hypergeometric computations, in (candidate × summed term) units;
#: about a second of computation.
_HYPERGEOMETRIC_WORK_LIMIT = 100_000_000

#: Relative size below which a further term of a hypergeometric tail sum is dropped.
_TAIL_TOLERANCE = 2.0**-60

_FIRST_CHUNK = 256
_LARGEST_CHUNK = 65_536
_DIRECT = 2048
