"""Schemathesis hooks for the contract fuzzing run (loaded through SCHEMATHESIS_HOOKS).

Strings generated for ``basis`` and for the ``{basis_id}`` of ``GET /v1/bases/{basis_id}``
are almost never the id of a stored basis, so most cases would stop at a 404 before the
numeric core; and a generated list of lives almost always holds one the basis refuses. These
hooks let the generated value stand in some cases and put the id of a stored basis (with
plain lives, in some cases) in the others, so that fuzzing also reaches the calculations with
real bases.
The ids come from the running service (``GET /v1/bases``) through FUZZ_STORED_IDS.
"""

from __future__ import annotations

import os

import schemathesis
from hypothesis import strategies as st

STORED_IDS = [i for i in os.environ.get("FUZZ_STORED_IDS", "").split(",") if i]


def _replace_id(value):
    if not STORED_IDS:
        return st.just(value)
    return st.one_of(st.just(value), st.sampled_from(STORED_IDS))


#: lives that every stored single-life basis accepts (ages inside every table, no durations)
_PLAIN_LIVES = st.lists(
    st.floats(min_value=20.0, max_value=90.0, allow_nan=False), min_size=1, max_size=3
).map(lambda ages: [{"age": a} for a in ages])


def _plain(body):
    """The generated body on a stored basis with plain lives: the schema lets a life name
    both forms (``age`` or ``ages``, durations of any size), so a generated list of several
    lives almost always holds one the basis refuses, and the whole request is a 422 before
    the numeric core. The other fields stay as generated."""
    return st.tuples(st.sampled_from(STORED_IDS), _PLAIN_LIVES).map(
        lambda pair: {**body, "basis": pair[0], "lives": pair[1]}
    )


@schemathesis.hook
def flatmap_body(context, body):
    if not isinstance(body, dict):
        return st.just(body)
    variants = [st.just(body)]
    if STORED_IDS and "lives" in body and "basis" in body:
        variants.append(_plain(body))
    if isinstance(body.get("basis"), str):
        variants.append(_replace_id(body["basis"]).map(lambda basis: {**body, "basis": basis}))
    return st.one_of(*variants)


@schemathesis.hook
def flatmap_path_parameters(context, path_parameters):
    if isinstance(path_parameters, dict) and "basis_id" in path_parameters:
        return _replace_id(path_parameters["basis_id"]).map(
            lambda basis_id: {**path_parameters, "basis_id": basis_id}
        )
    return st.just(path_parameters)
