"""Ages and durations counted from dates, vectorised (numpy only; no litestar).

Dates are day numbers: days since 1970-01-01 (``day_numbers``). The anniversary of a date in
a year is the same month and day, except that 29 February falls on 28 February in a common
year (a convention of the trade, common practice). Completed years from a start date to an
end date are the anniversaries passed, the end date included; the conventions of
``service.selection.AGE_CONVENTIONS`` turn them into an age:

- ``exact``: completed years + (end − last anniversary) / (next anniversary − last), in actual
  days, so the age is whole on an anniversary and in [x, x + 1) between;
- ``last-birthday``: completed years; ``next-birthday``: completed years + 1;
- ``nearest-birthday``: completed years, + 1 when 2 × (end − last) ≥ (next − last), that is
  when at least half of the days between the anniversaries have passed (exactly half rounds up).
"""

from __future__ import annotations

from collections.abc import Sequence
from datetime import date

import numpy as np

from service.selection import AGE_CONVENTIONS

_EPOCH = date(1970, 1, 1).toordinal()


#: the day number that stands for a date not given
NO_DATE = np.iinfo(np.int64).min


def day_number(day: date) -> int:
    """Days since 1970-01-01."""
    return day.toordinal() - _EPOCH


def day_numbers(days: Sequence[date | None]) -> np.ndarray:
    """Days since 1970-01-01 of each date, ``NO_DATE`` for None, as int64."""
    days = list(days)
    if days.count(None) == len(days):
        return np.full(len(days), NO_DATE)
    return np.array([NO_DATE if d is None else d.toordinal() - _EPOCH for d in days],
                    dtype=np.int64)


def _anniversaries(year: np.ndarray, month: np.ndarray, day: np.ndarray) -> np.ndarray:
    """Day numbers of (year, month, day), 29 February on 28 February in common years."""
    leap = (year % 4 == 0) & ((year % 100 != 0) | (year % 400 == 0))
    day = np.where((month == 2) & (day == 29) & ~leap, 28, day)
    months = ((year - 1970) * 12 + month - 1).astype("datetime64[M]")
    return months.astype("datetime64[D]").astype(np.int64) + day - 1


def years_between(start: np.ndarray, end: int, convention: str) -> np.ndarray:
    """The age (or duration) on ``end`` of each ``start`` (day numbers, start ≤ end) by
    ``convention``, as float64."""
    if convention not in AGE_CONVENTIONS:
        raise ValueError(f"unknown age convention {convention!r}")
    start = np.asarray(start, dtype=np.int64)
    days = start.astype("datetime64[D]")
    first_month = days.astype("datetime64[M]")
    year = days.astype("datetime64[Y]").astype(np.int64) + 1970
    month = first_month.astype(np.int64) % 12 + 1
    day = start - first_month.astype("datetime64[D]").astype(np.int64) + 1
    end_year = int(np.datetime64(end, "D").astype("datetime64[Y]").astype(np.int64)) + 1970
    completed = end_year - year
    last = _anniversaries(year + completed, month, day)
    ahead = last > end
    completed = completed - ahead
    last = np.where(ahead, _anniversaries(year + completed, month, day), last)
    if convention == "last-birthday":
        return completed.astype(float)
    if convention == "next-birthday":
        return completed + 1.0
    following = _anniversaries(year + completed + 1, month, day)
    passed, between = end - last, following - last
    if convention == "nearest-birthday":
        return completed + (2 * passed >= between).astype(float)
    return completed + passed / between
