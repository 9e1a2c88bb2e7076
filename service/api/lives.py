"""Lives of a request as arrays, for single-life bases and for statuses of several lives.

A single-life basis takes ``age`` (and ``duration``); a joint-life or last-survivor basis of m
members takes ``ages`` (m values) and optional ``durations`` (m values, default 0) instead.
Giving the wrong one, both, or the wrong number of ages is a 422 naming the field.

Any of them may be given by date instead (``date_of_birth``, ``date_of_entry``,
``dates_of_birth``, ``dates_of_entry``): ``dated_lives`` replaces the dates by the ages and
durations they give on the request's ``calculation_date`` (``service.ages``) before the checks.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from datetime import date
from operator import attrgetter
from typing import Any

import msgspec
import numpy as np

from service.ages import NO_DATE, day_number, day_numbers, years_between

from .problems import bad_field


def several_lives(lives: Sequence[Any], members: int) -> tuple[np.ndarray, np.ndarray]:
    """(N, m) ages and durations for a status of ``members`` lives; for a single-life basis
    (``members`` 1) this only runs to report a life given by ``ages``."""
    n = len(lives)
    if members == 1:
        for i, life in enumerate(lives):
            if life.ages is not None or life.durations is not None:
                name = "ages" if life.ages is not None else "durations"
                raise bad_field(
                    f"$.lives[{i}].{name}",
                    f"this basis is of a single life: give age (and duration), not {name}",
                )
            if life.age is None:
                raise bad_field(f"$.lives[{i}].age", "required field is missing")
        age1 = np.array([life.age for life in lives], dtype=float)
        return age1, np.array([life.duration for life in lives], dtype=float)
    age = np.empty((n, members))
    duration = np.zeros((n, members))
    for i, life in enumerate(lives):
        if life.age is not None:
            raise bad_field(
                f"$.lives[{i}].age",
                f"this basis is a status of {members} lives: give ages (one per member), "
                f"not age",
            )
        if life.duration != 0.0:
            raise bad_field(
                f"$.lives[{i}].duration",
                "this basis is a status of several lives: give durations (one per member), "
                "not duration",
            )
        if life.ages is None:
            raise bad_field(
                f"$.lives[{i}].ages",
                f"required field is missing: ages, one age for each of the {members} members",
            )
        if len(life.ages) != members:
            raise bad_field(
                f"$.lives[{i}].ages",
                f"must hold {members} ages, one per member of the basis (got {len(life.ages)})",
            )
        age[i] = life.ages
        if life.durations is not None:
            if len(life.durations) != members:
                raise bad_field(
                    f"$.lives[{i}].durations",
                    f"must hold {members} durations, one per member (got "
                    f"{len(life.durations)})",
                )
            duration[i] = life.durations
    return age, duration


#: (field of one life, field of a status's members, the numeric field it stands for)
_DATE_FIELDS = (("date_of_birth", "dates_of_birth", "age", "ages"),
                ("date_of_entry", "dates_of_entry", "duration", "durations"))
#: the fields only a status of several lives takes
_STATUS_FIELDS = ("ages", "durations", "dates_of_birth", "dates_of_entry")
_DATE_NAMES = tuple(name for pair in _DATE_FIELDS for name in pair[:2])


def gives_any(lives: Sequence[Any], names: Sequence[str] = _DATE_NAMES) -> bool:
    """Whether any of the lives gives any of these fields (by default, any date)."""
    if len(lives) == 1:  # the common single life: its fields read directly
        life = lives[0]
        return any(getattr(life, name) is not None for name in names)
    return any(list(map(attrgetter(name), lives)).count(None) != len(lives) for name in names)


def dated_lives(lives: Sequence[Any], members: int, when: date | None,
                convention: str) -> tuple[np.ndarray, np.ndarray] | list:
    """The lives with every date counted to ``when`` by ``convention``, each date checked
    first (a 422 naming it): the (age, duration) arrays for lives of a single-life basis that
    give no status's fields (vectorised), or else the lives with their dates replaced by the
    numbers they give, for the checks of ``several_lives``."""
    if members == 1 and not gives_any(lives, _STATUS_FIELDS):
        return _single_dated(lives, when, convention)
    shape = (len(lives), members)
    birth, entry = np.full(shape, NO_DATE), np.full(shape, NO_DATE)
    for i, life in enumerate(lives):
        for (one, several, number, numbers), days in zip(_DATE_FIELDS, (birth, entry)):
            _collect(days, i, life, members, one, several, number, numbers)

    def field(k: int, name: str) -> str:
        i, j = divmod(k, members)
        return f"$.lives[{i}].dates_of_{name}[{j}]" if members > 1 else f"$.lives[{i}].date_of_{name}"

    counted = count_dates(birth, entry, when, convention, field)
    out = list(lives)
    for i, life in enumerate(lives):
        fields: dict[str, Any] = {}
        for (one, several, number, numbers), values in zip(_DATE_FIELDS, counted):
            if getattr(life, one) is not None:
                fields[number], fields[one] = float(values[i, 0]), None
            elif getattr(life, several) is not None:
                fields[numbers], fields[several] = values[i].tolist(), None
        if fields:
            out[i] = msgspec.structs.replace(life, **fields)
    return out


def _single_dated(lives: Sequence[Any], when: date | None,
                  convention: str) -> tuple[np.ndarray, np.ndarray]:
    """The ages and durations of lives of a single-life basis, by number or by date."""
    given = np.array([np.nan if life.age is None else life.age for life in lives])
    duration = np.array([life.duration for life in lives], dtype=float)
    birth = day_numbers([life.date_of_birth for life in lives])
    entry = day_numbers([life.date_of_entry for life in lives])
    by_age, by_birth, by_entry = ~np.isnan(given), birth != NO_DATE, entry != NO_DATE
    for bad, name, message in (
        (by_age & by_birth, "date_of_birth", "give age or date_of_birth, not both"),
        (~by_age & ~by_birth, "age", "required field is missing: age or date_of_birth"),
        ((duration != 0.0) & by_entry, "date_of_entry",
         "give duration or date_of_entry, not both"),
    ):
        if bad.any():
            raise bad_field(f"$.lives[{int(np.argmax(bad))}].{name}", message)
    age_of, duration_of = count_dates(birth, entry, when, convention,
                                      lambda k, name: f"$.lives[{k}].date_of_{name}")
    return np.where(by_age, given, age_of), np.where(by_entry, duration_of, duration)


def count_dates(birth: np.ndarray, entry: np.ndarray, when: date | None, convention: str,
                field: Callable[[int, str], str]) -> tuple[np.ndarray, np.ndarray]:
    """The ages and durations (NaN where no date) that the day numbers ``birth`` and
    ``entry`` (``NO_DATE`` where not given) give on ``when``; a 422 naming ``field(k, "birth"
    or "entry")`` (k the flat index) for dates without ``when``, a date after it, or an entry
    before the birth."""
    given_birth, given_entry = birth != NO_DATE, entry != NO_DATE
    if when is None:
        dated = (given_birth | given_entry).ravel()
        if dated.any():
            k = int(np.argmax(dated))
            name = "birth" if given_birth.ravel()[k] else "entry"
            raise bad_field("$.calculation_date",
                            f"required when a life gives a date (as {field(k, name)} does)")
    today = day_number(when) if when is not None else 0
    for days, name in ((birth, "birth"), (entry, "entry")):
        late = (days > today).ravel()
        if late.any():
            raise bad_field(field(int(np.argmax(late)), name),
                            f"is after calculation_date {when}: the date must be at or before it")
    early = (given_birth & given_entry & (entry < birth)).ravel()
    if early.any():
        raise bad_field(field(int(np.argmax(early)), "entry"), "is before the date of birth")
    out = []
    for days, given in ((birth, given_birth), (entry, given_entry)):
        values = np.full(days.shape, np.nan)
        values[given] = years_between(days[given], today, convention)
        out.append(values)
    return out[0], out[1]


def _collect(into: np.ndarray, i: int, life: Any, members: int, one: str, several: str,
             number: str, numbers: str) -> None:
    """Write into row i of ``into`` the day numbers of the date(s) ``life`` gives in place of
    ``number`` (or, for a status, ``numbers``): a 422 when it gives both, or the wrong kind
    or count."""
    single, plural = getattr(life, one), getattr(life, several)
    where = f"$.lives[{i}]"
    if single is not None and plural is not None:
        raise bad_field(f"{where}.{several}", f"give {one} (one life) or {several} (a status "
                        f"of several lives), not both")
    if single is not None:
        if members > 1:
            raise bad_field(f"{where}.{one}", f"this basis is a status of {members} lives: "
                            f"give {several} (one per member), not {one}")
        given = getattr(life, number)
        if given is not None and (number == "age" or given != 0.0):
            raise bad_field(f"{where}.{one}", f"give {number} or {one}, not both")
        into[i, 0] = day_number(single)
    elif plural is not None:
        if members == 1:
            raise bad_field(f"{where}.{several}", f"this basis is of a single life: give {one} "
                            f"(or {number}), not {several}")
        if getattr(life, numbers) is not None:
            raise bad_field(f"{where}.{several}", f"give {numbers} or {several}, not both")
        if len(plural) != members:
            raise bad_field(f"{where}.{several}", f"must hold {members} dates, one per member "
                            f"of the basis (got {len(plural)})")
        into[i] = day_numbers(plural)
