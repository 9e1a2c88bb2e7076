"""Lives of a request as arrays, for single-life bases and for statuses of several lives.

A single-life basis takes ``age`` (and ``duration``); a joint-life or last-survivor basis of m
members takes ``ages`` (m values) and optional ``durations`` (m values, default 0) instead.
Giving the wrong one, both, or the wrong number of ages is a 422 naming the field.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

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
