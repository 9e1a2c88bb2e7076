"""The stored bases and the compiled-model cache: from a request's ``basis`` to a model.

Stored bases are JSON files, one per basis, in a folder (``service/bases/data`` unless the
``bases_dir`` setting names another). Each file is named ``<id>.json`` and holds::

    {
      "id": "standard-ultimate",
      "title": "...", "description": "...", "source": "...", "version": "...",
      "definition": { "type": "makeham", "A": 0.00022, "B": 2.7e-06, "c": 1.124 }
    }

``definition`` is exactly an inline basis. A table's rates may instead live in CSV files
beside the JSON file, named under ``"rates_files"``; the loader reads them into the
definition, so the definition served by ``GET /v1/bases/{id}`` is always the full inline form:

* ``"rates_files": {"q": "name.csv"}`` for a ``table`` (or ``{"ultimate": ...}`` for the
  ultimate rates of a ``select-table``): columns ``age,q``, one row per whole age, ages
  running up by 1 from ``start_age`` (``ultimate_start_age``);
* ``"rates_files": {"select": "name.csv"}`` for the select rates of a ``select-table``:
  columns ``age,duration_0,duration_1,…,duration_<n−1>``, one row per selection age from
  ``start_age``; ``duration_k`` holds q_[x]+k.

Earlier versions of a stored basis may be kept beside it, in a folder ``<id>.versions/``:
one file per version, each a stored-basis file of the same ``id`` (its rates files in that
folder). They are read, validated and compiled at start-up like the current file, then only
their definitions are kept (no compiled model): ``GET /v1/bases/{id}/versions`` lists them and
``GET /v1/bases/{id}/versions/{fingerprint}`` serves any version, current or earlier, so a quote
made before the file changed can be reproduced by sending that definition inline.

Every file is loaded, validated and compiled at start-up; the first problem stops the start
with a ``BasisFileError`` naming the file and the field.
"""

from __future__ import annotations

import dataclasses
import threading
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path
from typing import Annotated, Any

import msgspec
import pandas as pd
from msgspec import Meta

from service.core.errors import ComputationLimitError, DomainError
from service.core.lifetime import LifetimeModel

from .cache import ModelCache
from .compile import build_model
from .definitions import Basis, BasisDefinition, kind_of
from .fingerprint import fingerprint
from .size import compiled_bytes, estimated_bytes
from .validation import field_error

#: The folder of the bases shipped with the service.
PACKAGED_BASES_DIR = Path(__file__).resolve().parent / "data"

BASIS_ID_PATTERN = r"^[a-z0-9](?:[a-z0-9-]{0,62}[a-z0-9])?$"

BasisId = Annotated[
    str,
    Meta(
        pattern=BASIS_ID_PATTERN,
        description="lower-case letters, digits and dashes, 1 to 64 characters",
    ),
]
Text = Annotated[str, Meta(min_length=1, max_length=4000)]


class StoredBasisFile(msgspec.Struct, frozen=True, forbid_unknown_fields=True, kw_only=True):
    """The content of a stored-basis file once its rates files have been read in."""

    id: BasisId
    title: Text
    description: Text
    source: Text
    version: Annotated[str, Meta(min_length=1, max_length=100)]
    definition: Basis


class BasisFileError(Exception):
    """A stored-basis file that cannot be used; names the file and the field."""

    def __init__(self, file: str, field: str, message: str):
        super().__init__(f"{file}: {field}: {message}" if field else f"{file}: {message}")
        self.file = file
        self.field = field
        self.message = message


class UnknownBasisError(LookupError):
    def __init__(self, basis_id: str):
        super().__init__(basis_id)
        self.basis_id = basis_id


class UnknownBasisVersionError(LookupError):
    def __init__(self, basis_id: str, fingerprint: str):
        super().__init__(basis_id, fingerprint)
        self.basis_id = basis_id
        self.fingerprint = fingerprint


class CatalogueNotReadyError(RuntimeError):
    """The stored bases are not loaded yet."""


@dataclass(frozen=True, slots=True)
class StoredBasis:
    id: str
    title: str
    description: str
    source: str
    version: str
    definition: BasisDefinition
    fingerprint: str
    model: LifetimeModel

    @property
    def type(self) -> str:
        return kind_of(self.definition)


@dataclass(frozen=True, slots=True)
class ResolvedBasis:
    """A request's basis once found: its stored id (None when inline), fingerprint, model."""

    id: str | None
    fingerprint: str
    model: LifetimeModel


# ---- reading files ---------------------------------------------------------------------------

_FILE_DECODER = msgspec.json.Decoder()

#: definition field -> (field giving its first age, expected columns or None for select rows)
_RATE_FIELDS: dict[str, str] = {"q": "start_age", "ultimate": "ultimate_start_age", "select": "start_age"}


