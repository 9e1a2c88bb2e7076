"""The long soak (not in the default run): `python -m pytest tests/benchmarks/test_soak_long.py
-s`, SOAK_LONG_SECONDS to set its length (default 600 s). Reports the figures; asserts zero
errors, the cache bound and resident memory within 10 % of its level after warm-up."""

from __future__ import annotations

import os

from tests.reliability.server import start_server
from tests.reliability.soak import report, soak

SECONDS = float(os.environ.get("SOAK_LONG_SECONDS", "600"))


def test_long_soak(tmp_path):
    server = start_server(tmp_path, "--log-level", "warning")
    try:
        result = soak(server, SECONDS, clients=16, warm_up=30.0)
    finally:
        server.stop()
    print("\n" + report(result))
    assert result.errors == []
    assert result.cache_size <= result.cache_capacity
    assert result.rss_at_end_kib <= 1.10 * result.rss_after_warm_up_kib
