"""What became of each reading: one fate per reading, counted per tag.

Rules run in the order of the codes below and the first that applies wins, so
every reading is counted exactly once. ``GOOD`` readings are the ones used.
"""

from __future__ import annotations

GOOD = 0
BAD_TIME = 1          # time stamp unreadable, or naive without a configured time zone
AMBIGUOUS_TIME = 2    # local time in the repeated hour that file order cannot place
NONEXISTENT_TIME = 3  # local time inside the skipped hour (policy dst_missing = "flag")
BAD_QUALITY = 4       # quality code not mapped to good
BAD_VALUE = 5         # value empty or not a number
DUPLICATE = 6         # same tag and time stamp as an earlier reading with the same value
CONFLICT = 7          # same tag and time stamp as another reading with a different value
OUT_OF_RANGE = 8      # outside the tag's valid_range
SPIKE = 9             # rate-of-change spike (one-reading excursion faster than max_rate)
FROZEN = 10           # part of a flat-lined run longer than frozen_after

#: Column names of the per-tag quality summary, by fate code.
FATE_NAMES: dict[int, str] = {
    GOOD: "good",
    BAD_TIME: "bad_timestamp",
    AMBIGUOUS_TIME: "ambiguous_time",
    NONEXISTENT_TIME: "nonexistent_time",
    BAD_QUALITY: "bad_quality_code",
    BAD_VALUE: "bad_value",
    DUPLICATE: "duplicate",
    CONFLICT: "conflicting_duplicate",
    OUT_OF_RANGE: "out_of_range",
    SPIKE: "spike",
    FROZEN: "frozen",
}
N_FATES = len(FATE_NAMES)


def fate_names() -> list[str]:
    """Names of all fates, in rule order.

    >>> fate_names()[:3]
    ['good', 'bad_timestamp', 'ambiguous_time']
    """
    return [FATE_NAMES[i] for i in range(N_FATES)]
