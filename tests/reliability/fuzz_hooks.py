"""Schemathesis hooks for the contract fuzzing run (loaded through SCHEMATHESIS_HOOKS).

Strings generated for ``basis`` and for the ``{basis_id}`` of ``GET /v1/bases/{basis_id}``
are almost never the id of a stored basis, so most cases would stop at a 404 before the
numeric core. These hooks let the generated value stand in some cases and put the id of a
stored basis in the others, so that fuzzing also reaches the calculations with real bases.
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


@schemathesis.hook
def flatmap_body(context, body):
    if isinstance(body, dict) and isinstance(body.get("basis"), str):
        return _replace_id(body["basis"]).map(lambda basis: {**body, "basis": basis})
    return st.just(body)


@schemathesis.hook
def flatmap_path_parameters(context, path_parameters):
    if isinstance(path_parameters, dict) and "basis_id" in path_parameters:
        return _replace_id(path_parameters["basis_id"]).map(
            lambda basis_id: {**path_parameters, "basis_id": basis_id}
        )
    return st.just(path_parameters)
