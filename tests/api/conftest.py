from __future__ import annotations

from collections.abc import Iterator

import pytest
from litestar.testing import TestClient

from service.api.app import create_app
from service.settings import Settings


@pytest.fixture(scope="module")
def client() -> Iterator[TestClient]:
    """A client of the application with the shipped bases, started (stored bases loaded)."""
    with TestClient(create_app(Settings())) as test_client:
        yield test_client


@pytest.fixture(scope="session")
def assert_problem():
    """The checker of problem+json answers (see ``check_problem``)."""
    return check_problem


def check_problem(response, status: int, kind: str, fields: list[str] | None = None) -> dict:
    """The answer is a problem+json of this status and kind, with exactly these fields."""
    assert response.status_code == status, response.text
    assert response.headers["content-type"].startswith("application/problem+json")
    assert response.headers["cache-control"] == "no-store"
    assert response.headers["x-content-type-options"] == "nosniff"
    body = response.json()
    expected_keys = {"type", "title", "status", "detail"} | ({"errors"} if fields else set())
    assert set(body) == expected_keys, body
    assert body["type"] == f"/problems/{kind}"
    assert body["status"] == status
    assert isinstance(body["title"], str) and body["title"]
    assert isinstance(body["detail"], str) and body["detail"]
    if fields:
        assert [e["field"] for e in body["errors"]] == fields, body
        for error in body["errors"]:
            assert set(error) == {"field", "message"}
            assert isinstance(error["message"], str) and error["message"]
    return body
