from __future__ import annotations

from collections.abc import Iterator

import pytest
from litestar.testing import TestClient

from service.api.app import create_app
from service.settings import Settings

from .server import Server, start_server


@pytest.fixture(scope="module")
def client() -> Iterator[TestClient]:
    """The application in process, with the shipped bases loaded."""
    with TestClient(create_app(Settings())) as test_client:
        yield test_client


@pytest.fixture(scope="module")
def server(tmp_path_factory) -> Iterator[Server]:
    """The real server (python -m service) on a free loopback port, default settings."""
    running = start_server(tmp_path_factory.mktemp("server"))
    try:
        yield running
    finally:
        running.stop()
