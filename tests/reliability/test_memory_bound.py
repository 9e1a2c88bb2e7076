"""Memory is bounded in bytes: the compiled inline bases kept by the real server stay within
the cache_bytes setting, and an inline basis too large to keep is refused before compiling.

Resident memory is read from /proc/<pid>/status (VmRSS), the kernel's own account.
"""

from __future__ import annotations

import re
from collections.abc import Iterator

import httpx
import pytest

from .server import Server, resident_kib, start_server

CACHE_MIB = 64


def select_table(rows: int, salt: int) -> dict:
    """An invented select table: ``rows`` selection ages, 100 select rates each, then 1,000
    ultimate rates closing with 1 (about 24 MiB compiled per 100 rows)."""
    return {
        "type": "select-table",
        "start_age": 0,
        "select": [[0.001 + salt * 1e-7] * 100 for _ in range(rows)],
        "ultimate_start_age": 100,
        "ultimate": [0.002] * 999 + [1.0],
        "fractional_ages": "udd",
    }


@pytest.fixture(scope="module")
def small_cache(tmp_path_factory) -> Iterator[Server]:
    running = start_server(tmp_path_factory.mktemp("memory"), "--cache-bytes", str(CACHE_MIB * 2**20))
    try:
        yield running
    finally:
        running.stop()


def _cache_bytes(server: Server) -> float:
    text = httpx.get(f"{server.base}/metrics", timeout=10).text
    return float(re.search(r"^lifetime_basis_cache_bytes (\S+)$", text, re.M).group(1))


def test_resident_memory_stays_within_the_cache_bound(small_cache):
    before = resident_kib(small_cache.pid)
    with httpx.Client(base_url=small_cache.base, timeout=60) as client:
        for salt in range(8):  # 8 distinct bases of about 24 MiB each: 3 times the bound
            body = {"basis": select_table(100, salt), "lives": [{"age": 60}]}
            r = client.post("/v1/expectation", json=body)
            assert r.status_code == 200, r.text
            assert _cache_bytes(small_cache) <= CACHE_MIB * 2**20
    grown_mib = (resident_kib(small_cache.pid) - before) / 1024
    print(f"\nresident memory: {before / 1024:.0f} MiB before, grew by {grown_mib:.0f} MiB "
          f"after 8 bases of about 24 MiB each (cache_bytes {CACHE_MIB} MiB)")
    # the cache holds at most the bound; the rest is the allocator's slack of one compile
    assert grown_mib < CACHE_MIB + 48


def test_a_basis_too_large_to_keep_is_refused_before_compiling(small_cache):
    before = resident_kib(small_cache.pid)
    body = {"basis": select_table(1000, 99), "lives": [{"age": 60}]}  # about 235 MiB compiled
    r = httpx.post(f"{small_cache.base}/v1/expectation", json=body, timeout=60)
    assert r.status_code == 422, r.text
    assert r.headers["content-type"] == "application/problem+json"
    error = r.json()["errors"][0]
    assert error["field"] == "$.basis"
    assert "cache_bytes" in error["message"]
    assert (resident_kib(small_cache.pid) - before) < 32 * 1024
