"""What enters a field model: usable corrected readings as arrays.

One place decides which readings count, so the CLI, the exports, the report and the terminal app
map the same readings.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from mapper.readings.model import EXCLUDED_FLAG, CorrectedReading

#: Flags that keep a reading out of the field model (it stays in the survey and the exports).
EXCLUDING_FLAGS = frozenset({EXCLUDED_FLAG})
#: Fewest distinct reading positions a field model is built from. Three points fix only a plane;
#: five leave something to cross-validate (common practice, no source).
MIN_FIELD_POSITIONS = 5
#: Positions closer than this are one position, metres.
SAME_POSITION_M = 1e-3


def is_excluded(reading: CorrectedReading) -> bool:
    """True when a corrected reading is flagged to stay out of the field model."""
    return bool(EXCLUDING_FLAGS & (set(reading.flags) | set(reading.reading.flags)))


def usable(readings: Sequence[CorrectedReading]) -> list[CorrectedReading]:
    """The field readings that enter the field model, in order."""
    return [r for r in readings if r.reading.kind == "field" and not is_excluded(r)]


def field_inputs(readings: Sequence[CorrectedReading]) -> tuple[np.ndarray, np.ndarray]:
    """Positions (n, 2) in site metres and corrected values (n,) in V/m of the usable readings."""
    kept = usable(readings)
    xy = np.array([(r.reading.x, r.reading.y) for r in kept], dtype=float).reshape(-1, 2)
    values = np.array([r.value_v_per_m for r in kept], dtype=float)
    return xy, values


def field_heights(readings: Sequence[CorrectedReading]) -> np.ndarray:
    """Meter heights (n,) in metres of the usable readings, NaN where a reading has none."""
    kept = usable(readings)
    return np.array([np.nan if r.reading.height_m is None else r.reading.height_m for r in kept], dtype=float)


def distinct_positions(xy: np.ndarray) -> int:
    """Number of distinct positions among (n, 2) coordinates in metres (to :data:`SAME_POSITION_M`)."""
    xy = np.asarray(xy, dtype=float).reshape(-1, 2)
    if xy.shape[0] == 0:
        return 0
    return int(np.unique(np.round(xy / SAME_POSITION_M), axis=0).shape[0])