def _read_rates_csv(folder: Path, file_name: str, field: str, first_age: Any, where: str):
    """The rates of one CSV file: a list of floats (q, ultimate) or of rows (select)."""

    def fail(message: str) -> BasisFileError:
        return BasisFileError(where, f"$.rates_files.{field}", message)

    if not isinstance(file_name, str) or "/" in file_name or "\\" in file_name:
        raise fail("must be the name of a CSV file in the same folder as the basis file")
    if not isinstance(first_age, int) or isinstance(first_age, bool):
        raise fail(f"the definition must give {_RATE_FIELDS[field]} as a whole number")
    path = folder / file_name
    if not path.is_file():
        raise fail(f"rates file {file_name} not found beside the basis file")
    try:
        frame = pd.read_csv(path, dtype=str, keep_default_na=False, skipinitialspace=True)
    except (ValueError, OSError, UnicodeDecodeError) as exc:
        raise fail(f"{file_name} is not a readable CSV file ({exc})") from None
    columns = [str(c).strip() for c in frame.columns]
    if field == "select":
        n = len(columns) - 1
        expected = ["age"] + [f"duration_{k}" for k in range(max(n, 1))]
    else:
        expected = ["age", "q"]
    if columns != expected:
        raise fail(f"{file_name} must have the columns {','.join(expected)} (got {','.join(columns)})")
    if len(frame) == 0:
        raise fail(f"{file_name} holds no rates")
    rows: list[Any] = []
    for i, record in enumerate(frame.itertuples(index=False, name=None)):
        line = i + 2  # the header is line 1
        try:
            age = int(record[0])
        except ValueError:
            raise fail(f"{file_name} line {line}: age {record[0]!r} is not a whole number") from None
        if age != first_age + i:
            raise fail(
                f"{file_name} line {line}: age {age} where {first_age + i} was expected; ages "
                f"run up by 1 from {_RATE_FIELDS[field]} {first_age}"
            )
        values = []
        for column, text in zip(expected[1:], record[1:]):
            try:
                value = float(text)
            except ValueError:
                raise fail(
                    f"{file_name} line {line}: {column} {text!r} is not a number"
                ) from None
            values.append(value)
        rows.append(values if field == "select" else values[0])
    return rows


def read_basis_file(path: Path, expected_id: str | None = None, where: str | None = None) -> StoredBasisFile:
    """Read and validate one stored-basis file (and its rates files); no compilation.

    Its id must be the file's name, or ``expected_id`` for an earlier version."""
    where = where or path.name
    try:
        raw = _FILE_DECODER.decode(path.read_bytes())
    except msgspec.DecodeError as exc:
        raise BasisFileError(where, "$", f"not valid JSON ({exc})") from None
    except OSError as exc:
        raise BasisFileError(where, "$", f"cannot be read ({exc.strerror})") from None
    if not isinstance(raw, dict):
        raise BasisFileError(where, "$", "must hold a JSON object")
    rates_files = raw.pop("rates_files", None)
    if rates_files is not None:
        definition = raw.get("definition")
        if not isinstance(rates_files, dict) or not rates_files:
            raise BasisFileError(where, "$.rates_files", "must map definition fields to CSV file names")
        if not isinstance(definition, dict):
            raise BasisFileError(where, "$.definition", "must be an object")
        for field, file_name in rates_files.items():
            if field not in _RATE_FIELDS or field not in _allowed_rate_fields(definition):
                allowed = ", ".join(_allowed_rate_fields(definition)) or "none"
                raise BasisFileError(
                    where,
                    f"$.rates_files.{field}",
                    f"no rates file can be given for {field!r} in a basis of type "
                    f"{definition.get('type')!r} (allowed: {allowed})",
                )
            if field in definition:
                raise BasisFileError(
                    where,
                    f"$.definition.{field}",
                    "is given both inline and in rates_files; keep one",
                )
            first_age = definition.get(_RATE_FIELDS[field])
            definition[field] = _read_rates_csv(path.parent, file_name, field, first_age, where)
    try:
        stored = msgspec.convert(raw, StoredBasisFile, strict=True)
    except msgspec.ValidationError as exc:
        field, message = field_error(str(exc))
        raise BasisFileError(where, field, message) from None
    if expected_id is not None:
        if stored.id != expected_id:
            raise BasisFileError(
                where, "$.id",
                f"an earlier version of {expected_id} must have the id {expected_id!r} (got "
                f"{stored.id!r})",
            )
    elif stored.id != path.stem:
        raise BasisFileError(
            where, "$.id", f"the id {stored.id!r} must match the file name ({path.stem}.json)"
        )
    return stored


