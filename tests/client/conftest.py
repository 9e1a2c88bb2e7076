from __future__ import annotations

from collections.abc import Iterator

import pytest

from service.launch import LocalService


@pytest.fixture(scope="module")
def service(tmp_path_factory) -> Iterator[LocalService]:
    """The real server (python -m service) on a free 127.0.0.1 port, default settings."""
    with LocalService(log_path=tmp_path_factory.mktemp("service") / "service.log") as running:
        yield running
