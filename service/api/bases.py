"""Reading bases: GET /v1/bases, GET /v1/bases/{id} and GET /v1/laws."""

from __future__ import annotations

import hashlib
from typing import Any

import msgspec
from litestar import Request, Response, get
from litestar.params import FromPath

from service.bases.catalogue import Catalogue, StoredBasis
from service.bases.definitions import BASIS_KINDS, CROSS_FIELD_RULES, kind_of

from . import schemas as s
from .calculations import _error_response
from .conventions import chosen_media_type
from .tabular import CSV_MEDIA_TYPE, records_csv

BASES_TAG = "bases"


def _detail(basis: StoredBasis) -> s.StoredBasisDetail:
    return s.StoredBasisDetail(
        id=basis.id,
        title=basis.title,
        type=basis.type,
        description=basis.description,
        source=basis.source,
        version=basis.version,
        fingerprint=basis.fingerprint,
        definition=basis.definition,  # type: ignore[arg-type]
    )


def _body_and_etag(basis: StoredBasis) -> tuple[bytes, str]:
    """The JSON body of one stored basis and its ETag: the SHA-256 of that body, so the tag
    changes when anything the answer carries changes (a title, a description, a version), not
    only the definition."""
    body = _ENCODE(_detail(basis))
    return body, '"sha256:' + hashlib.sha256(body).hexdigest() + '"'


_ENCODE = msgspec.json.Encoder().encode


def _conditional(request: Request[Any, Any, Any], basis: StoredBasis) -> Response[bytes]:
    """The basis as JSON, or 304 when If-None-Match names its ETag."""
    body, etag = _body_and_etag(basis)
    headers = {"ETag": etag, "Cache-Control": "no-cache"}
    if etag_matches(request.headers.get("if-none-match"), etag.strip('"')):
        return Response(content=b"", status_code=304, headers=headers)
    return Response(content=body, media_type="application/json", headers=headers)


def _listing(request: Request[Any, Any, Any], answer: Any, field: str) -> Any:
    """A list answer as JSON, or its records as CSV when the request asked for it."""
    if chosen_media_type(request) == CSV_MEDIA_TYPE:
        return Response(records_csv(getattr(answer, field)), media_type=CSV_MEDIA_TYPE)
    return answer


def etag_matches(if_none_match: str | None, etag: str) -> bool:
    """Whether an If-None-Match header matches ``etag`` (weak comparison, RFC 9110)."""
    if not if_none_match:
        return False
    for candidate in if_none_match.split(","):
        candidate = candidate.strip()
        if candidate == "*":
            return True
        if candidate.startswith("W/"):
            candidate = candidate[2:]
        if candidate.strip('"') == etag:
            return True
    return False


# ---- GET /v1/laws: described from the Structs themselves -------------------------------------


def _number_domain(info: Any, whole: bool) -> str:
    parts = []
    if getattr(info, "gt", None) is not None:
        parts.append(f"> {info.gt:g}")
    if getattr(info, "ge", None) is not None:
        parts.append(f"≥ {info.ge:g}")
    if getattr(info, "lt", None) is not None:
        parts.append(f"< {info.lt:g}")
    if getattr(info, "le", None) is not None:
        parts.append(f"≤ {info.le:g}")
    noun = "whole number" if whole else "number"
    return f"{noun} {' and '.join(parts)}" if parts else f"any {noun}"


def _unwrap(info: msgspec.inspect.Type) -> tuple[msgspec.inspect.Type, str]:
    """The type under any metadata, and the metadata's description."""
    description = ""
    while isinstance(info, msgspec.inspect.Metadata):
        extra = info.extra_json_schema or {}
        description = description or str(extra.get("description", ""))
        info = info.type
    return info, description


def domain_text(info: msgspec.inspect.Type) -> str:
    """The values a field allows, in words, from its msgspec type information."""
    if isinstance(info, msgspec.inspect.FloatType):
        return _number_domain(info, whole=False)
    if isinstance(info, msgspec.inspect.IntType):
        return _number_domain(info, whole=True)
    if isinstance(info, msgspec.inspect.LiteralType):
        return "one of " + ", ".join(str(v) for v in info.values)
    if isinstance(info, msgspec.inspect.UnionType):
        words = []
        for member in info.types:
            inner = _unwrap(member)[0]
            if isinstance(inner, msgspec.inspect.NoneType):
                continue
            if isinstance(inner, msgspec.inspect.StrType):
                words.append("the id of a stored basis")
            elif isinstance(inner, msgspec.inspect.StructType):
                tag = inner.cls.__struct_config__.tag
                words.append("an inline basis" if tag else f"an object ({inner.cls.__name__})")
            else:
                words.append(domain_text(inner))
        words = list(dict.fromkeys(words))
        optional = any(isinstance(m, msgspec.inspect.NoneType) for m in info.types)
        return " or ".join(words) + ("; optional" if optional else "")
    if isinstance(info, msgspec.inspect.StructType):
        return f"an object ({info.cls.__name__})"
    if isinstance(info, msgspec.inspect.ListType):
        low = info.min_length or 0
        high = info.max_length
        count = f"{low} to {high}" if high is not None else f"at least {low}"
        return f"list of {count} items, each {domain_text(_unwrap(info.item_type)[0])}"
    return str(type(info).__name__)


