"""Several worker processes (--workers 2): /metrics reports the whole service, whichever
worker answers it (the Prometheus client's multiprocess mode), and the workers' metric
files go when the service stops."""

from __future__ import annotations

import os
import re
from collections.abc import Iterator
from pathlib import Path

import httpx
import pytest

from .server import Server, start_server

REQUESTS = 20


@pytest.fixture(scope="module")
def two_workers(tmp_path_factory) -> Iterator[tuple[Server, Path]]:
    folders = tmp_path_factory.mktemp("tmp")
    running = start_server(tmp_path_factory.mktemp("workers"), "--workers", "2",
                           env={"TMPDIR": str(folders)})
    try:
        yield running, folders
    finally:
        running.stop()


def _total(text: str, route: str, status: str) -> float:
    pattern = (rf'^lifetime_http_requests_total\{{method="POST",route="{re.escape(route)}",'
               rf'status="{status}"\}} ([0-9.e+]+)$')
    found = re.findall(pattern, text, re.M)
    return sum(float(v) for v in found)


def _requests_by_worker(folder: Path) -> dict[str, float]:
    """The POST /v1/expectation 200 answers each worker has counted, from its own file."""
    from prometheus_client.mmap_dict import MmapedDict

    counted = {}
    for path in folder.glob("counter_*.db"):
        values = MmapedDict.read_all_values_from_file(str(path))
        counted[path.stem] = sum(
            value for key, value, *_ in values
            if '"/v1/expectation"' in key and '"200"' in key and "_total" in key
        )
    return counted


def test_metrics_count_the_requests_of_every_worker(two_workers):
    server, folders = two_workers
    (metrics_dir,) = folders.iterdir()
    # before any calculation, the first scrape already counts both workers' stored bases
    first = httpx.get(f"{server.base}/metrics", timeout=10).text
    assert re.search(r"^lifetime_stored_bases 5\.0$", first, re.M), first[-2000:]
    body = {"basis": "standard-ultimate", "lives": [{"age": 47.63}]}
    sent = 0
    # a new connection for each request, until both workers have answered some (bounded)
    while sent < 400:
        for _ in range(REQUESTS):
            assert httpx.post(f"{server.base}/v1/expectation", json=body, timeout=10).status_code == 200
        sent += REQUESTS
        by_worker = _requests_by_worker(metrics_dir)
        if len(by_worker) == 2 and min(by_worker.values()) > 0:
            break
    assert len(by_worker) == 2 and min(by_worker.values()) > 0, by_worker
    inline = {"basis": {"type": "gompertz", "B": 0.0003, "c": 1.07}, "lives": [{"age": 50}]}
    for _ in range(10):
        assert httpx.post(f"{server.base}/v1/expectation", json=inline, timeout=10).status_code == 200
    bad = httpx.post(f"{server.base}/v1/expectation", json={"basis": "standard-ultimate"},
                     timeout=10)
    assert bad.status_code == 400
    # every scrape, whichever worker answers it, counts every request of both
    for _ in range(6):
        text = httpx.get(f"{server.base}/metrics", timeout=10).text
        assert _total(text, "/v1/expectation", "200") == sent + 10
        assert _total(text, "/v1/expectation", "400") == 1
        hits = float(re.search(r"^lifetime_basis_cache_hits_total ([0-9.e+]+)$", text, re.M)[1])
        misses = float(re.search(r"^lifetime_basis_cache_misses_total ([0-9.e+]+)$", text, re.M)[1])
        # the inline basis is compiled once in each worker that saw it, then found again
        assert 1 <= misses <= 2 and hits + misses == 10
        stored = float(re.search(r"^lifetime_stored_bases ([0-9.e+]+)$", text, re.M)[1])
        assert stored == 5
        assert re.search(r"^lifetime_http_request_duration_seconds_count\{", text, re.M)


def test_the_workers_metric_files_go_when_the_service_stops(tmp_path):
    folders = tmp_path / "tmp"
    folders.mkdir()
    server = start_server(tmp_path, "--workers", "2", env={"TMPDIR": str(folders)})
    try:
        made = [p for p in folders.iterdir() if p.name.startswith("lifetime-service-metrics-")]
        assert len(made) == 1
        assert httpx.get(f"{server.base}/health", timeout=10).status_code == 200
        assert any(made[0].iterdir())  # the workers' files
    finally:
        code = server.stop()
    assert code == 0
    assert not any(p.name.startswith("lifetime-service-metrics-") for p in folders.iterdir())


def test_one_worker_keeps_its_metrics_in_memory(tmp_path):
    folders = tmp_path / "tmp"
    folders.mkdir()
    server = start_server(tmp_path, env={"TMPDIR": str(folders)})
    try:
        text = httpx.get(f"{server.base}/metrics", timeout=10).text
        assert "lifetime_basis_cache_capacity 256.0" in text
    finally:
        server.stop()
    assert os.listdir(folders) == []
