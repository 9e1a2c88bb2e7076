"""A bounded soak of the real server: concurrent clients on loopback, every endpoint, stored
bases and thousands of distinct inline bases; resident memory and the basis cache measured."""

from __future__ import annotations

import random
import re
import threading
import time
from collections import Counter
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field

import httpx

from .server import Server, resident_kib

STORED = ["standard-ultimate", "thistlemoor-2024-male", "thistlemoor-2024-female"]


def inline_basis(n: int) -> dict:
    """The n-th of many distinct inline bases (laws and tables)."""
    kind = n % 4
    if kind == 0:
        return {"type": "gompertz", "B": 1e-5 * (1 + n * 1e-4), "c": 1.1}
    if kind == 1:
        return {"type": "makeham", "A": 0.0002, "B": 2.7e-6 * (1 + n * 1e-4), "c": 1.124}
    if kind == 2:
        return {"type": "constant-force", "mu": 0.01 * (1 + n * 1e-4)}
    q = [min(0.001 * (1 + n * 1e-5) * 1.1**k, 0.9) for k in range(60)] + [1.0]
    return {"type": "table", "start_age": 40, "q": q, "fractional_ages": "udd"}


def request_for(rng: random.Random, n: int) -> tuple[str, dict]:
    basis = rng.choice(STORED) if rng.random() < 0.5 else inline_basis(n)
    age = 40 + rng.random() * 40
    lives = [{"age": age + i} for i in range(rng.randint(1, 5))]
    path = rng.choice(
        ["survival", "deferred-death", "expectation", "moments", "quantiles", "life-table"]
    )
    if path == "survival":
        body = {"basis": basis, "lives": lives, "t": [0.5, 1, 5, 10]}
    elif path == "deferred-death":
        body = {"basis": basis, "lives": lives, "deferral": [0, 1, 2, 10]}
    elif path == "expectation":
        body = {"basis": basis, "lives": lives, "term": rng.choice([None, 10])}
        if body["term"] is None:
            del body["term"]
    elif path == "moments":
        body = {"basis": basis, "lives": lives, "orders": [1, 2, 3]}
    elif path == "quantiles":
        body = {"basis": basis, "lives": lives, "probabilities": [0.1, 0.5, 0.9]}
    else:
        body = {"basis": basis, "start_age": age, "end_age": age + 10}
    return f"/v1/{path}", body


@dataclass
class SoakResult:
    requests: int = 0
    errors: list = field(default_factory=list)
    statuses: Counter = field(default_factory=Counter)
    rss_after_warm_up_kib: int = 0
    rss_at_end_kib: int = 0
    cache_size: float = 0
    cache_capacity: float = 0
    distinct_inline: int = 0
    seconds: float = 0.0


def metric(text: str, name: str) -> float:
    found = re.search(rf"^{name} ([0-9.e+]+)$", text, re.M)
    assert found, name
    return float(found.group(1))


def soak(server: Server, seconds: float, clients: int = 8, warm_up: float = 5.0,
         max_requests: int = 2_000_000) -> SoakResult:
    result = SoakResult()
    lock = threading.Lock()
    counter = iter(range(max_requests))
    started = time.monotonic()
    deadline = started + warm_up + seconds

    def client_loop(seed: int) -> None:
        rng = random.Random(seed)
        with httpx.Client(base_url=server.base, timeout=30.0) as http:
            while time.monotonic() < deadline:
                with lock:
                    n = next(counter, None)
                if n is None:
                    return
                path, body = request_for(rng, n)
                try:
                    response = http.post(path, json=body)
                    status = response.status_code
                    ok = status == 200 and "NaN" not in response.text
                except httpx.HTTPError as exc:  # a dropped request
                    status, ok = type(exc).__name__, False
                with lock:
                    result.requests += 1
                    result.statuses[status] += 1
                    if not ok and len(result.errors) < 20:
                        result.errors.append((path, body, status))

    with ThreadPoolExecutor(clients) as pool:
        futures = [pool.submit(client_loop, seed) for seed in range(clients)]
        time.sleep(warm_up)
        result.rss_after_warm_up_kib = resident_kib(server.pid)
        for f in futures:
            f.result()
    result.seconds = time.monotonic() - started
    result.rss_at_end_kib = resident_kib(server.pid)
    text = httpx.get(f"{server.base}/metrics", timeout=10).text
    result.cache_size = metric(text, "lifetime_basis_cache_size")
    result.cache_capacity = metric(text, "lifetime_basis_cache_capacity")
    result.distinct_inline = int(metric(text, "lifetime_basis_cache_misses_total")
                                 if "lifetime_basis_cache_misses_total" in text
                                 else metric(text, "lifetime_basis_cache_misses"))
    return result


def report(result: SoakResult) -> str:
    growth = result.rss_at_end_kib / result.rss_after_warm_up_kib - 1.0
    return (
        f"soak: {result.requests} requests in {result.seconds:.1f} s "
        f"({result.requests / result.seconds:.0f}/s), statuses {dict(result.statuses)}, "
        f"errors {len(result.errors)}; inline bases compiled {result.distinct_inline}; "
        f"RSS after warm-up {result.rss_after_warm_up_kib / 1024:.1f} MiB, at end "
        f"{result.rss_at_end_kib / 1024:.1f} MiB ({growth:+.1%}); cache "
        f"{result.cache_size:.0f}/{result.cache_capacity:.0f}"
    )
