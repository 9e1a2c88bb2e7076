"""Answers as CSV (``Accept: text/csv``): one header row, then one row per value.

A list of flat records (the stored bases, the versions of one) is one row per record, its
fields as columns (``records_csv``). A calculation is as follows (``results_csv``).

The columns are the life's echo (``age,duration``; for a status of several lives
``age_0,age_1,…,duration_0,duration_1,…``), then, where the answer holds one value per
argument (each ``t`` of /v1/survival, each deferral, order, probability or benefit), that
argument, then the answer's own fields. So ``/v1/survival`` gives one row per life and
duration t: ``age,duration,t,survival,death,force,density``; ``/v1/expectation`` one row per
life. A value that does not exist is an empty cell. Numbers are written in the shortest form
that reads back to the same float, as in JSON.
"""

from __future__ import annotations

import csv
import io
import math
from collections.abc import Sequence
from typing import Any

import msgspec

ECHO_FIELDS = ("age", "duration", "ages", "durations")
CSV_MEDIA_TYPE = "text/csv"  # litestar adds "; charset=utf-8"


def cell(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else ""
    return str(value)


def _echo(result: msgspec.Struct) -> tuple[list[str], list[Any]]:
    ages = getattr(result, "ages", None)
    if ages is not None:
        durations = getattr(result, "durations", None) or [0.0] * len(ages)
        names = [f"age_{i}" for i in range(len(ages))] + [
            f"duration_{i}" for i in range(len(ages))
        ]
        return names, [*ages, *durations]
    return ["age", "duration"], [getattr(result, "age", None), getattr(result, "duration", None)]


def _own_fields(result: msgspec.Struct) -> list[str]:
    return [f for f in result.__struct_fields__ if f not in ECHO_FIELDS]


def _expanded(value: Any) -> tuple[list[str], list[Any]]:
    """A nested answer (one benefit's result, say) as its own columns."""
    if isinstance(value, msgspec.Struct):
        names = list(value.__struct_fields__)
        return names, [getattr(value, n) for n in names]
    return [], [value]


def results_csv(
    results: Sequence[msgspec.Struct],
    along: str | None = None,
    along_values: Sequence[Any] = (),
) -> bytes:
    """The results as CSV; ``along`` names the argument that the list fields follow."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    header: list[str] | None = None
    for result in results:
        echo_names, echo_values = _echo(result)
        fields = _own_fields(result)
        if along is None:
            rows = [(echo_values + [getattr(result, f) for f in fields], fields)]
        else:
            rows = []
            for j, argument in enumerate(along_values):
                names, values = [along], [argument]
                for f in fields:
                    nested_names, nested_values = _expanded(getattr(result, f)[j])
                    names += nested_names or [f]
                    values += nested_values
                rows.append((echo_values + values, names))
        for values, names in rows:
            if header is None:
                header = echo_names + names
                writer.writerow(header)
            writer.writerow([cell(v) for v in values])
    return out.getvalue().encode("utf-8")


def records_csv(records: Sequence[msgspec.Struct]) -> bytes:
    """Flat records (Structs of plain values) as CSV, their fields as columns."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    if records:
        names = list(records[0].__struct_fields__)
        writer.writerow(names)
        for record in records:
            writer.writerow([cell(getattr(record, n)) for n in names])
    return out.getvalue().encode("utf-8")
