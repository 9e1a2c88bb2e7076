"""Ages and durations from dates (service/ages.py), against hand-computed calendar cases and
Python's datetime.

The calendar rule is the Gregorian one (a published calendar rule): a year is leap when it is
divisible by 4, except centuries, which are leap only when divisible by 400 (1900 is not,
2000 is). A 29 February birthday falls on 28 February in a common year: a convention of the
trade (common practice), the one the service documents."""

from __future__ import annotations

from datetime import date, timedelta

import numpy as np
import pytest

from service.ages import day_number, years_between
from service.selection import AGE_CONVENTIONS


def age(born: str, on: str, convention: str = "exact") -> float:
    start = np.array([day_number(date.fromisoformat(born))], dtype=np.int64)
    return float(years_between(start, day_number(date.fromisoformat(on)), convention)[0])


ALL = ("exact", "last-birthday", "nearest-birthday", "next-birthday")


@pytest.mark.parametrize(
    "born,on,expected",
    [
        # a birthday on the calculation date: whole, 44 completed years (hand computation)
        ("1980-06-15", "2024-06-15", (44.0, 44, 44, 45)),
        # the day before a birthday: 43 completed; last birthday 2023-06-15, next 2024-06-15,
        # 366 days apart (29 February 2024 between), 365 of them passed (hand computation)
        ("1980-06-15", "2024-06-14", (43 + 365 / 366, 43, 44, 44)),
        # the day after a birthday in a common span: 2024-06-15 to 2025-06-15 is 365 days
        ("1980-06-15", "2024-06-16", (44 + 1 / 365, 44, 44, 45)),
        # a leap day as calculation date: last birthday 2023-03-01, next 2024-03-01 (366
        # days), 365 passed (hand computation)
        ("1990-03-01", "2024-02-29", (33 + 365 / 366, 33, 34, 34)),
        # born 29 February, common year: the birthday falls on 28 February 2023, so on that
        # day the age is whole (the trade's convention, common practice)
        ("2000-02-29", "2023-02-28", (23.0, 23, 23, 24)),
        # ... and the day before it: last 2022-02-28, next 2023-02-28, 365 days, 364 passed
        ("2000-02-29", "2023-02-27", (22 + 364 / 365, 22, 23, 23)),
        # ... and 1 March of the common year: last 2023-02-28, next 2024-02-29 (366 days)
        ("2000-02-29", "2023-03-01", (23 + 1 / 366, 23, 23, 24)),
        # born 29 February, leap year: the birthday is 29 February 2024 itself
        ("2000-02-29", "2024-02-29", (24.0, 24, 24, 25)),
        # ... and the day before: last 2023-02-28, next 2024-02-29, 366 days, 365 passed
        ("2000-02-29", "2024-02-28", (23 + 365 / 366, 23, 24, 24)),
        # 1900 is not a leap year (Gregorian century rule): the birthday of one born
        # 29 February 1896 falls on 28 February 1900
        ("1896-02-29", "1900-02-28", (4.0, 4, 4, 5)),
        # 2000 is (divisible by 400): 28 February 2000 is the day before the birthday;
        # last 1999-02-28, next 2000-02-29, 366 days, 365 passed
        ("1996-02-29", "2000-02-28", (3 + 365 / 366, 3, 4, 4)),
        # born on the calculation date: age 0 (hand computation)
        ("2024-10-17", "2024-10-17", (0.0, 0, 0, 1)),
    ],
)
def test_hand_computed_ages(born, on, expected):
    for convention, value in zip(ALL, expected):
        assert age(born, on, convention) == pytest.approx(value, rel=1e-15, abs=0), convention


@pytest.mark.parametrize(
    "on,expected",
    [
        # born 1 January: 2023-01-01 to 2024-01-01 is 365 days, half is 182.5
        # 182 days passed (2023-07-02): 2 × 182 = 364 < 365, not yet half: 43
        ("2023-07-02", 43),
        # 183 days passed (2023-07-03): 366 ≥ 365: 44
        ("2023-07-03", 44),
        # 2024-01-01 to 2025-01-01 is 366 days, half is 183
        # 182 days passed (2024-07-01): 364 < 366: 44
        ("2024-07-01", 44),
        # exactly half, 183 days (2024-07-02): 366 ≥ 366, rounds up: 45
        ("2024-07-02", 45),
    ],
)
def test_the_half_year_boundary_of_nearest_birthday(on, expected):
    # hand computation of the day counts (January 31, February 28 or 29, March 31, April 30,
    # May 31, June 30)
    assert age("1980-01-01", on, "nearest-birthday") == expected
    # the completed years do not move on either side (43 in 2023, 44 in 2024)
    assert age("1980-01-01", on, "last-birthday") == int(on[:4]) - 1980


def test_an_exact_age_agrees_with_python_s_datetime():
    # the reference: Python's datetime, the last and next birthdays built with date.replace
    born, on = date(1979, 4, 17), date(2024, 10, 17)
    last, following = born.replace(year=2024), born.replace(year=2025)
    reference = 45 + (on - last).days / (following - last).days
    assert age("1979-04-17", "2024-10-17") == pytest.approx(reference, rel=1e-15)
    assert reference == pytest.approx(45 + 183 / 365, rel=1e-15)  # hand computation beside it


def test_many_dates_at_once_agree_with_python_s_datetime():
    # every day of 1996 to 2004 as a date of birth, valued on 2024-02-29 and 2023-02-28, each
    # against Python's datetime with the 28 February rule written out here
    born = [date(1996, 1, 1) + timedelta(days=k) for k in range(9 * 366)]
    start = np.array([day_number(d) for d in born], dtype=np.int64)
    for on in (date(2024, 2, 29), date(2023, 2, 28), date(2024, 12, 31)):
        got = years_between(start, day_number(on), "exact")

        def anniversary(d: date, year: int) -> date:
            if (d.month, d.day) == (2, 29) and not (year % 4 == 0 and (year % 100 or year % 400 == 0)):
                return date(year, 2, 28)
            return d.replace(year=year)

        expected = []
        for d in born:
            k = on.year - d.year - (anniversary(d, on.year) > on)
            last, following = anniversary(d, d.year + k), anniversary(d, d.year + k + 1)
            expected.append(k + (on - last).days / (following - last).days)
        np.testing.assert_allclose(got, expected, rtol=1e-15, atol=0)
        assert np.all(np.diff(got) <= 0)  # a later birth is never older


def test_conventions_are_the_documented_ones():
    assert tuple(AGE_CONVENTIONS) == ALL
    with pytest.raises(ValueError):
        years_between(np.array([0]), 0, "age-at-entry")