def _allowed_rate_fields(definition: dict) -> tuple[str, ...]:
    kind = definition.get("type")
    if kind == "table":
        return ("q",)
    if kind == "select-table":
        return ("select", "ultimate")
    return ()


def warm(model):
    """Build everything a basis precomputes on demand (its exact-age expansions), as a stored
    basis is at load: it is always hot, and its answers never depend on its history."""
    if hasattr(model, "exact_ages"):
        model.exact_ages  # noqa: B018
    return model


def compile_stored(stored: StoredBasisFile, where: str, resolve=None, expand=None) -> StoredBasis:
    try:
        model = build_model(stored.definition, resolve)
    except DomainError as exc:
        field = exc.within("definition").field
        raise BasisFileError(where, "$." + field, exc.message) from None
    warm(model)
    return StoredBasis(
        id=stored.id,
        title=stored.title,
        description=stored.description,
        source=stored.source,
        version=stored.version,
        definition=stored.definition,
        fingerprint=fingerprint(stored.definition, expand),
        model=model,
    )


def load_folder(folder: Path) -> list[StoredBasis]:
    """Every stored basis of ``folder``, compiled, sorted by id; raises ``BasisFileError``."""
    if not folder.is_dir():
        raise BasisFileError(str(folder.name or folder), "", "the bases folder does not exist")
    files = {path.stem: (read_basis_file(path), path.name) for path in sorted(folder.glob("*.json"))}
    bases: dict[str, StoredBasis] = {}
    in_progress: list[str] = []

    def compiled(basis_id: str) -> StoredBasis:
        # a stored transform may name other stored bases: compile those first
        if basis_id not in bases:
            stored, where = files[basis_id]
            in_progress.append(basis_id)
            bases[basis_id] = compile_stored(stored, where, nested, definition_of)
            in_progress.pop()
        return bases[basis_id]

    def nested(reference: BasisDefinition | str) -> LifetimeModel:
        if not isinstance(reference, str):
            return build_model(reference, nested)
        if reference not in files:
            raise DomainError("", f"names no stored basis: {reference!r}")
        if reference in in_progress:
            raise DomainError("", f"stored bases name each other in a cycle through {reference!r}")
        return compiled(reference).model

    def definition_of(reference: str) -> BasisDefinition:
        return compiled(reference).definition

    for basis_id in files:  # ids equal file names, so they are unique
        compiled(basis_id)
    return [bases[k] for k in sorted(bases)]


VERSIONS_SUFFIX = ".versions"


def load_versions(folder: Path, current: Iterable[StoredBasis]) -> dict[str, list[StoredBasis]]:
    """The earlier versions kept in ``<id>.versions/`` folders, validated and compiled once
    (then without their model), by basis id, newest version string first; raises
    ``BasisFileError``."""
    by_id = {b.id: b for b in current}

    def nested(reference: BasisDefinition | str) -> LifetimeModel:
        if isinstance(reference, str):
            if reference not in by_id:
                raise DomainError("", f"names no stored basis: {reference!r}")
            return by_id[reference].model
        return build_model(reference, nested)

    found: dict[str, list[StoredBasis]] = {}
    for versions in sorted(folder.glob("*" + VERSIONS_SUFFIX)):
        if not versions.is_dir():
            continue
        basis_id = versions.name[: -len(VERSIONS_SUFFIX)]
        if basis_id not in by_id:
            raise BasisFileError(
                versions.name, "", f"holds versions of {basis_id}, but there is no {basis_id}.json"
            )
        for path in sorted(versions.glob("*.json")):
            where = f"{versions.name}/{path.name}"
            stored = read_basis_file(path, basis_id, where)
            earlier = compile_stored(stored, where, nested, lambda i: by_id[i].definition)
            # only the definition is kept: the model was built to validate the file
            found.setdefault(basis_id, []).append(dataclasses.replace(earlier, model=None))
        found.get(basis_id, []).sort(key=lambda b: b.version, reverse=True)
    return found



# ---- the catalogue ---------------------------------------------------------------------------

#: the default bound on the memory of the compiled inline bases kept (the cache_bytes setting)
DEFAULT_CACHE_BYTES = 128 * 2**20