def describe_laws() -> s.LawsResponse:
    laws = []
    for kind in BASIS_KINDS:
        info = msgspec.inspect.type_info(kind)
        assert isinstance(info, msgspec.inspect.StructType)
        parameters = []
        for field in info.fields:
            field_type, description = _unwrap(field.type)
            if not description and isinstance(field_type, msgspec.inspect.UnionType):
                for member in field_type.types:
                    description = description or _unwrap(member)[1]
            if not description and isinstance(field_type, msgspec.inspect.StructType):
                description = (field_type.cls.__doc__ or "").strip().splitlines()[0]
            if not description and isinstance(field_type, msgspec.inspect.UnionType):
                for member in field_type.types:
                    inner = _unwrap(member)[0]
                    if isinstance(inner, msgspec.inspect.StructType) and not inner.cls.__struct_config__.tag:
                        description = (inner.cls.__doc__ or "").strip().splitlines()[0]
            parameters.append(
                s.LawParameter(
                    name=field.encode_name,
                    domain=domain_text(field_type),
                    description=description,
                )
            )
        tag = kind.__struct_config__.tag
        laws.append(
            s.LawDescription(
                type=str(tag),
                definition=(kind.__doc__ or "").strip().splitlines()[0],
                parameters=parameters,
                rules=list(CROSS_FIELD_RULES.get(str(tag), ())),
            )
        )
    return s.LawsResponse(laws=laws)


def bases_handlers(catalogue: Catalogue) -> list[Any]:
    laws_answer = describe_laws()
    common: dict[str, Any] = {"sync_to_thread": False, "tags": [BASES_TAG]}
    listing: dict[str, Any] = {**common, "opt": {"produces": ["application/json", CSV_MEDIA_TYPE]}}

    @get("/v1/bases", operation_id="listBases", summary="The stored bases", **listing)
    def list_bases(request: Request[Any, Any, Any]) -> s.StoredBasesResponse:
        """Every stored basis with its id, title, type, source and fingerprint (one row each
        with Accept: text/csv)."""
        return _listing(request, s.StoredBasesResponse(
            bases=[
                s.StoredBasisSummary(
                    id=b.id,
                    title=b.title,
                    type=kind_of(b.definition),
                    source=b.source,
                    fingerprint=b.fingerprint,
                )
                for b in catalogue.stored()
            ]
        ), "bases")

    @get(
        "/v1/bases/{basis_id:str}",
        operation_id="getBasis",
        summary="One stored basis, with its definition in the inline form",
        responses={
            404: _error_response("No stored basis has this id."),
        },
        **common,
    )
    def get_basis(
        request: Request[Any, Any, Any], basis_id: FromPath[str]
    ) -> Response[s.StoredBasisDetail]:
        """The basis's metadata and its definition, exactly as it can be sent inline.

        The ETag is the SHA-256 of the answer's body (it changes when anything in the answer
        changes); a request with a matching If-None-Match gets 304.
        """
        return _conditional(request, catalogue.get(basis_id))

    @get(
        "/v1/bases/{basis_id:str}/versions",
        operation_id="listBasisVersions",
        summary="Every version of a stored basis: the current one and those kept beside it",
        responses={404: _error_response("No stored basis has this id.")},
        **listing,
    )
    def list_versions(
        request: Request[Any, Any, Any], basis_id: FromPath[str]
    ) -> s.BasisVersionsResponse:
        """The current version first, then earlier ones (newest first), each with its
        fingerprint: fetch one with GET /v1/bases/{id}/versions/{fingerprint}. One row each
        with Accept: text/csv."""
        versions = catalogue.versions(basis_id)
        return _listing(request, s.BasisVersionsResponse(
            id=basis_id,
            versions=[
                s.BasisVersion(version=b.version, title=b.title, fingerprint=b.fingerprint,
                               current=i == 0)
                for i, b in enumerate(versions)
            ],
        ), "versions")

    @get(
        "/v1/bases/{basis_id:str}/versions/{fingerprint:str}",
        operation_id="getBasisVersion",
        summary="One version of a stored basis, by its fingerprint",
        responses={
            404: _error_response("No stored basis has this id, or none of its versions this "
                                 "fingerprint."),
        },
        **common,
    )
    def get_version(
        request: Request[Any, Any, Any], basis_id: FromPath[str], fingerprint: FromPath[str]
    ) -> Response[s.StoredBasisDetail]:
        """The version of the basis whose definition had this fingerprint (as an answer's
        `basis.fingerprint` records it), in the same form as GET /v1/bases/{id}: send its
        definition inline to reproduce an answer made on it."""
        return _conditional(request, catalogue.version(basis_id, fingerprint))

    @get("/v1/laws", operation_id="listLaws", summary="The inline basis types and their parameters", **common)
    def laws() -> s.LawsResponse:
        """Each inline `type` with its parameters, their domains and a one-line definition."""
        return laws_answer

    return [list_bases, get_basis, list_versions, get_version, laws]
