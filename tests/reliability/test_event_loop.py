"""Heavy work is estimated before it runs: refused above the budget, offloaded below it, so
the event loop stays free and /health answers promptly while heavy requests run.

The heavy requests are the reproducers of the second robustness round (an 8-member
last-survivor status, 10,000 lives on a force-rated table, nested time-limited extras);
times are of the real server on 127.0.0.1.
"""

from __future__ import annotations

import statistics
import threading
import time

import httpx
import pytest

MALE, FEMALE = "thistlemoor-2024-male", "thistlemoor-2024-female"
GOMPERTZ = {"type": "gompertz", "B": 3e-5, "c": 1.1}
LAST_SURVIVOR_8 = {"type": "last-survivor", "members": [MALE, FEMALE] * 4}


def _nested_extras(levels: int) -> dict:
    basis: dict = GOMPERTZ
    for i in range(levels):
        basis = {"type": "adjusted", "base": basis, "extra_force": 0.001, "extra_force_years": 5 + i}
    return basis


def _status_lives(n: int) -> list[dict]:
    return [{"ages": [60 + i % 10 + 0.3] * 8} for i in range(n)]


HEAVY = [
    ("/v1/expectation", {"basis": LAST_SURVIVOR_8, "lives": _status_lives(150)}, "$.lives"),
    ("/v1/expectation", {"basis": {"type": "adjusted", "base": MALE, "force_multiplier": 1.3},
                         "lives": [{"age": 20 + (i % 800) / 10} for i in range(10_000)]}, "$.lives"),
    ("/v1/expectation", {"basis": _nested_extras(7), "lives": [{"age": 60}]}, "$.basis"),
    ("/v1/present-values", {"basis": LAST_SURVIVOR_8, "lives": _status_lives(100),
                            "interest": {"rate": 0.03},
                            "benefits": [{"type": "life-insurance", "timing": "moment-of-death"}]},
     "$.lives"),
]


@pytest.mark.parametrize("path, body, field", HEAVY, ids=["status-8", "force-rated-10000",
                                                         "nested-extras", "status-8-insurance"])
def test_work_above_the_budget_is_refused_up_front(server, path, body, field):
    started = time.monotonic()
    r = httpx.post(server.base + path, json=body, timeout=60)
    took = time.monotonic() - started
    assert r.status_code == 422, r.text
    assert r.headers["content-type"] == "application/problem+json"
    error = r.json()["errors"][0]
    assert error["field"] == field
    assert "max_request_seconds" in error["message"]
    assert took < 1.0, f"refusing took {took:.2f} s: the estimate must come before the work"
    if field == "$.lives":
        # the advice is usable: a request of the size it names is accepted
        fitting = int(error["message"].rsplit("at most ", 1)[1].split()[0])
        smaller = {**body, "lives": body["lives"][:fitting]}
        r = httpx.post(server.base + path, json=smaller, timeout=60)
        assert r.status_code == 200, r.text


def test_health_answers_promptly_while_heavy_requests_run(server):
    # two requests just inside the budget (an 8-member status, 20 lives each)
    body = {"basis": LAST_SURVIVOR_8, "lives": _status_lives(20)}
    statuses: list[int] = []

    def heavy() -> None:
        r = httpx.post(server.base + "/v1/expectation", json=body, timeout=60)
        statuses.append(r.status_code)

    workers = [threading.Thread(target=heavy) for _ in range(2)]
    for w in workers:
        w.start()
    latencies = []
    with httpx.Client(base_url=server.base, timeout=10) as client:
        client.get("/health")
        while any(w.is_alive() for w in workers) and len(latencies) < 200:
            started = time.perf_counter()
            assert client.get("/health").status_code == 200
            latencies.append(time.perf_counter() - started)
            time.sleep(0.02)
    for w in workers:
        w.join(timeout=60)
    assert statuses == [200, 200]
    assert len(latencies) >= 5, "the heavy requests ended before /health could be timed"
    latencies.sort()
    p90 = latencies[int(0.9 * (len(latencies) - 1))]
    print(f"\n/health under load: {len(latencies)} probes, median "
          f"{1000 * statistics.median(latencies):.1f} ms, 90th percentile {1000 * p90:.1f} ms, "
          f"worst {1000 * latencies[-1]:.1f} ms")
    assert statistics.median(latencies) < 0.05
    assert p90 < 0.1
