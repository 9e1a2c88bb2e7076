"""Stored bases: the ETag over the whole answer, and earlier versions kept and fetched by
fingerprint."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest
from litestar.testing import TestClient

from service.api.app import create_app
from service.bases.catalogue import PACKAGED_BASES_DIR, BasisFileError, Catalogue
from service.settings import Settings

ANNUITANTS = "thistlemoor-2024-annuitants"


def _client(folder: Path) -> TestClient:
    return TestClient(create_app(Settings(bases_dir=str(folder)), Catalogue(folder)))


def _edit(path: Path, **changes) -> None:
    document = json.loads(path.read_text(encoding="utf-8"))
    document.update(changes)
    path.write_text(json.dumps(document), encoding="utf-8")


def test_editing_only_the_title_changes_the_etag(tmp_path):
    shutil.copy(PACKAGED_BASES_DIR / "standard-ultimate.json", tmp_path)
    with _client(tmp_path) as client:
        before = client.get("/v1/bases/standard-ultimate")
    _edit(tmp_path / "standard-ultimate.json", title="Standard Ultimate Life Table, retitled")
    with _client(tmp_path) as client:
        after = client.get("/v1/bases/standard-ultimate",
                           headers={"If-None-Match": before.headers["etag"]})
    assert after.status_code == 200  # not 304: the answer is not the one the client holds
    assert after.json()["fingerprint"] == before.json()["fingerprint"]  # same definition
    assert after.headers["etag"] != before.headers["etag"]


def test_the_shipped_earlier_version_is_listed_and_fetched_by_fingerprint(client):
    listed = client.get(f"/v1/bases/{ANNUITANTS}/versions").json()
    current, earlier = listed["versions"]
    assert current["current"] and not earlier["current"]
    assert current["fingerprint"] == client.get(f"/v1/bases/{ANNUITANTS}").json()["fingerprint"]
    old = client.get(f"/v1/bases/{ANNUITANTS}/versions/{earlier['fingerprint']}")
    assert old.status_code == 200 and old.json()["version"] == earlier["version"] == "2023.2"
    assert old.headers["etag"].startswith('"sha256:')
    again = client.get(f"/v1/bases/{ANNUITANTS}/versions/{earlier['fingerprint']}",
                       headers={"If-None-Match": old.headers["etag"]})
    assert again.status_code == 304
    # an answer made on the earlier version is reproduced by sending its definition inline:
    # the basis fingerprint the answer records is the version's
    quote = client.post("/v1/expectation",
                        json={"basis": old.json()["definition"], "lives": [{"age": 65}]}).json()
    assert quote["basis"]["fingerprint"] == earlier["fingerprint"]
    now = client.post("/v1/expectation", json={"basis": ANNUITANTS, "lives": [{"age": 65}]}).json()
    # the 2023 rates are heavier (B larger), so its lives live shorter
    assert quote["results"][0]["complete"] < now["results"][0]["complete"]


def test_the_current_version_is_fetched_by_its_fingerprint_too(client):
    current = client.get(f"/v1/bases/{ANNUITANTS}").json()
    by_fingerprint = client.get(f"/v1/bases/{ANNUITANTS}/versions/{current['fingerprint']}")
    assert by_fingerprint.json() == current


@pytest.mark.parametrize(
    "path,kind",
    [
        (f"/v1/bases/{ANNUITANTS}/versions/sha256:{'0' * 64}", "unknown-basis-version"),
        (f"/v1/bases/{ANNUITANTS}/versions/not-a-fingerprint", "unknown-basis-version"),
        ("/v1/bases/no-such-basis/versions", "unknown-basis"),
        (f"/v1/bases/no-such-basis/versions/sha256:{'0' * 64}", "unknown-basis"),
    ],
)
def test_an_unknown_version_is_404_problem_json(client, assert_problem, path, kind):
    body = assert_problem(client.get(path), 404, kind)
    assert "versions lists them" in body["detail"] or "GET /v1/bases lists them" in body["detail"]


def test_a_bad_earlier_version_stops_the_start_naming_the_file(tmp_path):
    shutil.copy(PACKAGED_BASES_DIR / "standard-ultimate.json", tmp_path)
    versions = tmp_path / "standard-ultimate.versions"
    versions.mkdir()
    shutil.copy(PACKAGED_BASES_DIR / "standard-ultimate.json", versions / "0.json")
    _edit(versions / "0.json", id="another-id")
    with pytest.raises(BasisFileError, match=r"standard-ultimate.versions/0.json: \$\.id"):
        Catalogue(tmp_path).load()
    _edit(versions / "0.json", id="standard-ultimate", definition={"type": "gompertz", "B": 1, "c": 0.5})
    with pytest.raises(BasisFileError, match=r"standard-ultimate.versions/0.json: \$\.definition\.c"):
        Catalogue(tmp_path).load()
    shutil.rmtree(versions)
    (tmp_path / "orphan.versions").mkdir()
    with pytest.raises(BasisFileError, match="there is no orphan.json"):
        Catalogue(tmp_path).load()
