"""Stored-basis files, rates files, start-up errors, the model cache, the invented data."""

from __future__ import annotations

import json
import threading
from pathlib import Path

import pytest

from service.bases import definitions as d
from service.bases.cache import ModelCache
from service.bases.catalogue import (
    PACKAGED_BASES_DIR,
    BasisFileError,
    Catalogue,
    ResolvedBasis,
    UnknownBasisError,
    load_folder,
)
from service.bases.compile import build_model, registered_kinds
from service.bases.fingerprint import canonical_json, fingerprint
from service.bases.make_invented_bases import invented_files
from service.core.errors import DomainError

GOOD = {
    "id": "my-law",
    "title": "A law",
    "description": "For a test.",
    "source": "Made up for a test.",
    "version": "1",
    "definition": {"type": "gompertz", "B": 0.0001, "c": 1.1},
}


def write_basis(folder: Path, document: dict, name: str | None = None) -> Path:
    path = folder / (name or f"{document['id']}.json")
    path.write_text(json.dumps(document), encoding="utf-8")
    return path


def test_shipped_bases_load():
    bases = load_folder(PACKAGED_BASES_DIR)
    assert [b.id for b in bases] == sorted(b.id for b in bases)
    sult = next(b for b in bases if b.id == "standard-ultimate")
    assert sult.definition == d.Makeham(A=0.00022, B=2.7e-6, c=1.124)


def test_invented_files_equal_their_generator():
    for name, text in invented_files().items():
        assert (PACKAGED_BASES_DIR / name).read_text(encoding="utf-8") == text, name


def test_table_rates_from_csv(tmp_path):
    (tmp_path / "rates.csv").write_text("age,q\n50,0.1\n51,0.25\n52,1\n")
    document = {**GOOD, "id": "my-table", "rates_files": {"q": "rates.csv"},
                "definition": {"type": "table", "start_age": 50, "fractional_ages": "udd"}}
    write_basis(tmp_path, document)
    (basis,) = load_folder(tmp_path)
    assert basis.definition == d.Table(start_age=50, q=[0.1, 0.25, 1.0], fractional_ages="udd")
    assert basis.fingerprint == fingerprint(basis.definition)


def test_select_rates_from_csv(tmp_path):
    (tmp_path / "select.csv").write_text("age,duration_0,duration_1\n30,0.01,0.02\n31,0.011,0.021\n")
    (tmp_path / "ultimate.csv").write_text("age,q\n32,0.03\n33,0.04\n34,1\n")
    document = {**GOOD, "id": "my-select",
                "rates_files": {"select": "select.csv", "ultimate": "ultimate.csv"},
                "definition": {"type": "select-table", "start_age": 30,
                               "ultimate_start_age": 32, "fractional_ages": "udd"}}
    write_basis(tmp_path, document)
    (basis,) = load_folder(tmp_path)
    assert basis.definition.select == [[0.01, 0.02], [0.011, 0.021]]
    assert basis.definition.ultimate == [0.03, 0.04, 1.0]


@pytest.mark.parametrize(
    ("change", "field", "words"),
    [
        ({"definition": {"type": "gompertz", "B": 0.0001, "c": 0.9}}, "$.definition.c", "greater than 1"),
        ({"definition": {"type": "makeham", "A": -1, "B": 0.0001, "c": 1.1}}, "$.definition.A", "−B"),
        ({"definition": {"type": "gompertz", "B": 0.0001}}, "$.definition.c", "missing"),
        ({"title": ""}, "$.title", "at least 1 character"),
        ({"colour": "red"}, "$.colour", "unknown field"),
        ({"id": "other-name"}, "$.id", "file name"),
        ({"definition": {"type": "table", "start_age": 0, "q": [0.5, 0.5], "fractional_ages": "udd"}},
         "$.definition.q", "close"),
    ],
)
def test_bad_file_names_file_and_field(tmp_path, change, field, words):
    write_basis(tmp_path, {**GOOD, **change}, name="my-law.json")
    with pytest.raises(BasisFileError) as caught:
        load_folder(tmp_path)
    error = caught.value
    assert error.file == "my-law.json"
    assert error.field == field, str(error)
    assert words in error.message
    assert str(error).startswith("my-law.json: ")


def test_bad_json_file(tmp_path):
    (tmp_path / "broken.json").write_text("{")
    with pytest.raises(BasisFileError, match="broken.json: \\$: not valid JSON"):
        load_folder(tmp_path)