class Catalogue:
    """The stored bases (always compiled, never evicted) and the cache of inline bases."""

    def __init__(
        self,
        folder: Path | None = None,
        cache_size: int = 256,
        cache_bytes: int = DEFAULT_CACHE_BYTES,
    ):
        self.folder = folder if folder is not None else PACKAGED_BASES_DIR
        self.cache: ModelCache[LifetimeModel] = ModelCache(cache_size, cache_bytes)
        self.cache_bytes = cache_bytes
        self._by_id: dict[str, StoredBasis] = {}
        self._by_fingerprint: dict[str, StoredBasis] = {}
        #: what ``lookup`` answers for each stored id, built once with the catalogue
        self._resolved: dict[str, ResolvedBasis] = {}
        self._earlier: dict[str, list[StoredBasis]] = {}
        self._ready = threading.Event()
        self._load_lock = threading.Lock()

    @property
    def ready(self) -> bool:
        return self._ready.is_set()

    def load(self) -> None:
        """Load and compile every stored basis (once); raises ``BasisFileError``."""
        with self._load_lock:
            if self.ready:
                return
            current = load_folder(self.folder)
            self._earlier = load_versions(self.folder, current)
            self._install(current)

    def _install(self, bases: Iterable[StoredBasis]) -> None:
        by_id = {b.id: b for b in bases}
        self._by_id = by_id
        self._resolved = {b.id: ResolvedBasis(b.id, b.fingerprint, b.model) for b in by_id.values()}
        self._by_fingerprint = {}
        for b in by_id.values():
            self._by_fingerprint.setdefault(b.fingerprint, b)
        self._ready.set()

    def stored(self) -> list[StoredBasis]:
        self._check_ready()
        return list(self._by_id.values())

    def get(self, basis_id: str) -> StoredBasis:
        self._check_ready()
        basis = self._by_id.get(basis_id)
        if basis is None:
            raise UnknownBasisError(basis_id)
        return basis

    def versions(self, basis_id: str) -> list[StoredBasis]:
        """Every version of a stored basis: the current one first, then the earlier ones kept
        beside it (newest first)."""
        return [self.get(basis_id), *self._earlier.get(basis_id, [])]

    def version(self, basis_id: str, fingerprint: str) -> StoredBasis:
        """The version of a stored basis with this fingerprint (the newest, if several)."""
        for basis in self.versions(basis_id):
            if basis.fingerprint == fingerprint:
                return basis
        raise UnknownBasisVersionError(basis_id, fingerprint)

    def _check_ready(self) -> None:
        if not self.ready:
            raise CatalogueNotReadyError("the stored bases are still loading")

    def lookup(self, basis: str | BasisDefinition) -> ResolvedBasis | str:
        """The resolved basis if it needs no compiling; else the inline basis's fingerprint.

        Raises ``UnknownBasisError`` for an unknown stored id.
        """
        if isinstance(basis, str):
            found = self._resolved.get(basis)
            if found is not None:
                return found
            stored = self.get(basis)  # not ready yet (503), or no such stored basis (404)
            return ResolvedBasis(stored.id, stored.fingerprint, stored.model)
        self._check_ready()
        fp = fingerprint(basis, self._definition_of)
        stored = self._by_fingerprint.get(fp)
        if stored is not None:
            self.cache.count_hit()
            return ResolvedBasis(None, fp, stored.model)
        model = self.cache.get(fp)
        if model is not None:
            return ResolvedBasis(None, fp, model)
        return fp

    def compile_inline(self, definition: BasisDefinition, fp: str) -> ResolvedBasis:
        """Compile an inline basis that ``lookup`` did not find, and keep it in the cache.

        Raises the core's ``DomainError`` (field relative to the basis), and a
        ``ComputationLimitError`` when its compiled form alone would pass ``cache_bytes``
        (estimated before compiling, measured after).
        """
        self._check_size(estimated_bytes(definition, self._stored_bytes), "would take")
        model = build_model(definition, self._resolve_nested)
        size = compiled_bytes(model)
        self._check_size(size, "takes")
        self.cache.put(fp, model, size)
        return ResolvedBasis(None, fp, model)

    def _check_size(self, size: int, verb: str) -> None:
        if size > self.cache_bytes:
            raise ComputationLimitError(
                "",
                f"compiled, this basis {verb} about {size / 2**20:,.0f} MiB, more than the "
                f"{self.cache_bytes / 2**20:,.0f} MiB the service keeps for compiled bases "
                f"(the cache_bytes setting); send a smaller table (fewer selection ages or "
                f"fewer rates) or store it with the service",
            )

    def _stored_bytes(self, basis_id: str) -> int:
        try:
            return compiled_bytes(self.get(basis_id).model)
        except UnknownBasisError:
            return 0  # the compile step names the unknown id

    def resolve(self, basis: str | BasisDefinition) -> ResolvedBasis:
        """``lookup`` then, if needed, ``compile_inline``: for callers that may block."""
        found = self.lookup(basis)
        if isinstance(found, ResolvedBasis):
            return found
        assert not isinstance(basis, str)
        return self.compile_inline(basis, found)

    def _definition_of(self, basis_id: str) -> BasisDefinition:
        return self.get(basis_id).definition

    def _resolve_nested(self, basis: str | BasisDefinition) -> LifetimeModel:
        return self.resolve(basis).model