@pytest.mark.parametrize(
    ("csv_text", "words"),
    [
        ("age,q\n50,0.1\n52,1\n", "age 52 where 51 was expected"),
        ("age,rate\n50,1\n", "columns age,q"),
        ("age,q\n50,abc\n", "not a number"),
        ("age,q\n50,\n", "not a number"),
    ],
)
def test_bad_rates_file(tmp_path, csv_text, words):
    (tmp_path / "rates.csv").write_text(csv_text)
    document = {**GOOD, "id": "my-table", "rates_files": {"q": "rates.csv"},
                "definition": {"type": "table", "start_age": 50, "fractional_ages": "udd"}}
    write_basis(tmp_path, document)
    with pytest.raises(BasisFileError) as caught:
        load_folder(tmp_path)
    assert caught.value.field == "$.rates_files.q"
    assert words in caught.value.message


def test_rates_file_must_exist_and_fit_the_type(tmp_path):
    document = {**GOOD, "rates_files": {"q": "missing.csv"}}
    write_basis(tmp_path, document)
    with pytest.raises(BasisFileError) as caught:
        load_folder(tmp_path)
    assert caught.value.field == "$.rates_files.q"  # a gompertz law takes no rates file


# ---- fingerprints ---------------------------------------------------------------------------


def test_canonical_json_form():
    assert canonical_json(d.Gompertz(B=1.0, c=1.5)) == b'{"B":1.0,"c":1.5,"type":"gompertz"}'
    assert canonical_json(d.Makeham(A=-0.0, B=2.7e-6, c=1.124)) == (
        b'{"A":0.0,"B":2.7e-6,"c":1.124,"type":"makeham"}'
    )
    table = d.Table(start_age=20, q=[0.5, 1.0], fractional_ages="udd")
    assert canonical_json(table) == (
        b'{"fractional_ages":"udd","q":[0.5,1.0],"start_age":20,"type":"table"}'
    )


def test_fingerprint_differs_with_any_parameter():
    base = fingerprint(d.Gompertz(B=0.0001, c=1.1))
    assert base.startswith("sha256:") and len(base) == 7 + 64
    assert fingerprint(d.Gompertz(B=0.0001, c=1.1000000000000003)) != base
    assert fingerprint(d.Gompertz(B=0.0001, c=1.1)) == base


# ---- compiling and caching -------------------------------------------------------------------


def test_every_kind_has_a_builder():
    assert set(registered_kinds()) == set(d.BASIS_KINDS)


def test_builder_errors_are_domain_errors():
    with pytest.raises(DomainError) as caught:
        build_model(d.Makeham(A=-0.01, B=0.0001, c=1.1))
    assert caught.value.field == "A"


def test_cache_is_bounded_lru():
    cache: ModelCache[int] = ModelCache(2)
    cache.put("a", 1)
    cache.put("b", 2)
    assert cache.get("a") == 1  # a is now the most recent
    cache.put("c", 3)  # b goes
    assert "b" not in cache and "a" in cache and "c" in cache
    assert len(cache) == 2
    assert (cache.hits, cache.misses) == (1, 0)
    assert cache.get("b") is None and cache.misses == 1


def test_cache_of_size_zero_keeps_nothing():
    cache: ModelCache[int] = ModelCache(0)
    assert cache.get_or_build("a", lambda: 1) == 1
    assert len(cache) == 0


def test_cache_is_thread_safe():
    cache: ModelCache[int] = ModelCache(50)
    errors = []

    def work(offset: int) -> None:
        try:
            for i in range(2000):
                key = str((i * 7 + offset) % 120)
                value = cache.get_or_build(key, lambda k=key: int(k))
                assert value == int(key)
        except Exception as exc:  # pragma: no cover - reported below
            errors.append(exc)

    threads = [threading.Thread(target=work, args=(n,)) for n in range(8)]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join(timeout=60)
    assert not errors
    assert len(cache) <= 50
    assert cache.hits + cache.misses == 8 * 2000


def test_catalogue_resolves_stored_inline_and_cached():
    catalogue = Catalogue(cache_size=4)
    catalogue.load()
    stored = catalogue.resolve("standard-ultimate")
    assert isinstance(stored, ResolvedBasis) and stored.id == "standard-ultimate"
    same = catalogue.resolve(d.Makeham(A=0.00022, B=2.7e-6, c=1.124))
    assert same.id is None and same.model is stored.model  # stored bases are always hot
    inline = d.Gompertz(B=0.0001, c=1.1)
    first = catalogue.resolve(inline)
    again = catalogue.resolve(d.Gompertz(B=0.0001, c=1.1))
    assert again.model is first.model
    with pytest.raises(UnknownBasisError):
        catalogue.resolve("nothing")
